/*!
Quasar basis templates: a power-law continuum with the small blue bump (Balmer
continuum and Fe II pseudo-continuum), broad and narrow emission lines with
typical widths and strengths, and the mean transmission of the intergalactic
Lyα forest blueward of Lyα.

Bases (coefficient 1 on the first three gives a typical quasar):
- `qso-continuum`: f_ν ∝ ν^α with α = −0.5, plus Balmer continuum and Fe II bumps;
- `qso-uv-lines`: broad Lyβ/O VI, Lyα, N V, Si IV+O IV], C IV, He II, C III], Mg II;
- `qso-balmer`: broad Hα, Hβ, Hγ, Hδ plus narrow [O II], [Ne III], [Ne V], [O III];
- `qso-red`: a redder power law (α = −1.5) so the fit can vary the slope.

Line widths, fluxes and the continuum shape are typical of quasar composite
spectra (from memory, common practice); fluxes are in units of f_λ(1450 Å) × Å.
*/
use super::profiles::{add_gaussian, sigmoid, Grid};
use crate::lines::wave_of;
use serde::Serialize;

/// Continuum slope α in f_ν ∝ ν^α (common practice, typical of composites).
pub const ALPHA_NU: f64 = -0.5;
/// Slope of the red continuum basis.
pub const ALPHA_NU_RED: f64 = -1.5;
/// Redshift at which the mean Lyα-forest transmission is evaluated.
pub const FOREST_Z: f64 = 2.5;

/// One emission component: line name (or `None` with an explicit centre), FWHM km/s, flux.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Component {
    /// Line name in the line list.
    pub line: &'static str,
    /// Full width at half maximum (km/s).
    pub fwhm_kms: f64,
    /// Flux in units of f_λ(1450 Å) × Å.
    pub flux: f64,
}

const fn c(line: &'static str, fwhm_kms: f64, flux: f64) -> Component {
    Component { line, fwhm_kms, flux }
}

/// Broad ultraviolet lines (from memory, typical composite values: Lyα
/// equivalent width ~ 90 Å, C IV ~ 30 Å, Mg II ~ 35 Å).
pub const UV_LINES: &[Component] = &[
    c("Lyβ", 4_000.0, 4.0),
    c("O VI 1032", 5_000.0, 6.0),
    c("O VI 1038", 5_000.0, 3.0),
    c("Lyα", 1_800.0, 35.0),
    c("Lyα", 6_500.0, 65.0),
    c("N V 1239", 4_500.0, 9.0),
    c("N V 1243", 4_500.0, 4.5),
    c("Si IV+O IV]", 6_000.0, 8.0),
    c("C IV", 2_500.0, 10.0),
    c("C IV", 7_000.0, 20.0),
    c("He II 1640", 5_000.0, 2.5),
    c("Al III", 4_000.0, 1.0),
    c("Si III] 1892", 4_000.0, 1.5),
    c("C III]", 5_000.0, 11.0),
    c("C II] 2326", 4_000.0, 1.5),
    c("Mg II", 4_000.0, 15.0),
];

/// Balmer lines (broad) and narrow forbidden lines (from memory, typical
/// composite values: Hβ equivalent width ~ 60 Å, Hα ~ 300 Å).
pub const BALMER_LINES: &[Component] = &[
    c("[Ne V] 3427", 600.0, 0.4),
    c("[O II] 3727", 500.0, 0.15),
    c("[O II] 3730", 500.0, 0.2),
    c("[Ne III] 3870", 600.0, 0.35),
    c("Hδ", 4_000.0, 1.5),
    c("Hγ", 4_000.0, 3.5),
    c("He II 4687", 3_000.0, 0.4),
    c("Hβ", 4_500.0, 9.0),
    c("Hβ", 500.0, 0.2),
    c("[O III] 4960", 500.0, 2.0 / 2.98),
    c("[O III] 5008", 500.0, 2.0),
    c("Hα", 3_500.0, 30.0),
    c("Hα", 500.0, 0.6),
    c("[N II] 6585", 500.0, 0.3),
    c("[N II] 6550", 500.0, 0.3 / super::galaxies::NII_RATIO),
    c("[S II] 6718", 500.0, 0.1),
    c("[S II] 6733", 500.0, 0.08),
];

/// Mean effective Lyα optical depth of the intergalactic medium,
/// τ_eff(z) = 0.0018 (1+z)^3.92 (Faucher-Giguère et al. 2008; from memory).
pub fn tau_eff(z: f64) -> f64 {
    0.0018 * (1.0 + z).powf(3.92)
}

/// Rest-frame length (Å) over which the mean Lyman-continuum optical depth
/// grows by one below 912 Å: the mean free path of ionising photons at
/// z ≈ 2.5–3 (~100 proper Mpc; from memory) seen from the quasar.
pub const LYMAN_CONTINUUM_LENGTH: f64 = 60.0;

/// Rest-frame width (Å) of the ramp over which the forest sets in below Lyα
/// and Lyβ: near the quasar its radiation ionises the gas (the proximity
/// effect, a few thousand km/s; from memory), so the mean absorption has no
/// sharp edge at the line.
pub const PROXIMITY_RAMP: f64 = 15.0;

/// Mean transmission at rest wavelength `lam` of a quasar at [`FOREST_Z`]:
/// the Lyα forest below Lyα, the Lyβ forest below Lyβ (τ scaled by
/// f λ of Lyβ over Lyα ≈ 0.16), and below 912 Å the Lyman continuum of the
/// intervening absorbers, growing with distance from the quasar. Averaged over
/// sight lines none of these has a sharp edge, so neither has the template
/// (a sharp edge would also mimic the Balmer jump of A stars at high z).
pub fn forest_transmission(lam: f64) -> f64 {
    let lya = wave_of("Lyα");
    let lyb = wave_of("Lyβ");
    let obs = lam * (1.0 + FOREST_Z);
    let ramp = |edge: f64| {
        if lam >= edge {
            0.0
        } else {
            1.0 - (-(edge - lam) / PROXIMITY_RAMP).exp()
        }
    };
    let mut tau = tau_eff(obs / lya - 1.0) * ramp(lya);
    tau += 0.16 * tau_eff(obs / lyb - 1.0) * ramp(lyb);
    tau += (911.75 - lam).max(0.0) / LYMAN_CONTINUUM_LENGTH;
    (-tau).exp()
}

/// Wavelength (Å) below which the intrinsic continuum softens in the extreme
/// ultraviolet, to f_ν ∝ ν^−1.7 (from memory, typical of composites).
pub const EUV_BREAK: f64 = 1_050.0;

fn power_law(lam: f64, alpha_nu: f64) -> f64 {
    // f_λ ∝ λ^(−2−α_ν), normalised to 1 at 1450 Å; continuous at the EUV break.
    if lam >= EUV_BREAK {
        (lam / 1_450.0).powf(-2.0 - alpha_nu)
    } else {
        (EUV_BREAK / 1_450.0).powf(-2.0 - alpha_nu) * (lam / EUV_BREAK).powf(-2.0 + 1.7)
    }
}

/// The blue continuum with Balmer continuum and Fe II bumps.
pub fn continuum(grid: &Grid) -> Vec<f64> {
    let edge = 3_646.0;
    grid.waves()
        .iter()
        .map(|&l| {
            let pl = power_law(l, ALPHA_NU);
            // Balmer continuum: optically thin bound-free emission below the edge,
            // ~10 % of the power law there, falling to the blue.
            let bc = if l < edge {
                0.10 * power_law(edge, ALPHA_NU) * (l / edge).powi(3)
            } else {
                0.0
            };
            let bc = bc * sigmoid((edge - l) / 15.0) * 2.0;
            // Fe II pseudo-continuum (blends of thousands of lines), from memory:
            // ultraviolet 2200–3100 Å, optical 4450–4750 and 5150–5400 Å.
            let gauss = |c: f64, s: f64| (-0.5 * ((l - c) / s).powi(2)).exp();
            let fe = pl
                * (0.18 * gauss(2_650.0, 250.0)
                    + 0.12 * gauss(4_580.0, 110.0)
                    + 0.10 * gauss(5_280.0, 120.0));
            (pl + bc + fe) * forest_transmission(l)
        })
        .collect()
}

/// The redder power law.
pub fn red_continuum(grid: &Grid) -> Vec<f64> {
    grid.waves()
        .iter()
        .map(|&l| power_law(l, ALPHA_NU_RED) * forest_transmission(l))
        .collect()
}

/// An emission-line basis from `components`.
pub fn lines(grid: &Grid, components: &[Component]) -> Vec<f64> {
    let mut f = vec![0.0; grid.n];
    for comp in components {
        let sigma = comp.fwhm_kms / (2.0 * (2.0 * std::f64::consts::LN_2).sqrt());
        add_gaussian(&mut f, grid, wave_of(comp.line), sigma, comp.flux);
    }
    for (x, l) in f.iter_mut().zip(grid.waves()) {
        *x *= forest_transmission(l);
    }
    f
}

/// Weight of a built-in quasar basis in a typical quasar (the module's
/// bases are scaled so that 1 on the continuum and on both line bases is a
/// typical composite; the red continuum only varies the slope, 0).
/// `None` for a name that is not a built-in quasar basis.
pub fn typical_weight(name: &str) -> Option<f64> {
    match name {
        "qso-continuum" | "qso-uv-lines" | "qso-balmer" => Some(1.0),
        "qso-red" => Some(0.0),
        _ => None,
    }
}

/// Generator parameters for the descriptor.
#[derive(Debug, Serialize)]
pub struct Parameters {
    alpha_nu: f64,
    alpha_nu_red: f64,
    forest_z: f64,
    forest_tau_eff: &'static str,
    uv_lines: &'static [Component],
    balmer_lines: &'static [Component],
}

/// The parameters used by this generator.
pub fn parameters() -> Parameters {
    Parameters {
        alpha_nu: ALPHA_NU,
        alpha_nu_red: ALPHA_NU_RED,
        forest_z: FOREST_Z,
        forest_tau_eff: "0.0018 (1+z)^3.92",
        uv_lines: UV_LINES,
        balmer_lines: BALMER_LINES,
    }
}
