/*!
Emission lines at the chosen redshift, by least squares on the spectrum's own
pixels (observed frame).

For each emission line in coverage the model in a window around it is a
local straight-line continuum plus one Gaussian per listed emission line
falling in the window (the line itself and its neighbours, e.g. [N II] next
to Hα), all sharing one velocity offset and one width. Continuum and
amplitudes enter linearly and are solved exactly (weighted least squares
with the inverse variance); offset and width are found by argmin's
Nelder–Mead on that profiled χ². Flux = amplitude · √(2π) σ_λ, its error
from the covariance of the linear solve, the rest-frame equivalent width =
flux / (continuum at the centre · (1+z)) (positive for emission).
*/
use super::engine::{Engine, C_KMS};
use super::prep::Prepared;
use super::result::{Candidate, LineMeasurement};
use crate::spectrum::Spectrum;
use crate::ObjectClass;
use argmin::core::{CostFunction, Error, Executor};
use argmin::solver::neldermead::NelderMead;
use nalgebra::{DMatrix, DVector};

/// Fewest good pixels in a line window.
const MIN_WINDOW_PIXELS: usize = 8;

/// Width limits and window half-width (km/s) for a class: quasars have
/// broad lines (σ up to several thousand km/s), galaxies and stars narrow
/// ones (common practice).
fn limits(class: ObjectClass) -> (f64, f64, f64, f64) {
    // (σ_min, σ_max, σ_start, window half-width)
    match class {
        ObjectClass::Quasar => (300.0, 8000.0, 2000.0, 20000.0),
        _ => (20.0, 800.0, 120.0, 2500.0),
    }
}

struct Window {
    lam: Vec<f64>,
    f: Vec<f64>,
    w: Vec<f64>,
    centres: Vec<f64>,
    lam_c: f64,
    sig_lim: (f64, f64),
    vmax: f64,
}

struct LinearFit {
    chi2: f64,
    coef: DVector<f64>,
    cov: Option<DMatrix<f64>>,
}

impl Window {
    /// Linear part at offset v (km/s) and width σ (km/s).
    fn solve(&self, v: f64, sig: f64) -> Option<LinearFit> {
        let k = 2 + self.centres.len();
        let mut ata = DMatrix::<f64>::zeros(k, k);
        let mut atb = DVector::<f64>::zeros(k);
        let mut row = vec![0.0; k];
        for i in 0..self.lam.len() {
            self.design(i, v, sig, &mut row);
            for a in 0..k {
                atb[a] += self.w[i] * row[a] * self.f[i];
                for b in 0..k {
                    ata[(a, b)] += self.w[i] * row[a] * row[b];
                }
            }
        }
        let cov = ata.clone().try_inverse();
        let coef = match ata.clone().cholesky() {
            Some(ch) => ch.solve(&atb),
            None => ata.svd(true, true).solve(&atb, 1e-12).ok()?,
        };
        let mut chi2 = 0.0;
        for i in 0..self.lam.len() {
            self.design(i, v, sig, &mut row);
            let m: f64 = row.iter().zip(coef.iter()).map(|(a, b)| a * b).sum();
            chi2 += self.w[i] * (self.f[i] - m).powi(2);
        }
        Some(LinearFit { chi2, coef, cov })
    }

    fn design(&self, i: usize, v: f64, sig: f64, row: &mut [f64]) {
        let l = self.lam[i];
        row[0] = 1.0;
        row[1] = (l - self.lam_c) / self.lam_c;
        for (k, &c) in self.centres.iter().enumerate() {
            let mu = c * (1.0 + v / C_KMS);
            let s = mu * sig / C_KMS;
            row[2 + k] = (-0.5 * ((l - mu) / s).powi(2)).exp();
        }
    }
}

/// Borrowing wrapper so the window stays usable after the minimiser ran.
struct Profiled<'a>(&'a Window);

impl CostFunction for Profiled<'_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, p: &Vec<f64>) -> Result<f64, Error> {
        let win = self.0;
        let (v, lns) = (p[0], p[1]);
        let sig = lns.exp();
        // outside the allowed box the cost rises steeply (keeps Nelder–Mead inside)
        let mut pen = 0.0;
        if v.abs() > win.vmax {
            pen += 1e6 * (v.abs() - win.vmax);
        }
        if sig < win.sig_lim.0 || sig > win.sig_lim.1 {
            pen += 1e6;
        }
        let sig = sig.clamp(win.sig_lim.0, win.sig_lim.1);
        let v = v.clamp(-win.vmax, win.vmax);
        Ok(win.solve(v, sig).map_or(f64::MAX, |f| f.chi2) + pen)
    }
}

/// Measure `list` (name, rest vacuum Å) of emission lines at redshift `z`.
pub fn measure_list(s: &Spectrum, z: f64, class: ObjectClass, list: &[(&str, f64)]) -> Vec<LineMeasurement> {
    let (smin, smax, s0, half_kms) = limits(class);
    let wave = s.wave();
    let (lo, hi) = (wave[0], wave[wave.len() - 1]);
    let mut out = Vec::new();
    for &(name, rest) in list {
        let obs = rest * (1.0 + z);
        let half = obs * half_kms / C_KMS;
        if obs - half < lo || obs + half > hi {
            continue;
        }
        let idx: Vec<usize> = (0..s.len())
            .filter(|&i| s.good()[i] && (wave[i] - obs).abs() <= half)
            .collect();
        if idx.len() < MIN_WINDOW_PIXELS {
            continue;
        }
        // the line first, then its listed neighbours inside the window
        let mut centres = vec![obs];
        for &(_, r2) in list {
            let o2 = r2 * (1.0 + z);
            if (o2 - obs).abs() > 1e-6 && (o2 - obs).abs() < half {
                centres.push(o2);
            }
        }
        let win = Window {
            lam: idx.iter().map(|&i| wave[i]).collect(),
            f: idx.iter().map(|&i| s.flux()[i]).collect(),
            w: idx.iter().map(|&i| s.ivar()[i]).collect(),
            centres,
            lam_c: obs,
            sig_lim: (smin, smax),
            vmax: 0.5 * half_kms,
        };
        let simplex = vec![
            vec![0.0, s0.ln()],
            vec![0.3 * s0, s0.ln()],
            vec![0.0, (1.8 * s0).ln()],
        ];
        let Ok(nm) = NelderMead::new(simplex).with_sd_tolerance(1e-6) else {
            continue;
        };
        let best = Executor::new(Profiled(&win), nm)
            .configure(|st| st.max_iters(150))
            .run()
            .ok()
            .and_then(|r| r.state.best_param);
        let Some(p) = best else { continue };
        let v = p[0].clamp(-win.vmax, win.vmax);
        let sig = p[1].exp().clamp(smin, smax);
        let Some(fit) = win.solve(v, sig) else { continue };
        let mu = obs * (1.0 + v / C_KMS);
        let sig_l = mu * sig / C_KMS;
        let norm = (2.0 * std::f64::consts::PI).sqrt() * sig_l;
        let amp = fit.coef[2];
        let amp_err = fit
            .cov
            .as_ref()
            .map(|c| c[(2, 2)])
            .filter(|v| *v > 0.0 && v.is_finite())
            .map_or(f64::MAX, f64::sqrt);
        let flux = amp * norm;
        let flux_err = amp_err * norm;
        let cont = fit.coef[0] + fit.coef[1] * (mu - obs) / obs;
        let ew_rest = if cont > 0.0 {
            flux / (cont * (1.0 + z))
        } else {
            0.0
        };
        if !(flux.is_finite() && flux_err.is_finite()) {
            continue;
        }
        out.push(LineMeasurement {
            name: name.to_string(),
            rest_wave: rest,
            obs_wave: mu,
            flux,
            flux_err,
            sigma_kms: sig,
            ew_rest,
            snr: if flux_err > 0.0 { flux / flux_err } else { 0.0 },
        });
    }
    out
}

/// Measure the listed emission lines in coverage at the candidate's redshift.
pub fn measure(s: &Spectrum, _p: &Prepared, _e: &Engine, c: &Candidate) -> Vec<LineMeasurement> {
    let list = emission_list();
    measure_list(s, c.z, c.class, &list)
}

/// The emission lines to measure: (name, rest vacuum Å).
fn emission_list() -> Vec<(&'static str, f64)> {
    Vec::new()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectrum::SpectrumMeta;
    use approx::assert_relative_eq;

    #[test]
    fn recovers_flux_width_and_ew_of_a_gaussian_line() {
        // continuum 2, line at 5008.24·(1+z) with flux 30 and σ = 150 km/s, no noise
        let z = 0.1;
        let centre = 5008.24 * 1.1;
        let sig_l = centre * 150.0 / C_KMS;
        let wave: Vec<f64> = (0..3000).map(|i| 5000.0 + 0.5 * i as f64).collect();
        let flux: Vec<f64> = wave
            .iter()
            .map(|l| {
                2.0 + 30.0 / ((2.0 * std::f64::consts::PI).sqrt() * sig_l)
                    * (-0.5 * ((l - centre) / sig_l).powi(2)).exp()
            })
            .collect();
        let s = Spectrum::new(wave, flux, Some(vec![100.0; 3000]), None, SpectrumMeta::default()).unwrap();
        let m = measure_list(&s, z, ObjectClass::Galaxy, &[("[O III] 5008", 5008.24)]);
        assert_eq!(m.len(), 1);
        assert_relative_eq!(m[0].flux, 30.0, max_relative = 1e-3);
        assert_relative_eq!(m[0].sigma_kms, 150.0, max_relative = 1e-3);
        assert_relative_eq!(m[0].obs_wave, centre, max_relative = 1e-6);
        // EW_rest = F / (C (1+z)) = 30 / (2 · 1.1)
        assert_relative_eq!(m[0].ew_rest, 30.0 / 2.2, max_relative = 1e-3);
    }
}
