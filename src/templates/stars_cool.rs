/*!
Cool stars: the M and L dwarf sequence, K and M giants, a carbon star and an
M dwarf with Balmer emission.

Each spectrum starts from the same atmosphere as the main sequence in
[`super::stars`] (Milne–Eddington continuum, atomic lines, line blanketing)
at the type's effective temperature, and adds the molecular bands of cool
atmospheres at their published band heads:
- TiO (γ, γ′, α, δ and ε systems) — the bands that define the M types;
- CaH near 6382 and 6750–7050 Å, gravity-sensitive: strong in dwarfs, weak
  in giants;
- VO near 7334–7534 and 7851–7973 Å, from about M7 on;
- FeH (the Wing–Ford band at 9896 Å and 8692 Å) and CrH (8611 Å), growing
  into the L types;
- the K I and Na I resonance doublets, whose pressure-broadened wings grow
  to hundreds of Å in L dwarfs, and Rb I and Cs I in L dwarfs.

Band heads are air wavelengths from memory (Kirkpatrick, Henry & McCarthy
1991, Table 3 and Figure 1, the standard M-dwarf feature identifications;
Pearse & Gaydon, *The Identification of Molecular Spectra*), converted to
vacuum with the standard dispersion formula; the bands are degraded to the red
(absorption extends longward of the head), except the C₂ Swan bands, which are
degraded to the violet.

**Calibration.** The overall TiO and CaH strengths of each dwarf subtype are
solved for (bisection on the band scale) so that the template's TiO5 and CaH2
band-strength indices equal the published relation between index and
subtype (see [`tio5_target`], [`cah2_target`]); the third index, CaH3, is left
free and checked against its own published relation by the tests. The M0–M9
dwarfs are then multiplied by an empirical correction of their band shapes in
25 Å bins, measured against observed mean spectra (Pickles 1998 for M0–M6,
Bochanski et al. 2007 for M7–M9; [`m_dwarf_correction`]), constant over the
index windows.
*/
// Index loops here add several per-pixel arrays term by term.
#![allow(clippy::needless_range_loop)]
use super::m_dwarf_table::{M_DWARF_CORRECTION, M_DWARF_FLAT, M_DWARF_KNOTS};
use super::profiles::{apply_tau, convolve_velocity, median_in, Absorber, Grid};
use super::stars::{atmosphere, StarType, STAR_SIGMA_KMS};
use serde::Serialize;

/// A cool star of the built-in set.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct CoolType {
    /// Template name.
    pub name: &'static str,
    /// Effective temperature (K, from memory: typical of the subtype, cf.
    /// the dwarf sequence tables of Pecaut & Mamajek 2013, Table 5).
    pub teff: f64,
    /// Numerical subtype: M0 = 0 … M9 = 9, L0 = 10, L3 = 13, L6 = 16.
    pub subtype: f64,
    /// What kind of star.
    pub family: Family,
}

/// Families of cool stars.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Family {
    /// Main-sequence M or L dwarf.
    Dwarf,
    /// M dwarf with chromospheric Balmer and Ca II emission (a "dMe" star).
    EmissionDwarf,
    /// K or M giant (luminosity class III).
    Giant,
    /// Carbon star (C/O > 1: C₂ and CN instead of TiO).
    Carbon,
}

/// The built-in cool stars.
pub const COOL: &[CoolType] = &[
    dwarf("star-M0", 3_850.0, 0.0),
    dwarf("star-M1", 3_660.0, 1.0),
    dwarf("star-M2", 3_560.0, 2.0),
    dwarf("star-M3", 3_430.0, 3.0),
    dwarf("star-M4", 3_210.0, 4.0),
    dwarf("star-M5", 3_060.0, 5.0),
    dwarf("star-M6", 2_810.0, 6.0),
    dwarf("star-M7", 2_680.0, 7.0),
    dwarf("star-M8", 2_570.0, 8.0),
    dwarf("star-M9", 2_380.0, 9.0),
    dwarf("star-L0", 2_250.0, 10.0),
    dwarf("star-L3", 1_900.0, 13.0),
    dwarf("star-L6", 1_600.0, 16.0),
    CoolType {
        name: "star-M4e",
        teff: 3_210.0,
        subtype: 4.0,
        family: Family::EmissionDwarf,
    },
    CoolType {
        name: "star-K5III",
        teff: 3_950.0,
        subtype: -1.0,
        family: Family::Giant,
    },
    CoolType {
        name: "star-M2III",
        teff: 3_660.0,
        subtype: 2.0,
        family: Family::Giant,
    },
    CoolType {
        name: "star-M5III",
        teff: 3_400.0,
        subtype: 5.0,
        family: Family::Giant,
    },
    CoolType {
        name: "star-C",
        teff: 3_000.0,
        subtype: 0.0,
        family: Family::Carbon,
    },
];

const fn dwarf(name: &'static str, teff: f64, subtype: f64) -> CoolType {
    CoolType {
        name,
        teff,
        subtype,
        family: Family::Dwarf,
    }
}

/// The empirical band-shape correction of an M dwarf of subtype `sp` at
/// `lam` (vacuum Å): the ratio of an observed mean spectrum of that type
/// (M0V–M6V: Pickles 1998; M7V–M9V: Bochanski et al. 2007) to the generated
/// template, in 25 Å bins (`scripts/m-dwarf-correction.py` writes the table,
/// [`super::m_dwarf_table`]), linearly interpolated in λ and (in ln) between
/// subtypes, one constant over the index windows. The single-exponential
/// band tails put the flux between and within the band heads in the wrong
/// place by up to a factor 2–3 in mid-M types (e.g. far too little between
/// 6700 and 7600 Å, too much at 5900–6300 Å); the heads, the indices and
/// the colours stay from the physics above. The correction fades out over
/// M9–L0: the L types keep the physics alone.
pub fn m_dwarf_correction(sp: f64, lam: f64) -> f64 {
    let last = M_DWARF_CORRECTION.len() - 1;
    let fade = (last as f64 + 1.0 - sp).clamp(0.0, 1.0);
    if fade == 0.0 {
        return 1.0;
    }
    // ln factor of one row at `lam`: the flat zone's constant inside it and
    // at its two ends, linear in λ between knots, the end values beyond
    let at = |row: &([f64; M_DWARF_KNOTS.len()], f64)| -> f64 {
        let (vals, flat) = row;
        if (M_DWARF_FLAT.0..=M_DWARF_FLAT.1).contains(&lam) {
            return flat.ln();
        }
        let k = &M_DWARF_KNOTS;
        let i = k.partition_point(|&x| x < lam);
        let (left, right) = match i {
            0 => return vals[0].ln(),
            i if i == k.len() => return vals[k.len() - 1].ln(),
            i => ((k[i - 1], vals[i - 1]), (k[i], vals[i])),
        };
        // a pair of knots that straddles the flat zone ends at its edges
        let (left, right) = if left.0 < M_DWARF_FLAT.0 && right.0 > M_DWARF_FLAT.1 {
            if lam < M_DWARF_FLAT.0 {
                (left, (M_DWARF_FLAT.0, *flat))
            } else {
                ((M_DWARF_FLAT.1, *flat), right)
            }
        } else {
            (left, right)
        };
        let t = (lam - left.0) / (right.0 - left.0);
        (1.0 - t) * left.1.ln() + t * right.1.ln()
    };
    let s = sp.clamp(0.0, last as f64);
    let lo = s.floor() as usize;
    let hi = (lo + 1).min(last);
    let t = s - lo as f64;
    let ln = (1.0 - t) * at(&M_DWARF_CORRECTION[lo]) + t * at(&M_DWARF_CORRECTION[hi]);
    (fade * ln).exp()
}

/// Small-scale accuracy of the built-in M-dwarf templates, measured
/// against single real dwarfs that neither the calibration above nor the
/// recovery tests use: the rms of ln(star / template) on scales below 100 Å
/// over 4500–9000 Å, telluric bands left out (`scripts/m-dwarf-mismatch.py`
/// on the Kesseli et al. 2019 dwarfs of the kastredux wheel): (subtype,
/// rms) for Gl 393 (M2, star-M2), NLTT 3247 (M4, star-M4) and Teegarden's
/// star (M6 in its file name, star-M6). Between them linear in the subtype;
/// beyond them the nearest value (M0–M1 and M7–M9 are not measured).
const M_DWARF_ACCURACY: [(f64, f64); 3] = [(2.0, 0.064), (4.0, 0.098), (6.0, 0.192)];

/// How closely the built-in template `name` is known to follow real stars
/// of its type on small scales (fraction of the flux, rms): the M0–M9
/// dwarfs and the M dwarf with emission from [`M_DWARF_ACCURACY`]; 0 for
/// every other template (not measured: the fit's `sys_floor` alone stands
/// for its mismatch). The fit's `poor_fit` judgement allows for it when the
/// engine's templates are the built-in set, not for a user's or trained set
/// whose templates carry the same names (`poor_fit` in the README).
pub fn known_accuracy(name: &str) -> f64 {
    let Some(st) = COOL.iter().find(|c| c.name == name) else {
        return 0.0;
    };
    if !matches!(st.family, Family::Dwarf | Family::EmissionDwarf) || st.subtype > 9.0 {
        return 0.0;
    }
    let a = &M_DWARF_ACCURACY;
    let sp = st.subtype.clamp(a[0].0, a[a.len() - 1].0);
    let i = a.partition_point(|p| p.0 < sp).clamp(1, a.len() - 1);
    let ((x0, y0), (x1, y1)) = (a[i - 1], a[i]);
    y0 + (y1 - y0) * (sp - x0) / (x1 - x0)
}

/// Vacuum wavelength from an air wavelength (Å): the standard dispersion
/// formula of Edlén (1966) in the form of Morton (2000), common practice.
pub fn air_to_vacuum(air: f64) -> f64 {
    let s2 = (1e4 / air).powi(2);
    air * (1.0
        + 8.336_624_212_083e-5
        + 2.408_926_869_968e-2 / (1.301_065_924_522e2 - s2)
        + 1.599_740_894_897e-4 / (3.892_568_793_293e1 - s2))
}

/// TiO band heads (air Å, from memory: Kirkpatrick et al. 1991, Table 3),
/// relative central optical depth, e-folding length (Å).
const TIO: &[(f64, f64, f64)] = &[
    (4584.0, 0.4, 60.0),
    (4761.0, 0.5, 60.0),
    (4954.0, 0.6, 70.0),
    (5167.0, 0.8, 80.0),
    (5448.0, 0.8, 100.0),
    (5597.0, 0.5, 80.0),
    (5847.0, 0.6, 100.0),
    (6158.0, 1.0, 120.0),
    (6651.0, 0.8, 150.0),
    (7054.0, 1.4, 45.0),
    (7088.0, 0.9, 40.0),
    (7126.0, 1.2, 200.0),
    (7589.0, 0.9, 150.0),
    (7666.0, 0.5, 100.0),
    (8206.0, 0.3, 100.0),
    (8432.0, 0.6, 150.0),
    (8859.0, 0.5, 150.0),
    (9209.0, 0.3, 150.0),
];

/// CaH band heads (air Å, from memory: Kirkpatrick et al. 1991), relative τ, length (Å).
const CAH: &[(f64, f64, f64)] = &[(6382.0, 0.5, 60.0), (6750.0, 1.0, 145.0), (6908.0, 0.4, 70.0)];

/// VO band heads (air Å, from memory: Kirkpatrick et al. 1991), relative τ, length (Å).
const VO: &[(f64, f64, f64)] = &[(7334.0, 0.8, 110.0), (7851.0, 0.8, 60.0), (7939.0, 0.4, 40.0)];

/// FeH and CrH heads (air Å, from memory: Kirkpatrick et al. 1999 for the L
/// types), relative τ, length (Å).
const HYDRIDES: &[(f64, f64, f64)] = &[(8611.0, 0.6, 80.0), (8692.0, 0.5, 60.0), (9896.0, 1.0, 150.0)];

/// C₂ Swan band heads (air Å, from memory), degraded to the violet: relative τ, length (Å).
const C2_SWAN: &[(f64, f64, f64)] = &[
    (4737.0, 0.9, 150.0),
    (5165.0, 1.2, 180.0),
    (5636.0, 0.9, 180.0),
    (6191.0, 0.5, 150.0),
];

/// CN red-system band heads (air Å, from memory), degraded to the red: relative τ, length (Å).
const CN_RED: &[(f64, f64, f64)] = &[
    (6926.0, 0.4, 100.0),
    (7088.0, 0.5, 100.0),
    (7874.0, 0.7, 120.0),
    (7945.0, 0.5, 100.0),
    (8125.0, 0.4, 100.0),
    (9140.0, 0.6, 150.0),
];

/// Alkali resonance lines (air Å, NIST from memory): name, air Å, relative τ.
const ALKALI: &[(&str, f64, f64)] = &[
    ("K I 7665", 7664.90, 1.0),
    ("K I 7699", 7698.96, 0.8),
    ("Na I 8183", 8183.26, 0.7),
    ("Na I 8195", 8194.82, 0.8),
    ("Rb I 7800", 7800.27, 0.25),
    ("Rb I 7947", 7947.60, 0.2),
    ("Cs I 8521", 8521.13, 0.2),
    ("Cs I 8943", 8943.47, 0.15),
];

/// Published TiO5 index of a dwarf of numerical subtype `sp` (M0 = 0):
/// Reid, Hawley & Gizis (1995), the relation Sp = −10.775 TiO5 + 8.2 for
/// M0–M6 (values from memory); beyond M6 the index saturates and turns back
/// up as TiO weakens into the L types (from memory, approximate).
pub fn tio5_target(sp: f64) -> f64 {
    if sp <= 6.0 {
        (8.2 - sp) / 10.775
    } else {
        // M7 0.19, M9 0.28, L0 0.35, L3 0.6, L6 0.85
        let pts = [
            (6.0, 0.204),
            (7.0, 0.19),
            (9.0, 0.28),
            (10.0, 0.35),
            (13.0, 0.6),
            (16.0, 0.85),
        ];
        interp(&pts, sp)
    }
}

/// Published CaH2 index of a dwarf of subtype `sp`: Gizis (1997), the
/// relation Sp = 7.91 CaH2² − 20.63 CaH2 + 10.71 (from memory), solved for
/// CaH2; in the L types the hydride bands keep deepening slowly (from memory).
pub fn cah2_target(sp: f64) -> f64 {
    let sp = sp.min(9.5);
    let disc = 20.63f64.powi(2) - 4.0 * 7.91 * (10.71 - sp);
    (20.63 - disc.max(0.0).sqrt()) / (2.0 * 7.91)
}

/// Published CaH3 index of a dwarf of subtype `sp`: Gizis (1997),
/// Sp = −18.00 CaH3 + 15.80 (from memory), solved for CaH3.
pub fn cah3_target(sp: f64) -> f64 {
    (15.80 - sp) / 18.0
}

fn interp(pts: &[(f64, f64)], x: f64) -> f64 {
    if x <= pts[0].0 {
        return pts[0].1;
    }
    for w in pts.windows(2) {
        if x <= w[1].0 {
            let t = (x - w[0].0) / (w[1].0 - w[0].0);
            return w[0].1 + t * (w[1].1 - w[0].1);
        }
    }
    pts[pts.len() - 1].1
}

/// Mean flux over `[lo, hi]` Å (vacuum) of `flux` on `grid`.
fn mean_in(flux: &[f64], grid: &Grid, lo: f64, hi: f64) -> f64 {
    let r = grid.range(lo, hi);
    let n = r.len().max(1) as f64;
    flux[r].iter().sum::<f64>() / n
}

/// A band-strength index: mean flux in the band window over mean flux in the
/// pseudo-continuum window (air Å as published, converted to vacuum here).
pub fn index(flux: &[f64], grid: &Grid, band: (f64, f64), cont: (f64, f64)) -> f64 {
    let v = air_to_vacuum;
    mean_in(flux, grid, v(band.0), v(band.1)) / mean_in(flux, grid, v(cont.0), v(cont.1))
}

/// The TiO5, CaH2 and CaH3 indices of a spectrum (Reid et al. 1995, Table 2
/// windows, from memory): TiO5 = F(7126–7135)/F(7042–7046), CaH2 =
/// F(6814–6846)/F(7042–7046), CaH3 = F(6960–6990)/F(7042–7046).
pub fn m_indices(flux: &[f64], grid: &Grid) -> (f64, f64, f64) {
    let cont = (7042.0, 7046.0);
    (
        index(flux, grid, (7126.0, 7135.0), cont),
        index(flux, grid, (6814.0, 6846.0), cont),
        index(flux, grid, (6960.0, 6990.0), cont),
    )
}

/// Add a band whose head is at `head` (vacuum Å): degraded to the red
/// (absorption from the head longward) when `to_red`, else to the violet.
fn band(tau: &mut [f64], grid: &Grid, head: f64, tau0: f64, length: f64, to_red: bool) {
    if tau0 <= 0.0 {
        return;
    }
    let (lo, hi) = if to_red {
        (head - 15.0, head + 8.0 * length)
    } else {
        (head - 8.0 * length, head + 15.0)
    };
    for i in grid.range(lo, hi) {
        let x = grid.wave(i as f64) - head;
        let x = if to_red { x } else { -x };
        let shape = if x >= 0.0 {
            (-x / length).exp()
        } else {
            (-(x / 3.0).powi(2)).exp()
        };
        tau[i] += tau0 * shape;
    }
}

fn bands(list: &[(f64, f64, f64)], scale: f64, to_red: bool, grid: &Grid) -> Vec<f64> {
    let mut tau = vec![0.0; grid.n];
    for &(head, t0, len) in list {
        band(&mut tau, grid, air_to_vacuum(head), t0 * scale, len, to_red);
    }
    tau
}

/// Strength (0–1) of TiO with temperature in the L types: TiO condenses out
/// below ~2000 K (from memory).
fn tio_survival(st: &CoolType) -> f64 {
    1.0 / (1.0 + (-(st.teff - 2_000.0) / 120.0).exp())
}

/// One cool star on `grid` at full resolution (metal lines of dispersion
/// `sigma_kms`), normalised to a median of 1 over 7400–7500 Å.
pub fn cool_intrinsic(st: &CoolType, grid: &Grid, sigma_kms: f64) -> Vec<f64> {
    let base = StarType {
        name: st.name,
        teff: st.teff,
        white_dwarf: false,
    };
    let (mut flux, mut tau) = atmosphere(&base, grid, sigma_kms);
    let late = ((st.subtype - 6.0) / 4.0).clamp(0.0, 1.5);
    let ldwarf = ((st.subtype - 9.0) / 4.0).clamp(0.0, 2.0);
    let giant = st.family == Family::Giant;
    let waves = grid.waves();

    // alkali lines: pressure-broadened in dwarfs, the wings growing with
    // decreasing temperature (the K I wings span ~±200 Å in mid-L dwarfs,
    // from memory); weak in giants (low pressure)
    let gravity = if giant { 0.25 } else { 1.0 };
    let alkali_strength = gravity * (0.8 + 1.5 * late + 3.0 * ldwarf);
    for &(name, air, rel) in ALKALI {
        let heavy = name.starts_with("Rb") || name.starts_with("Cs");
        if heavy && ldwarf <= 0.0 {
            continue;
        }
        let gamma = gravity * (1.0 + 6.0 * late + 40.0 * ldwarf) * if heavy { 0.1 } else { 1.0 };
        Absorber {
            center: air_to_vacuum(air),
            tau0: rel * alkali_strength,
            sigma_kms,
            gamma,
            eta: 0.6,
            wing: 1.0,
        }
        .add_to(&mut tau, grid);
    }
    if giant {
        // the Ca II triplet is stronger in giants (gravity-sensitive, from memory)
        for (air, t0) in [(8498.02, 0.8), (8542.09, 1.2), (8662.14, 1.0)] {
            Absorber {
                center: air_to_vacuum(air),
                tau0: t0,
                sigma_kms,
                gamma: 1.0,
                eta: 0.3,
                wing: 1.0,
            }
            .add_to(&mut tau, grid);
        }
    }

    match st.family {
        Family::Carbon => {
            // no TiO: the oxygen is locked in CO; C₂ Swan and CN red bands,
            // and a strongly depressed blue (from memory, common practice)
            for (t, c) in tau.iter_mut().zip(bands(C2_SWAN, 1.0, false, grid)) {
                *t += c;
            }
            for (t, c) in tau.iter_mut().zip(bands(CN_RED, 1.0, true, grid)) {
                *t += c;
            }
            for (t, &l) in tau.iter_mut().zip(&waves) {
                *t += 0.6 * (4_600.0 / l).powi(4);
            }
        }
        _ => {
            let tio_shape = bands(TIO, 1.0, true, grid);
            let cah_shape = bands(CAH, 1.0, true, grid);
            // VO from about M7, FeH and CrH growing into the L types
            let vo = bands(VO, 0.6 * late * tio_survival(st).max(0.3), true, grid);
            let hydrides = bands(HYDRIDES, 0.3 * late + 0.8 * ldwarf, true, grid);
            // the overlapping wings of countless molecular lines depress the
            // blue-optical pseudo-continuum of M dwarfs far below the Planck
            // curve: a smooth opacity ramp towards the blue, scaled so the
            // dwarf's V − I colour is the published one (see [`vi_target`])
            let ramp: Vec<f64> = waves
                .iter()
                .map(|&l| ((9_000.0 - l) / 3_500.0).max(0.0))
                .collect();
            let colour = matches!(st.family, Family::Dwarf | Family::EmissionDwarf);
            let mut b_ramp = 0.0;
            let mut scales = (0.0, 0.0);
            for _ in 0..3 {
                let with_ramp: Vec<f64> = tau.iter().zip(&ramp).map(|(t, r)| t + b_ramp * r).collect();
                scales = calibrated_scales(st, grid, &flux, &with_ramp, &tio_shape, &cah_shape);
                if !colour {
                    break;
                }
                let full: Vec<f64> = (0..grid.n)
                    .map(|i| tau[i] + scales.0 * tio_shape[i] + scales.1 * cah_shape[i] + vo[i] + hydrides[i])
                    .collect();
                b_ramp = solve_ramp(grid, &flux, &full, &ramp, colour_ratio_target(st.subtype));
            }
            for i in 0..grid.n {
                tau[i] += scales.0 * tio_shape[i]
                    + scales.1 * cah_shape[i]
                    + vo[i]
                    + if giant { 0.0 } else { hydrides[i] }
                    + b_ramp * ramp[i];
            }
        }
    }
    apply_tau(&mut flux, &tau);
    if matches!(st.family, Family::Dwarf | Family::EmissionDwarf) {
        for (f, &l) in flux.iter_mut().zip(&waves) {
            *f *= m_dwarf_correction(st.subtype, l);
        }
    }

    if st.family == Family::EmissionDwarf {
        // chromospheric emission of an active M dwarf: equivalent widths
        // typical of dMe stars (Hα ≈ −5 Å; flatter Balmer decrement than
        // Case B; Ca II H&K in emission — from memory)
        let lines = [
            (6564.61, 5.0),
            (4862.68, 3.0),
            (4341.68, 2.0),
            (4102.89, 1.5),
            (3934.78, 4.0),
            (3969.59, 3.0),
        ];
        for (center, ew) in lines {
            let c = median_in(&flux, grid, center - 40.0, center + 40.0);
            super::profiles::add_gaussian(&mut flux, grid, center, 40.0, ew * c);
        }
    }
    let norm = median_in(&flux, grid, 7_400.0, 7_500.0);
    for f in &mut flux {
        *f /= norm;
    }
    flux
}

/// V − Ic colour (mag) of a dwarf of subtype `sp` (M0 = 0): Pecaut &
/// Mamajek (2013), Table 5 (values from memory); L types held at the M9 value.
pub fn vi_target(sp: f64) -> f64 {
    let pts = [
        (0.0, 1.85),
        (1.0, 2.05),
        (2.0, 2.25),
        (3.0, 2.58),
        (4.0, 2.96),
        (5.0, 3.52),
        (6.0, 4.03),
        (7.0, 4.35),
        (8.0, 4.60),
        (9.0, 4.60),
    ];
    interp(&pts, sp)
}

/// The flux ratio F_λ(5450–5550 Å)/F_λ(7950–8050 Å) that goes with the
/// colour [`vi_target`]: Vega's ratio (≈ 2.9, from memory) × 10^(−0.4 (V − I)),
/// the bands taken as monochromatic at their centres (an approximation).
pub fn colour_ratio_target(sp: f64) -> f64 {
    2.9 * 10f64.powf(-0.4 * vi_target(sp))
}

/// The blue–red flux ratio used with [`colour_ratio_target`].
pub fn colour_ratio(flux: &[f64], grid: &Grid) -> f64 {
    mean_in(flux, grid, 5_450.0, 5_550.0) / mean_in(flux, grid, 7_950.0, 8_050.0)
}

/// Scale of the blue opacity ramp that gives the colour ratio `want`.
fn solve_ramp(grid: &Grid, flux: &[f64], tau: &[f64], ramp: &[f64], want: f64) -> f64 {
    let ratio = |b: f64| {
        let f: Vec<f64> = (0..grid.n)
            .map(|i| flux[i] * (-(tau[i] + b * ramp[i])).exp())
            .collect();
        colour_ratio(&f, grid)
    };
    if ratio(0.0) <= want {
        return 0.0;
    }
    let (mut lo, mut hi) = (0.0f64, 20.0f64);
    for _ in 0..40 {
        let mid = 0.5 * (lo + hi);
        if ratio(mid) > want {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// TiO and CaH band scales. Dwarfs: solved so that the TiO5 and CaH2 indices
/// of the template equal [`tio5_target`] and [`cah2_target`] for the subtype
/// (a few rounds of alternating bisection). Giants: the TiO5 of a dwarf 1.5
/// subtypes later (TiO stronger at the same type) and a quarter of the
/// dwarf's CaH at the same TiO (CaH is gravity-sensitive; from memory).
fn calibrated_scales(
    st: &CoolType,
    grid: &Grid,
    flux: &[f64],
    tau: &[f64],
    tio: &[f64],
    cah: &[f64],
) -> (f64, f64) {
    let giant = st.family == Family::Giant;
    let sp = if giant { st.subtype + 1.5 } else { st.subtype };
    let want_tio = tio5_target(sp);
    let want_cah = cah2_target(sp);
    // the indices only see 6800–7150 Å: work on that slice
    let r = grid.range(air_to_vacuum(6700.0), air_to_vacuum(7250.0));
    let sub = Grid {
        loglam0: grid.loglam0 + r.start as f64 * grid.dloglam,
        dloglam: grid.dloglam,
        n: r.len(),
    };
    let eval = |a: f64, b: f64| {
        let f: Vec<f64> = r
            .clone()
            .map(|i| flux[i] * (-(tau[i] + a * tio[i] + b * cah[i])).exp())
            .collect();
        m_indices(&f, &sub)
    };
    let solve = |g: &dyn Fn(f64) -> f64, want: f64| {
        // g decreases with the scale; bisection on [0, 30]
        let (mut lo, mut hi) = (0.0f64, 30.0f64);
        if g(lo) <= want {
            return 0.0;
        }
        for _ in 0..50 {
            let mid = 0.5 * (lo + hi);
            if g(mid) > want {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    };
    let (mut a, mut b) = (1.0, 1.0);
    for _ in 0..6 {
        a = solve(&|x| eval(x, b).0, want_tio);
        if giant {
            break;
        }
        b = solve(&|y| eval(a, y).1, want_cah);
    }
    if giant {
        // CaH: a quarter of what a dwarf of this TiO strength would need
        let b_dwarf = solve(&|y| eval(a, y).1, want_cah);
        b = 0.25 * b_dwarf;
        a = solve(&|x| eval(x, b).0, want_tio);
    }
    (a, b)
}

/// One cool star as observed with instrumental dispersion `instrument_kms`,
/// normalised to a median of 1 over 5400–5600 Å like the other stars.
pub fn cool_star(st: &CoolType, grid: &Grid, instrument_kms: f64) -> Vec<f64> {
    let f = cool_intrinsic(st, grid, STAR_SIGMA_KMS);
    let mut f = convolve_velocity(&f, grid, instrument_kms);
    let norm = median_in(&f, grid, 5_400.0, 5_600.0);
    for x in &mut f {
        *x /= norm;
    }
    f
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn air_to_vacuum_matches_the_line_list() {
        // Hα: 6562.80 Å in air, 6564.61 Å in vacuum (NIST, from memory)
        assert!((air_to_vacuum(6562.80) - 6564.61).abs() < 0.02);
    }

    #[test]
    fn published_relations_give_the_textbook_indices() {
        // M0 dwarfs have TiO5 ≈ 0.75 and CaH2 ≈ 0.7, M6 dwarfs ≈ 0.2–0.25 (from memory)
        assert!((tio5_target(0.0) - 0.76).abs() < 0.02);
        assert!((cah2_target(0.0) - 0.716).abs() < 0.01);
        assert!((cah2_target(6.0) - 0.253).abs() < 0.01);
        assert!((cah3_target(4.0) - 0.656).abs() < 0.01);
    }
}
