/*!
Stellar templates: a spectral sequence from hot to cool stars plus a hydrogen
white dwarf. The continuum is that of a Milne–Eddington atmosphere (the Planck
function at the depth where each wavelength's optical depth is 2/3, see
[`continuum`]) with hydrogen bound-free and grey opacities; lines and bands are
optical-depth profiles on top.

Every ingredient follows the textbook behaviour of the sequence (from memory,
common practice in spectral classification):
- hydrogen (Balmer, Paschen) lines and the Balmer jump are strongest near
  T ≈ 9500 K (A0) and fade towards hot and cool stars;
- metal lines (Ca II H&K, Ca I, the G band, Mg b, Fe, Na D, the Ca II triplet,
  K I, the Na I doublet) grow towards cool types, and line blanketing depresses
  the blue and ultraviolet, producing the 4000 Å break;
- He I lines mark B stars, He II lines O stars;
- TiO bands (heads degraded to the red) dominate M stars;
- a DA white dwarf has only hydrogen lines, pressure-broadened to very wide wings.
*/
use super::profiles::{
    add_band, apply_tau, convolve_velocity, hydrogen_wave, median_in, planck, sigmoid, Absorber, Grid,
};
use crate::lines::wave_of;
use serde::Serialize;

/// One stellar type of the sequence.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct StarType {
    /// Template name.
    pub name: &'static str,
    /// Effective temperature (K), typical of the type (from memory).
    pub teff: f64,
    /// A pressure-broadened hydrogen-atmosphere white dwarf.
    pub white_dwarf: bool,
}

/// The built-in sequence (effective temperatures from memory, common practice).
pub const SEQUENCE: &[StarType] = &[
    StarType {
        name: "star-O",
        teff: 38_000.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-B",
        teff: 17_000.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-B8",
        teff: 12_000.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-A",
        teff: 9_500.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-A2",
        teff: 9_000.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-A5",
        teff: 8_200.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-F",
        teff: 6_800.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-G",
        teff: 5_800.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-K",
        teff: 4_600.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-M0",
        teff: 3_850.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-M4",
        teff: 3_200.0,
        white_dwarf: false,
    },
    StarType {
        name: "star-WD-DA",
        teff: 16_000.0,
        white_dwarf: true,
    },
];

/// Velocity dispersion (km/s) of the stellar templates' lines: thermal,
/// turbulent and rotational broadening together, typical of dwarfs (common practice).
pub const STAR_SIGMA_KMS: f64 = 40.0;

/// Instrumental dispersion (km/s) the built-in templates are smoothed to:
/// R ≈ 2000, typical of survey spectrographs and close to the engine's
/// 69 km/s pixels (common practice).
pub const INSTRUMENT_SIGMA_KMS: f64 = 60.0;

/// Strength (0–1) of the hydrogen lines: peaks at A0 (9500 K).
pub fn hydrogen_strength(t: f64) -> f64 {
    0.06 + 0.94 * (-(((t / 9_500.0).log10()) / 0.17).powi(2)).exp()
}

/// Strength (0–1) of the neutral and singly ionised metal lines: grows below ~6500 K.
pub fn metal_strength(t: f64) -> f64 {
    sigmoid((6_400.0 - t) / 650.0)
}

/// Strength (0–1) of TiO: appears below ~4000 K.
pub fn tio_strength(t: f64) -> f64 {
    sigmoid((3_950.0 - t) / 160.0)
}

/// Metal lines: (line name, central τ at full strength, extra Lorentz γ Å,
/// exponent on the metal strength — 2 for lines only cool stars show).
const METALS: &[(&str, f64, f64, i32)] = &[
    ("Mg II 2796", 6.0, 3.0, 1),
    ("Mg II 2804", 5.0, 3.0, 1),
    ("Mg I 2853", 2.5, 1.0, 1),
    ("Ca II K", 3.5, 6.0, 1),
    ("Ca II H", 3.0, 5.0, 1),
    ("Ca I 4228", 1.8, 1.0, 2),
    ("Fe I 4385", 0.7, 0.0, 1),
    ("Mg b 5169", 1.0, 0.8, 1),
    ("Mg b 5174", 1.2, 0.8, 1),
    ("Mg b 5185", 1.4, 0.8, 1),
    ("Fe I 5271", 0.6, 0.0, 1),
    ("Fe I 5330", 0.4, 0.0, 1),
    ("Na D2", 1.8, 1.0, 1),
    ("Na D1", 1.5, 1.0, 1),
    ("K I 7667", 1.0, 0.5, 2),
    ("K I 7701", 0.8, 0.5, 2),
    ("Na I 8186", 0.8, 0.3, 2),
    ("Na I 8197", 0.9, 0.3, 2),
    ("Ca II 8500", 1.0, 1.0, 1),
    ("Ca II 8544", 1.6, 1.5, 1),
    ("Ca II 8664", 1.3, 1.2, 1),
    ("Mg I 8809", 0.4, 0.0, 1),
];

/// Further strong metal lines of F–K stars (the deepest solar Fraunhofer
/// lines besides those in the line list): name, vacuum Å, central τ at full
/// strength. Laboratory air wavelengths from memory (NIST), converted once to
/// vacuum with the standard dispersion formula.
const MORE_METALS: &[(&str, f64, f64)] = &[
    ("Mn I 4032", 4031.90, 0.6),
    ("Fe I 4047", 4046.95, 0.7),
    ("Fe I 4065", 4064.74, 0.6),
    ("Fe I 4073", 4072.89, 0.6),
    ("Sr II 4079", 4078.86, 0.5),
    ("Sr II 4217", 4216.71, 0.4),
    ("Fe I 4262", 4261.67, 0.4),
    ("Fe I 4327", 4326.98, 0.6),
    ("Fe I 4406", 4405.99, 0.6),
    ("Fe I 4416", 4416.36, 0.5),
    ("Ca I 4456", 4456.03, 0.4),
    ("Ba II 4555", 4555.31, 0.4),
    ("Fe I 4959", 4958.98, 0.4),
    ("Cr I 5207", 5207.49, 0.5),
    ("Fe I 5229", 5228.65, 0.4),
    ("Fe I 5373", 5372.98, 0.4),
    ("Fe I 5399", 5398.63, 0.4),
    ("Fe I 5407", 5407.27, 0.4),
    ("Fe I 5431", 5431.21, 0.4),
    ("Fe I 5448", 5448.43, 0.5),
    ("Ca I 6104", 6104.41, 0.3),
    ("Ca I 6124", 6123.91, 0.4),
    ("Ca I 6164", 6163.88, 0.4),
    ("Fe I 6254", 6254.29, 0.3),
    ("Ca I 6441", 6440.86, 0.3),
    ("Fe I 6497", 6496.77, 0.3),
    ("Ba II 6499", 6498.70, 0.3),
    ("Al I 3945", 3945.13, 0.4),
    ("Al I 3963", 3962.64, 0.4),
    ("Fe I 8691", 8691.02, 0.3),
];

/// TiO band heads (vacuum Å, air values from memory converted), central τ at
/// full strength, e-folding length (Å).
const TIO: &[(f64, f64, f64)] = &[
    (4955.4, 0.5, 60.0),
    (5168.4, 0.7, 80.0),
    (5449.5, 0.7, 100.0),
    (5848.6, 0.6, 100.0),
    (6160.7, 0.9, 120.0),
    (6652.8, 0.6, 150.0),
    (7055.9, 1.2, 200.0),
    (7591.1, 0.8, 150.0),
    (8434.3, 0.5, 150.0),
    (8861.4, 0.4, 150.0),
];

/// Highest upper level drawn as a separate line; above it the lines of a
/// dwarf's atmosphere merge into a pseudo-continuum (Inglis–Teller limit,
/// n ≈ 15–20 for main-sequence gravities; from memory).
pub const N_MERGE: u32 = 16;

/// Hydrogen lines: lower level 2 (Balmer) and 3 (Paschen), upper level ≤ [`N_MERGE`].
pub(crate) fn hydrogen_lines() -> Vec<(u32, u32, f64)> {
    let named = [
        (2, 3, "Hα"),
        (2, 4, "Hβ"),
        (2, 5, "Hγ"),
        (2, 6, "Hδ"),
        (2, 7, "Hε"),
        (2, 8, "H8"),
        (2, 9, "H9"),
        (2, 10, "H10"),
        (3, 7, "Paδ"),
        (3, 8, "Paε"),
        (3, 6, "Paγ"),
    ];
    let mut out = Vec::new();
    for lower in [2u32, 3] {
        for upper in lower + 1..=N_MERGE {
            let w = named
                .iter()
                .find(|(a, b, _)| *a == lower && *b == upper)
                .map(|(_, _, n)| wave_of(n))
                .unwrap_or_else(|| hydrogen_wave(lower, upper));
            out.push((lower, upper, w));
        }
    }
    out
}

/// Hydrogen bound-free opacity per unit mass at `lam` Å and temperature `t`,
/// up to a constant: Kramers' cross-section σ_n ∝ n⁻⁵ λ³ below each edge and
/// Boltzmann level populations N_n ∝ n² exp(−E_n/kT), for n = 1…6. Each edge
/// sits where the merged series members end ([`N_MERGE`]), smoothed over
/// ~15 Å × (edge/3646 Å), because the last lines dissolve into the continuum.
pub fn hydrogen_bound_free(lam: f64, t: f64) -> f64 {
    const RYDBERG_EV: f64 = 13.605_693; // CODATA
    const K_EV: f64 = 8.617_333_262e-5; // Boltzmann constant, eV/K (CODATA)
    (1u32..=6)
        .map(|n| {
            let nf = f64::from(n);
            let edge = hydrogen_wave(n, 100_000);
            let merge = if n == 1 {
                edge
            } else {
                hydrogen_wave(n, N_MERGE + 1)
            };
            let onset = sigmoid((merge - lam) / (15.0 * edge / 3_646.0));
            let e_n = RYDBERG_EV * (1.0 - 1.0 / (nf * nf));
            nf.powi(-3) * (-e_n / (K_EV * t)).exp() * (lam.min(edge) / 1e4).powi(3) * onset
        })
        .sum()
}

/// Grey opacity relative to hydrogen bound-free at 5000 Å (which comes from
/// level n = 3): H⁻ dominates cool atmospheres, and its ratio to the n = 3
/// population grows as exp(E₃/kT) when the temperature falls (E₃ = 12.09 eV,
/// the Boltzmann factor of that level); electron scattering adds to hot ones;
/// pressure ionisation flattens the Balmer jump of white dwarfs. The scale
/// (0.3 at 9500 K) and the other amplitudes are from memory / common practice.
pub fn grey_opacity(st: &StarType) -> f64 {
    const E3_EV: f64 = 12.09;
    const K_EV: f64 = 8.617_333_262e-5;
    let t = st.teff;
    let h_minus = 0.3 * (E3_EV / K_EV * (1.0 / t - 1.0 / 9_500.0)).exp();
    let electrons = 0.05 * (t / 9_500.0).powi(2);
    h_minus + electrons + if st.white_dwarf { 1.0 } else { 0.0 }
}

/// Continuum of a grey-ish atmosphere (Milne–Eddington): the emergent flux
/// at λ is roughly the Planck function at the depth where τ_λ = 2/3; with the
/// Eddington law T⁴(τ) = ¾ T_eff⁴ (τ + 2/3) on a Rosseland-like scale and
/// τ_λ = k_λ τ, that is T_λ = T_eff (½/k_λ + ½)^¼, k_λ the opacity relative to
/// its harmonic mean over 3000–10000 Å. Hydrogen bound-free opacity
/// ([`hydrogen_bound_free`]) gives the Balmer and Paschen jumps and the blue
/// optical colours of A stars; a large grey part gives a plain Planck curve.
pub fn continuum(waves: &[f64], t: f64, grey: f64) -> Vec<f64> {
    let reference = hydrogen_bound_free(5_000.0, t);
    let k = |l: f64| hydrogen_bound_free(l, t) / reference + grey;
    let n = 400;
    let mean_inv: f64 = (0..n)
        .map(|i| 1.0 / k(3_000.0 + 7_000.0 * f64::from(i) / f64::from(n - 1)))
        .sum::<f64>()
        / f64::from(n);
    waves
        .iter()
        .map(|&l| {
            let kl = k(l) * mean_inv;
            planck(l, t * (0.5 / kl + 0.5).powf(0.25))
        })
        .collect()
}

/// One star on `grid` as observed with instrumental dispersion
/// `instrument_kms` (a Gaussian convolution), normalised to a median of 1 over
/// 5400–5600 Å.
pub fn star(st: &StarType, grid: &Grid, instrument_kms: f64) -> Vec<f64> {
    let f = star_intrinsic(st, grid, STAR_SIGMA_KMS);
    let mut f = convolve_velocity(&f, grid, instrument_kms);
    let norm = median_in(&f, grid, 5_400.0, 5_600.0);
    for x in &mut f {
        *x /= norm;
    }
    f
}

/// One star on `grid` at full resolution, metal lines of dispersion
/// `sigma_kms`, normalised to a median of 1 over 5400–5600 Å.
pub fn star_intrinsic(st: &StarType, grid: &Grid, sigma_kms: f64) -> Vec<f64> {
    let (mut flux, mut tau) = atmosphere(st, grid, sigma_kms);
    let tio = if st.white_dwarf {
        0.0
    } else {
        tio_strength(st.teff)
    };
    for &(head, t0, len) in TIO {
        add_band(&mut tau, grid, head, t0 * tio, len);
    }
    apply_tau(&mut flux, &tau);
    let norm = median_in(&flux, grid, 5_400.0, 5_600.0);
    for f in &mut flux {
        *f /= norm;
    }
    flux
}

/// The continuum of `st` and the optical depth of its atomic lines, the
/// line blanketing and the G band, on `grid` (metal lines of dispersion
/// `sigma_kms`); molecular bands other than CH are left to the caller.
pub(crate) fn atmosphere(st: &StarType, grid: &Grid, sigma_kms: f64) -> (Vec<f64>, Vec<f64>) {
    let t = st.teff;
    let waves = grid.waves();
    let flux = continuum(&waves, t, grey_opacity(st));
    let mut tau = vec![0.0; grid.n];

    let h = if st.white_dwarf { 1.0 } else { hydrogen_strength(t) };
    let m = if st.white_dwarf { 0.0 } else { metal_strength(t) };
    let tio = if st.white_dwarf { 0.0 } else { tio_strength(t) };

    for (i, &l) in waves.iter().enumerate() {
        // Line blanketing by the many metal lines of cool stars: a step at
        // ~4000 Å that deepens towards the ultraviolet.
        let blue = sigmoid((4_000.0 - l) / 30.0);
        tau[i] += m * (0.45 * blue * (1.0 + (4_000.0 - l).max(0.0) / 700.0) + 0.08 * (4_500.0 / l).powi(4));
    }

    // Hydrogen lines: Stark wings in dwarfs, very wide in white dwarfs.
    // The widths and depths below were compared by eye with the A0V reference
    // spectrum that the integration tests fetch (a calibration: that star's
    // recovery is therefore no independent check of the A-type lines).
    // Upper members have smaller oscillator strengths but wider Stark
    // profiles, so their equivalent widths fall only slowly and they merge
    // towards the series limit (the Inglis–Teller effect).
    let (gamma0, tau_h) = if st.white_dwarf {
        (18.0, 2.5)
    } else {
        (16.0 * h, 0.8 * h)
    };
    for (lower, upper, w) in hydrogen_lines() {
        let first = lower + 1;
        let k = f64::from(upper - first);
        let series = if lower == 2 { 1.0 } else { 0.45 };
        Absorber {
            center: w,
            tau0: tau_h * series * (1.0 + k).powf(-0.3),
            sigma_kms: sigma_kms.max(20.0),
            // Stark widths grow with n; beyond Hδ the upper members' wings
            // overlap into the pseudo-continuum depression before the limit,
            // so their own widths are let shrink slowly.
            gamma: gamma0
                * (w / 4_861.0)
                * (1.0 + k.min(3.0)).powf(0.3)
                * (1.0 + (k - 3.0).max(0.0)).powf(-0.2),
            eta: 0.85,
            wing: 1.25,
        }
        .add_to(&mut tau, grid);
    }

    // Helium: He I in B stars, He II in O stars.
    let he1 = (-((t / 18_000.0).log10() / 0.12).powi(2)).exp();
    let he2 = sigmoid((t - 30_000.0) / 3_000.0);
    if !st.white_dwarf {
        for (name, s) in [("He I 4473", 0.5), ("He I 5877", 0.4), ("He I 6680", 0.3)] {
            Absorber {
                center: wave_of(name),
                tau0: s * he1,
                sigma_kms: sigma_kms.max(60.0),
                gamma: 0.0,
                eta: 0.0,
                wing: 1.0,
            }
            .add_to(&mut tau, grid);
        }
        Absorber {
            center: wave_of("He II 4687"),
            tau0: 0.4 * he2,
            sigma_kms: sigma_kms.max(80.0),
            gamma: 0.0,
            eta: 0.0,
            wing: 1.0,
        }
        .add_to(&mut tau, grid);
    }

    // Metals, with the weak interstellar-like Ca II K kept visible in A stars.
    for &(name, t0, gamma, power) in METALS {
        let s = if name.starts_with("Ca II") || name.starts_with("Mg II") {
            m.max(0.04)
        } else {
            m
        };
        let s = if st.white_dwarf { 0.0 } else { s.powi(power) };
        Absorber {
            center: wave_of(name),
            tau0: t0 * s,
            sigma_kms,
            gamma: gamma * s,
            eta: if gamma > 0.0 { 0.3 } else { 0.0 },
            wing: 1.0,
        }
        .add_to(&mut tau, grid);
    }
    for &(_, center, t0) in MORE_METALS {
        Absorber {
            center,
            tau0: t0 * m,
            sigma_kms,
            gamma: 0.0,
            eta: 0.0,
            wing: 1.0,
        }
        .add_to(&mut tau, grid);
    }
    // The G band (CH molecule) is a band, not a line: ~15 Å wide, strongest in G–K stars.
    let ch = m * (1.0 - 0.6 * tio);
    Absorber {
        center: wave_of("G band"),
        tau0: 0.45 * ch,
        sigma_kms: 350.0,
        gamma: 0.0,
        eta: 0.0,
        wing: 1.0,
    }
    .add_to(&mut tau, grid);
    (flux, tau)
}
