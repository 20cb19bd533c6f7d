/*!
Galaxy basis templates: stellar populations assembled from our own stellar
templates (a simple population synthesis by light fraction), dust attenuation,
interstellar absorption, and nebular emission lines with physically sensible
ratios.

The four bases span the range a linear fit needs:
- `galaxy-old`: a passive population of cool stars (strong 4000 Å break,
  Ca II H&K, G band, Mg b, Na D), with a faint hot component (the ultraviolet
  upturn of old populations);
- `galaxy-intermediate`: a population dominated by A stars a few hundred Myr to
  ~1 Gyr after star formation stopped (strong Balmer absorption);
- `galaxy-young`: hot stars behind modest dust, interstellar absorption lines
  in the ultraviolet, and an H II region emission spectrum;
- `galaxy-emission`: emission lines only, with high-ionisation ratios, so the
  fit can vary the line-to-continuum and [O III]/Hβ ratios.
*/
use super::profiles::{add_gaussian, apply_tau, convolve_velocity, median_in, Absorber, Grid};
use super::stars::{star_intrinsic, StarType, INSTRUMENT_SIGMA_KMS, SEQUENCE, STAR_SIGMA_KMS};
use crate::lines::wave_of;
use serde::Serialize;

/// Velocity dispersion of the old and intermediate populations (km/s), typical
/// of massive galaxies (common practice).
pub const OLD_SIGMA_KMS: f64 = 180.0;
/// Velocity dispersion of the young population and of its gas (km/s).
pub const YOUNG_SIGMA_KMS: f64 = 90.0;
/// Dispersion of nebular emission lines (km/s): the gas's ~50 km/s and the
/// instrument's 60 km/s in quadrature (common practice).
pub const GAS_SIGMA_KMS: f64 = 80.0;

/// Case-B hydrogen recombination line intensities relative to Hβ at
/// T = 10⁴ K, nₑ = 100 cm⁻³ (Osterbrock & Ferland 2006, Table 4.4; from memory).
pub const CASE_B: &[(&str, f64)] = &[
    ("Hα", 2.86),
    ("Hβ", 1.0),
    ("Hγ", 0.468),
    ("Hδ", 0.259),
    ("Hε", 0.159),
    ("H8", 0.105),
    ("H9", 0.0731),
    ("H10", 0.0530),
    ("Paε", 0.0366),
    ("Paδ", 0.0554),
    ("Paγ", 0.0904),
];

/// Doublet ratios fixed by atomic physics (from memory unless a source is
/// named): [O III] 5008/4960 ≈ 2.98, [N II] 6585/6550 = 2.94 (below),
/// [O I] 6302/6366 ≈ 3, [Ne III] 3870/3969 ≈ 3.3,
/// [S III] 9533/9071 ≈ 2.5 (ratios of transition probabilities × photon energies).
pub const OIII_RATIO: f64 = 2.98;
/// [N II] 6585/6550 = A(¹D₂→³P₂) λ6550 / (A(¹D₂→³P₁) λ6585) with the
/// transition probabilities of Froese Fischer & Tachiev 2004 (ADNDT 87, 1):
/// 2.914e-3 s⁻¹ and 9.851e-4 s⁻¹ as tabulated in pyneb 1.1.32's
/// `n_ii_atom_FFT04.dat`, so 2.958 × 0.9946 = 2.94 (both lines leave the same
/// level, so the ratio is independent of density and temperature).
pub const NII_RATIO: f64 = 2.94;

/// Forbidden and helium lines relative to Hβ for an H II-region-like
/// star-forming galaxy (typical values, from memory). The density-sensitive
/// doublets use low-density ratios: [O II] 3730/3727 ≈ 1.3, [S II] 6718/6733 ≈ 1.4.
pub fn star_forming_lines() -> Vec<(&'static str, f64)> {
    let o3 = 1.2;
    let n2 = 0.9;
    let ne3 = 0.35;
    let mut v = vec![
        ("[O II] 3727", 1.3),
        ("[O II] 3730", 1.7),
        ("[Ne III] 3870", ne3),
        ("[Ne III] 3969", ne3 / 3.3),
        ("[O III] 4364", 0.02),
        ("He I 4473", 0.04),
        ("[O III] 5008", o3),
        ("[O III] 4960", o3 / OIII_RATIO),
        ("He I 5877", 0.11),
        ("[O I] 6302", 0.08),
        ("[O I] 6366", 0.08 / 3.0),
        ("[N II] 6585", n2),
        ("[N II] 6550", n2 / NII_RATIO),
        ("He I 6680", 0.03),
        ("[S II] 6718", 0.55),
        ("[S II] 6733", 0.55 / 1.4),
        ("[Ar III] 7138", 0.08),
        ("[S III] 9533", 0.62),
        ("[S III] 9071", 0.62 / 2.5),
    ];
    v.extend_from_slice(CASE_B);
    v
}

/// High-ionisation line ratios relative to Hβ (strong [O III], weak low-ionisation
/// lines), with ultraviolet lines for galaxies at z ≳ 1.5 (typical values, from memory).
pub fn high_ionisation_lines() -> Vec<(&'static str, f64)> {
    let o3 = 5.0;
    let mut v = vec![
        ("Lyα", 5.0), // Case B gives 23.5; resonant scattering lets only a fraction escape
        ("C IV", 0.3),
        ("He II 1640", 0.15),
        ("O III] 1661", 0.08),
        ("O III] 1666", 0.2),
        ("[C III] 1907", 0.35),
        ("C III]", 0.25),
        ("[O II] 3727", 0.6),
        ("[O II] 3730", 0.8),
        ("[Ne III] 3870", 0.5),
        ("[Ne III] 3969", 0.5 / 3.3),
        ("[O III] 4364", 0.08),
        ("He I 4473", 0.04),
        ("He II 4687", 0.02),
        ("[O III] 5008", o3),
        ("[O III] 4960", o3 / OIII_RATIO),
        ("He I 5877", 0.11),
        ("[O I] 6302", 0.03),
        ("[O I] 6366", 0.01),
        ("[N II] 6585", 0.15),
        ("[N II] 6550", 0.15 / NII_RATIO),
        ("[S II] 6718", 0.15),
        ("[S II] 6733", 0.12),
        ("[Ar III] 7138", 0.1),
        ("[S III] 9533", 0.5),
        ("[S III] 9071", 0.2),
    ];
    v.extend_from_slice(CASE_B);
    v
}

/// Emission-line spectrum of `lines` (name, flux relative to Hβ) with Hβ flux `hbeta`.
pub fn emission(grid: &Grid, lines: &[(&str, f64)], hbeta: f64, sigma_kms: f64) -> Vec<f64> {
    let mut f = vec![0.0; grid.n];
    for &(name, r) in lines {
        add_gaussian(&mut f, grid, wave_of(name), sigma_kms, r * hbeta);
    }
    f
}

/// A stellar population: light-weighted (at 5500 Å) sum of our stellar
/// templates, convolved with a Gaussian velocity distribution of dispersion
/// `sigma_kms` (on top of the stars' own line widths) and the instrumental
/// dispersion [`INSTRUMENT_SIGMA_KMS`], added in quadrature.
pub fn population(grid: &Grid, mix: &[(&str, f64)], sigma_kms: f64) -> Vec<f64> {
    let mut f = vec![0.0; grid.n];
    for &(name, weight) in mix {
        let st: &StarType = match SEQUENCE.iter().find(|s| s.name == name) {
            Some(s) => s,
            None => panic!("unknown star type {name} in a galaxy mix"),
        };
        for (a, b) in f.iter_mut().zip(star_intrinsic(st, grid, STAR_SIGMA_KMS)) {
            *a += weight * b;
        }
    }
    convolve_velocity(&f, grid, sigma_kms.hypot(INSTRUMENT_SIGMA_KMS))
}

/// Light fractions at 5500 Å of the three populations (from memory, typical).
pub const OLD_MIX: &[(&str, f64)] = &[
    ("star-F", 0.06),
    ("star-G", 0.30),
    ("star-K", 0.46),
    ("star-M0", 0.15),
    ("star-M4", 0.03),
];
/// Light fractions of the intermediate-age (post-starburst) population.
pub const INTERMEDIATE_MIX: &[(&str, f64)] = &[
    ("star-B", 0.05),
    ("star-A", 0.55),
    ("star-F", 0.20),
    ("star-G", 0.10),
    ("star-K", 0.10),
];
/// Light fractions of the young population.
pub const YOUNG_MIX: &[(&str, f64)] = &[
    ("star-O", 0.25),
    ("star-B", 0.35),
    ("star-A", 0.20),
    ("star-F", 0.10),
    ("star-G", 0.06),
    ("star-K", 0.04),
];

/// Dust optical depth in V of the young population and the power-law slope of
/// the attenuation curve, τ(λ) = τ_V (λ/5500 Å)^−0.7 (Charlot & Fall 2000; from memory).
pub const DUST_TAU_V: f64 = 0.3;

/// Interstellar absorption lines of star-forming galaxies (name, central τ).
const ISM: &[(&str, f64)] = &[
    ("Si II 1260", 0.8),
    ("O I 1302", 0.8),
    ("C II 1335", 0.8),
    ("Si IV 1394", 0.5),
    ("Si IV 1403", 0.4),
    ("Si II 1527", 0.6),
    ("C IV 1548", 0.6),
    ("C IV 1551", 0.5),
    ("Fe II 1608", 0.4),
    ("Al II 1671", 0.5),
    ("Fe II 2344", 0.6),
    ("Fe II 2374", 0.4),
    ("Fe II 2383", 0.8),
    ("Fe II 2587", 0.6),
    ("Fe II 2600", 0.8),
    ("Mg II 2796", 1.2),
    ("Mg II 2804", 1.0),
    ("Mg I 2853", 0.4),
];

fn normalise(f: &mut [f64], grid: &Grid) {
    let norm = median_in(f, grid, 5_400.0, 5_600.0);
    for x in f.iter_mut() {
        *x /= norm;
    }
}

/// The passive population, normalised at 5400–5600 Å.
pub fn old(grid: &Grid) -> Vec<f64> {
    old_at(grid, OLD_SIGMA_KMS)
}

/// The passive population with its stars moving at `sigma_kms`.
pub fn old_at(grid: &Grid, sigma_kms: f64) -> Vec<f64> {
    let mut f = population(grid, OLD_MIX, sigma_kms);
    // The ultraviolet upturn: a trace of hot stars (0.1 % of the light at 5500 Å,
    // giving f_λ(1500 Å) of a few per cent of f_λ(5500 Å); from memory).
    let hot = population(grid, &[("star-B", 0.001)], sigma_kms);
    for (a, b) in f.iter_mut().zip(hot) {
        *a += b;
    }
    normalise(&mut f, grid);
    f
}

/// The intermediate-age population, normalised at 5400–5600 Å.
pub fn intermediate(grid: &Grid) -> Vec<f64> {
    intermediate_at(grid, OLD_SIGMA_KMS)
}

/// The intermediate-age population with its stars moving at `sigma_kms`.
pub fn intermediate_at(grid: &Grid, sigma_kms: f64) -> Vec<f64> {
    let mut f = population(grid, INTERMEDIATE_MIX, sigma_kms);
    normalise(&mut f, grid);
    f
}

/// The young stellar continuum alone (with dust and interstellar lines), normalised.
pub fn young_continuum(grid: &Grid) -> Vec<f64> {
    young_continuum_at(grid, YOUNG_SIGMA_KMS)
}

/// The young stellar continuum with its stars moving at `sigma_kms`.
pub fn young_continuum_at(grid: &Grid, sigma_kms: f64) -> Vec<f64> {
    let mut f = population(grid, YOUNG_MIX, sigma_kms);
    let mut tau: Vec<f64> = grid
        .waves()
        .iter()
        .map(|&l| DUST_TAU_V * (l / 5_500.0).powf(-0.7))
        .collect();
    for &(name, t0) in ISM {
        Absorber {
            center: wave_of(name),
            tau0: t0,
            sigma_kms: 150.0,
            gamma: 0.0,
            eta: 0.0,
            wing: 1.0,
        }
        .add_to(&mut tau, grid);
    }
    // Damped Lyα absorption by the neutral gas of the galaxy.
    Absorber {
        center: wave_of("Lyα"),
        tau0: 4.0,
        sigma_kms: 200.0,
        gamma: 8.0,
        eta: 0.7,
        wing: 1.0,
    }
    .add_to(&mut tau, grid);
    apply_tau(&mut f, &tau);
    normalise(&mut f, grid);
    f
}

/// Hβ flux of the young template, in units of its continuum at 5500 Å × Å: an
/// equivalent width of a few tens of Å, typical of star-forming galaxies.
pub const YOUNG_HBETA: f64 = 25.0;

/// The star-forming template: young continuum plus H II region lines.
pub fn young(grid: &Grid) -> Vec<f64> {
    let mut f = young_continuum(grid);
    let lines = emission(grid, &star_forming_lines(), YOUNG_HBETA, GAS_SIGMA_KMS);
    for (a, b) in f.iter_mut().zip(lines) {
        *a += b;
    }
    f
}

/// Hβ flux of the emission-only basis.
pub const EMISSION_HBETA: f64 = 20.0;

/// Emission lines only (high-ionisation ratios).
pub fn emission_only(grid: &Grid) -> Vec<f64> {
    emission(grid, &high_ionisation_lines(), EMISSION_HBETA, GAS_SIGMA_KMS)
}

/// Generator parameters for the descriptor.
#[derive(Debug, Serialize)]
pub struct Parameters {
    old_mix: &'static [(&'static str, f64)],
    intermediate_mix: &'static [(&'static str, f64)],
    young_mix: &'static [(&'static str, f64)],
    old_sigma_kms: f64,
    young_sigma_kms: f64,
    gas_sigma_kms: f64,
    dust_tau_v: f64,
    case_b: &'static [(&'static str, f64)],
    star_forming_lines: Vec<(&'static str, f64)>,
    high_ionisation_lines: Vec<(&'static str, f64)>,
}

/// The parameters used by this generator.
pub fn parameters() -> Parameters {
    Parameters {
        old_mix: OLD_MIX,
        intermediate_mix: INTERMEDIATE_MIX,
        young_mix: YOUNG_MIX,
        old_sigma_kms: OLD_SIGMA_KMS,
        young_sigma_kms: YOUNG_SIGMA_KMS,
        gas_sigma_kms: GAS_SIGMA_KMS,
        dust_tau_v: DUST_TAU_V,
        case_b: CASE_B,
        star_forming_lines: star_forming_lines(),
        high_ionisation_lines: high_ionisation_lines(),
    }
}
