/*!
Hot and peculiar stars: hot subdwarfs (sdB, sdO), helium and featureless
white dwarfs (DB, DC) and two broad-emission-line stars of Wolf–Rayet type
(nitrogen sequence WN, carbon sequence WC).

The continua are those of [`super::stars::continuum`] (Milne–Eddington, with
hydrogen bound-free opacity giving a Balmer jump that shrinks as the
temperature rises; a large grey part for the white dwarfs, whose jump is
flattened by pressure ionisation). Lines are optical-depth profiles with
pressure-broadened wings (absorption) or Gaussians of the stated equivalent
width (emission). Wavelengths are air values from memory (NIST; the
Wolf–Rayet lines as identified in the classification scheme of Smith,
Shara & Moffat 1996 for WN and Crowther, De Marco & Barlow 1998 for WC),
converted to vacuum with [`air_to_vacuum`].
*/
use super::profiles::{
    add_gaussian, apply_tau, convolve_velocity, helium_ii_wave, median_in, Absorber, Grid,
};
use super::stars::{continuum, grey_opacity, hydrogen_lines, StarType, STAR_SIGMA_KMS};
use super::stars_cool::air_to_vacuum;
use serde::Serialize;

/// Kinds of hot and peculiar stars.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum HotKind {
    /// Hot subdwarf B: broad Balmer lines, weak He I.
    SubdwarfB,
    /// Hot subdwarf O: He II 4686 and weaker Balmer lines.
    SubdwarfO,
    /// Helium-atmosphere white dwarf: broad He I lines, no hydrogen.
    WhiteDwarfDB,
    /// Featureless white dwarf (a continuum only).
    WhiteDwarfDC,
    /// Wolf–Rayet star of the nitrogen sequence: broad He II and N III/N IV emission.
    WolfRayetN,
    /// Wolf–Rayet star of the carbon sequence: broad C III and C IV emission.
    WolfRayetC,
}

/// One hot or peculiar star of the built-in set.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct HotType {
    /// Template name.
    pub name: &'static str,
    /// Effective temperature (K, typical of the kind, from memory).
    pub teff: f64,
    /// What kind of star.
    pub kind: HotKind,
}

/// The built-in hot and peculiar stars.
pub const HOT: &[HotType] = &[
    HotType {
        name: "star-sdB",
        teff: 28_000.0,
        kind: HotKind::SubdwarfB,
    },
    HotType {
        name: "star-sdO",
        teff: 45_000.0,
        kind: HotKind::SubdwarfO,
    },
    HotType {
        name: "star-WD-DB",
        teff: 18_000.0,
        kind: HotKind::WhiteDwarfDB,
    },
    HotType {
        name: "star-WD-DC",
        teff: 7_500.0,
        kind: HotKind::WhiteDwarfDC,
    },
    HotType {
        name: "star-WN",
        teff: 50_000.0,
        kind: HotKind::WolfRayetN,
    },
    HotType {
        name: "star-WC",
        teff: 60_000.0,
        kind: HotKind::WolfRayetC,
    },
];

/// He I lines (air Å, NIST from memory) with relative strength.
const HE_I: &[(f64, f64)] = &[
    (3888.65, 0.8),
    (4026.19, 0.7),
    (4387.93, 0.5),
    (4471.48, 1.0),
    (4713.15, 0.4),
    (4921.93, 0.6),
    (5015.68, 0.5),
    (5875.62, 1.0),
    (6678.15, 0.7),
    (7065.19, 0.5),
];

/// He II lines of a hot subdwarf (vacuum Å) with relative strength: λ4686
/// (n = 3–4) and the Pickering series (n = 4–6 … 4–15). The even members of
/// the series (6560, 4859, 4339, 4100, …) sit about 2 Å blue of the Balmer
/// lines; in a helium-rich sdO, the common kind, they dominate the blends,
/// whose centres therefore lie blue of pure hydrogen. Strengths fall smoothly
/// along the series (4.8/n relative to λ4686; a round rule from memory that
/// keeps the earlier 5412/4542/4200 strengths within 0.05).
fn he_ii_lines() -> Vec<(f64, f64)> {
    let mut out = vec![(helium_ii_wave(3, 4), 1.0)];
    out.extend((6..=15).map(|n| (helium_ii_wave(4, n), 4.8 / f64::from(n))));
    out
}

/// Emission lines of a WN star: air Å, rest equivalent width (Å, emission
/// positive; typical of WN4–6 stars, from memory).
const WN_LINES: &[(f64, f64)] = &[
    (4057.76, 5.0),  // N IV
    (4199.83, 5.0),  // He II
    (4541.59, 8.0),  // He II
    (4640.64, 15.0), // N III 4634–4641
    (4685.68, 60.0), // He II
    (4861.33, 10.0), // He II 4859 + Hβ
    (5411.52, 15.0), // He II
    (5875.62, 12.0), // He I
    (6560.10, 30.0), // He II 6560 + Hα
    (7115.0, 8.0),   // N IV 7103–7123
];

/// Emission lines of a WC star (typical of WC5–7, from memory).
const WC_LINES: &[(f64, f64)] = &[
    (4267.0, 10.0),  // C II
    (4650.0, 200.0), // C III 4647–4651 + C IV 4658 + He II 4686
    (5411.52, 15.0), // He II
    (5592.0, 20.0),  // O V
    (5696.0, 80.0),  // C III
    (5806.0, 250.0), // C IV 5801–5812
    (6560.10, 20.0), // He II + C IV
    (7236.0, 30.0),  // C III/C IV blend
];

/// He lines given in air Å (see [`he_lines_vacuum`]).
fn he_lines(tau: &mut [f64], grid: &Grid, list: &[(f64, f64)], tau0: f64, gamma: f64, sigma_kms: f64) {
    let vacuum: Vec<(f64, f64)> = list.iter().map(|&(air, rel)| (air_to_vacuum(air), rel)).collect();
    he_lines_vacuum(tau, grid, &vacuum, tau0, gamma, sigma_kms);
}

/// Absorption lines at vacuum wavelengths with relative strengths: central
/// optical depth `tau0`·rel, Stark half width `gamma` Å at 4471 Å (scaled
/// with λ), Doppler dispersion `sigma_kms`.
fn he_lines_vacuum(tau: &mut [f64], grid: &Grid, list: &[(f64, f64)], tau0: f64, gamma: f64, sigma_kms: f64) {
    for &(center, rel) in list {
        Absorber {
            center,
            tau0: tau0 * rel,
            sigma_kms,
            gamma: gamma * center / 4_471.0,
            eta: if gamma > 0.0 { 0.85 } else { 0.0 },
            wing: 1.25,
        }
        .add_to(tau, grid);
    }
}

/// Balmer and Paschen lines with central depth `tau_h` and Stark half width
/// `gamma0` Å at Hβ (the same scaling with the upper level as the main
/// sequence in [`super::stars`]).
fn hydrogen(tau: &mut [f64], grid: &Grid, tau_h: f64, gamma0: f64, sigma_kms: f64) {
    for (lower, upper, w) in hydrogen_lines() {
        let k = f64::from(upper - (lower + 1));
        let series = if lower == 2 { 1.0 } else { 0.45 };
        Absorber {
            center: w,
            tau0: tau_h * series * (1.0 + k).powf(-0.3),
            sigma_kms: sigma_kms.max(20.0),
            gamma: gamma0
                * (w / 4_861.0)
                * (1.0 + k.min(3.0)).powf(0.3)
                * (1.0 + (k - 3.0).max(0.0)).powf(-0.2),
            eta: 0.85,
            wing: 1.25,
        }
        .add_to(tau, grid);
    }
}

/// One hot or peculiar star on `grid`, lines of dispersion `sigma_kms`,
/// smoothed to `instrument_kms`, normalised to a median of 1 over 5400–5600 Å.
pub fn hot_star(st: &HotType, grid: &Grid, instrument_kms: f64) -> Vec<f64> {
    let waves = grid.waves();
    let wd = matches!(st.kind, HotKind::WhiteDwarfDB | HotKind::WhiteDwarfDC);
    let base = StarType {
        name: st.name,
        teff: st.teff,
        white_dwarf: wd,
    };
    // a helium or featureless white dwarf has no hydrogen Balmer jump: the
    // grey (He⁻ / He free-free, from memory) opacity dominates
    let grey = if wd { 30.0 } else { grey_opacity(&base) };
    let mut flux = continuum(&waves, st.teff, grey);
    let mut tau = vec![0.0; grid.n];
    let sigma = STAR_SIGMA_KMS;
    match st.kind {
        HotKind::SubdwarfB => {
            // log g ≈ 5.5–6: broad Balmer lines, weak He I (from memory)
            hydrogen(&mut tau, grid, 0.7, 12.0, sigma);
            he_lines(&mut tau, grid, HE_I, 0.12, 0.0, 60.0);
        }
        HotKind::SubdwarfO => {
            hydrogen(&mut tau, grid, 0.35, 10.0, sigma);
            he_lines_vacuum(&mut tau, grid, &he_ii_lines(), 0.5, 2.0, 60.0);
            he_lines(&mut tau, grid, HE_I, 0.05, 0.0, 60.0);
        }
        HotKind::WhiteDwarfDB => {
            he_lines(&mut tau, grid, HE_I, 1.2, 12.0, sigma);
        }
        HotKind::WhiteDwarfDC | HotKind::WolfRayetN | HotKind::WolfRayetC => {}
    }
    apply_tau(&mut flux, &tau);
    let (lines, width) = match st.kind {
        HotKind::WolfRayetN => (WN_LINES, 1_200.0),
        HotKind::WolfRayetC => (WC_LINES, 1_500.0),
        _ => (&[][..], 0.0),
    };
    for &(air, ew) in lines {
        let center = air_to_vacuum(air);
        let c = median_in(&flux, grid, center - 30.0, center + 30.0);
        add_gaussian(&mut flux, grid, center, width, ew * c);
    }
    let mut flux = convolve_velocity(&flux, grid, instrument_kms);
    let norm = median_in(&flux, grid, 5_400.0, 5_600.0);
    for f in &mut flux {
        *f /= norm;
    }
    flux
}
