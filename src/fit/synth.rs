/*!
Simulated spectra built from a template set, for the recovery tests and the
benchmarks: a random mix of one class's templates at a given redshift, a
tilted instrument throughput, Gaussian noise for a chosen median S/N, and
random masked chunks. Invented data, never used to judge real spectra.
*/
use crate::spectrum::SpectrumMeta;
use crate::templates::{FitMode, Template, TemplateSet};
use crate::{ObjectClass, Spectrum};
use rand::Rng;
use rand_distr::{Distribution, Normal};

/// What to simulate.
#[derive(Debug, Clone)]
pub struct SimSpec {
    /// Class whose templates are mixed.
    pub class: ObjectClass,
    /// True redshift.
    pub z: f64,
    /// Median per-pixel S/N of the noisy spectrum.
    pub snr: f64,
    /// Number of pixels (linear in λ).
    pub n: usize,
    /// Observed range (Å).
    pub lam: (f64, f64),
    /// Largest relative throughput tilt across the range (e.g. 0.4).
    pub max_tilt: f64,
    /// Mask up to this many random chunks of 5–60 pixels.
    pub max_masks: usize,
    /// For a class whose templates are fitted each alone (stars): the
    /// template to use; `None` draws one at random.
    pub template: Option<String>,
}

impl Default for SimSpec {
    fn default() -> Self {
        SimSpec {
            class: ObjectClass::Galaxy,
            z: 0.1,
            snr: 10.0,
            n: 4000,
            lam: (3600.0, 9800.0),
            max_tilt: 0.4,
            max_masks: 3,
            template: None,
        }
    }
}

/// A simulated spectrum and the template it came from (stars) or the basis name.
/// Returns `None` when the set has no templates for the class or they do not
/// cover the observed range at this z.
pub fn simulate(set: &TemplateSet, spec: &SimSpec, rng: &mut impl Rng) -> Option<(Spectrum, String)> {
    let group = set.class(spec.class)?;
    if group.templates.is_empty() {
        return None;
    }
    let (templates, name): (Vec<&Template>, String) = match group.mode {
        FitMode::Basis => (group.templates.iter().collect(), format!("{}-basis", spec.class)),
        FitMode::EachAlone => {
            let t = match &spec.template {
                Some(name) => group.templates.iter().find(|t| &t.name == name)?,
                None => &group.templates[rng.random_range(0..group.templates.len())],
            };
            (vec![t], t.name.clone())
        }
    };
    let coefs = mix_weights(&templates, rng);
    let tilt = rng.random_range(-spec.max_tilt..=spec.max_tilt);
    let n = spec.n.max(2);
    let (l0, l1) = spec.lam;
    let wave: Vec<f64> = (0..n)
        .map(|i| l0 + (l1 - l0) * i as f64 / (n - 1) as f64)
        .collect();
    let mid = 0.5 * (l0 + l1);
    let half = 0.5 * (l1 - l0);
    let mut clean = Vec::with_capacity(n);
    for &l in &wave {
        let rest = l / (1.0 + spec.z);
        let mut v = 0.0;
        for (t, c) in templates.iter().zip(&coefs) {
            v += c * t.at(rest)?;
        }
        clean.push(v * (1.0 + tilt * (l - mid) / half));
    }
    let mut sorted: Vec<f64> = clean.iter().map(|v| v.abs()).collect();
    sorted.sort_by(f64::total_cmp);
    let level = sorted[n / 2];
    if level.is_nan() || level <= 0.0 {
        return None;
    }
    let sigma = level / spec.snr;
    let normal = Normal::new(0.0, sigma).ok()?;
    let flux: Vec<f64> = clean.iter().map(|v| v + normal.sample(rng)).collect();
    let mut good = vec![true; n];
    if n > 120 {
        for _ in 0..rng.random_range(0..=spec.max_masks) {
            let a = rng.random_range(0..n - 60);
            let len = rng.random_range(5..60);
            good[a..a + len].fill(false);
        }
    }
    let meta = SpectrumMeta {
        id: format!("sim-{}-{:.5}", spec.class, spec.z),
        ..Default::default()
    };
    let s = Spectrum::new(wave, flux, Some(vec![1.0 / (sigma * sigma); n]), Some(good), meta).ok()?;
    Some((s, name))
}

/// Scatter (dex) of a quasar's broad-line strengths about the typical mix:
/// the equivalent widths of the strong broad lines spread by about 0.2 dex
/// among quasars (from memory).
pub const QUASAR_LINE_SCATTER_DEX: f64 = 0.2;

/// Mixing weights of a basis. Built-in quasar bases take their typical mix
/// ([`crate::templates::quasars::typical_weight`]: continuum and both line
/// bases at 1), each line basis scaled by a log-normal factor of
/// [`QUASAR_LINE_SCATTER_DEX`], and the red continuum from 0–0.6. Any other
/// basis: the first template at 1, the others from 0–0.6 (galaxies from
/// passive to star-forming).
fn mix_weights(templates: &[&Template], rng: &mut impl Rng) -> Vec<f64> {
    use crate::templates::quasars::typical_weight;
    let typical: Option<Vec<f64>> = templates.iter().map(|t| typical_weight(&t.name)).collect();
    match typical {
        Some(w) if templates.len() > 1 => {
            let scatter = Normal::new(0.0, QUASAR_LINE_SCATTER_DEX).expect("finite σ");
            w.iter()
                .enumerate()
                .map(|(i, &w)| match (i, w > 0.0) {
                    (0, _) => w,
                    (_, true) => w * 10f64.powf(scatter.sample(rng)),
                    (_, false) => rng.random_range(0.0..0.6),
                })
                .collect()
        }
        _ => (0..templates.len())
            .map(|i| if i == 0 { 1.0 } else { rng.random_range(0.0..0.6) })
            .collect(),
    }
}
