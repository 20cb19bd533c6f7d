/*!
Synthetic spectra for the demo: a noise-free model built from the built-in
templates (redshifted, tilted, summed), scaled to a target r magnitude, then
observed on the demo spectrograph's grid with noise that grows at the
night-sky lines, plus the defects each hard case needs.
*/
use crate::lines;
use crate::templates::{self, TemplateKind};
use crate::ObjectClass;
use rand::Rng;
use rand_distr::{Distribution, Normal};

use super::photometry;

/// Blue end of the demo spectrograph (Å, vacuum).
pub const WAVE_MIN: f64 = 3600.0;
/// Red end (Å, vacuum).
pub const WAVE_MAX: f64 = 9800.0;
/// Pixels per spectrum (linear dispersion, 1.55 Å per pixel).
pub const N_PIX: usize = 4000;
/// Per-pixel noise floor in the demo flux unit (sets the survey depth).
pub const NOISE_FLOOR: f64 = 0.25;
/// Where the blue and red arms of the invented spectrograph meet (Å).
pub const ARM_JOIN: f64 = 6100.0;
use crate::constants::C_KMS;

/// The observed-frame wavelength grid.
pub fn wave_grid() -> Vec<f64> {
    let step = (WAVE_MAX - WAVE_MIN) / (N_PIX - 1) as f64;
    (0..N_PIX).map(|i| WAVE_MIN + step * i as f64).collect()
}

/// One template of the built-in set, redshifted, weighted and tilted by a
/// power law (λ_rest/5000 Å)^tilt so objects of a kind differ in colour.
#[derive(Debug, Clone, PartialEq)]
pub struct Component {
    /// Class of the template.
    pub class: ObjectClass,
    /// Index within that class's templates.
    pub template: usize,
    /// Weight.
    pub weight: f64,
    /// Redshift.
    pub z: f64,
    /// Power-law tilt.
    pub tilt: f64,
}

/// A noise-free object: template components plus Gaussian emission lines in
/// the observed frame plus a constant, with optional quasar absorption.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Model {
    /// Template components.
    pub components: Vec<Component>,
    /// (observed centre Å, σ Å, peak) Gaussian lines.
    pub lines: Vec<(f64, f64, f64)>,
    /// Constant added everywhere.
    pub constant: f64,
    /// Broad absorption troughs: (line rest Å, v_min km/s, v_max km/s, depth).
    pub troughs: Vec<(f64, f64, f64, f64)>,
    /// Redshift of the quasar whose troughs these are (None: no troughs).
    pub trough_z: Option<f64>,
    /// Overall scale.
    pub scale: f64,
}

impl Model {
    /// Flux at observed wavelength `lam` (Å), before scaling by `scale`.
    fn raw(&self, lam: f64) -> f64 {
        let set = templates::builtin();
        let mut f = self.constant;
        for c in &self.components {
            let Some(group) = set.class(c.class) else { continue };
            let Some(t) = group.templates.get(c.template) else {
                continue;
            };
            let rest = lam / (1.0 + c.z);
            if let Some(v) = t.at(rest) {
                f += c.weight * v * (rest / 5000.0).powf(c.tilt);
            }
        }
        for &(mu, s, a) in &self.lines {
            f += a * (-0.5 * ((lam - mu) / s).powi(2)).exp();
        }
        if let Some(z) = self.trough_z {
            let rest = lam / (1.0 + z);
            for &(line, v1, v2, depth) in &self.troughs {
                let (lo, hi) = (line * (1.0 - v2 / C_KMS), line * (1.0 - v1 / C_KMS));
                if rest > lo && rest < hi {
                    // Smooth-edged trough.
                    let x = (rest - lo) / (hi - lo);
                    f *= 1.0 - depth * (std::f64::consts::PI * x).sin().powf(0.5);
                }
            }
        }
        f
    }

    /// Flux at `lam` (Å) in the demo unit.
    pub fn at(&self, lam: f64) -> f64 {
        self.scale * self.raw(lam)
    }

    /// Scale so that the r-band AB magnitude becomes `r`; returns the true
    /// magnitudes in all five bands (None where there is no flux).
    pub fn normalise_to_r(&mut self, r: f64) -> [Option<f64>; 5] {
        self.scale = 1.0;
        let wave = photometry::band_grid();
        let flux: Vec<f64> = wave.iter().map(|&l| self.raw(l)).collect();
        if let Some(m) = photometry::ab_mag(&wave, &flux, 2) {
            self.scale = 10f64.powf(-0.4 * (r - m));
        }
        let flux: Vec<f64> = flux.iter().map(|f| f * self.scale).collect();
        std::array::from_fn(|b| photometry::ab_mag(&wave, &flux, b))
    }
}

/// Index of the template of `class` named `name`, else the first of `kind`, else 0.
pub fn template_of(class: ObjectClass, name: &str, kind: TemplateKind) -> usize {
    let Some(g) = templates::builtin().class(class) else {
        return 0;
    };
    g.templates
        .iter()
        .position(|t| t.name == name)
        .or_else(|| g.templates.iter().position(|t| t.kind == kind))
        .unwrap_or(0)
}

/// Number of templates of `class`.
pub fn template_count(class: ObjectClass) -> usize {
    templates::builtin().class(class).map_or(0, |g| g.templates.len())
}

/// Relative sky brightness at each pixel (sum of Gaussian sky lines, σ 2 Å).
pub fn sky_profile(wave: &[f64]) -> Vec<f64> {
    let sky = lines::sky();
    wave.iter()
        .map(|&l| {
            sky.iter()
                .filter(|s| (s.wave - l).abs() < 10.0)
                .map(|s| s.strength * (-0.5 * ((l - s.wave) / 2.0).powi(2)).exp())
                .sum()
        })
        .collect()
}

/// An observed spectrum: model plus noise; returns (flux, ivar, good).
pub fn observe(
    model: &Model,
    wave: &[f64],
    sky: &[f64],
    noise_floor: f64,
    rng: &mut impl Rng,
) -> (Vec<f64>, Vec<f64>, Vec<bool>) {
    let mut flux = Vec::with_capacity(wave.len());
    let mut ivar = Vec::with_capacity(wave.len());
    let unit = Normal::new(0.0, 1.0).expect("unit normal");
    for (i, &l) in wave.iter().enumerate() {
        let m = model.at(l);
        // Read-out and sky noise (more at sky lines) plus the source's own.
        let var = noise_floor * noise_floor * (1.0 + 25.0 * sky[i]) + 0.02 * m.max(0.0);
        flux.push(m + var.sqrt() * unit.sample(rng));
        ivar.push(1.0 / var);
    }
    let good = vec![true; wave.len()];
    (flux, ivar, good)
}

/// Residuals of sky subtraction: signed spikes at the strong sky lines.
pub fn add_sky_residuals(flux: &mut [f64], ivar: &[f64], wave: &[f64], rng: &mut impl Rng) {
    for s in lines::sky().iter().filter(|s| s.strength >= 0.3) {
        let amp = rng.random_range(4.0..10.0) * if rng.random::<bool>() { 1.0 } else { -0.6 };
        for i in 0..wave.len() {
            let d = (wave[i] - s.wave) / 1.8;
            if d.abs() < 4.0 && ivar[i] > 0.0 {
                flux[i] += amp * (-0.5 * d * d).exp() / ivar[i].sqrt();
            }
        }
    }
}

/// A bad column: `len` pixels from `start` marked bad.
pub fn mask_run(good: &mut [bool], start: usize, len: usize) {
    let end = (start + len).min(good.len());
    for g in &mut good[start.min(end)..end] {
        *g = false;
    }
}
