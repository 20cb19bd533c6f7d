/*!
Emission lines at the chosen redshift, by least squares on the spectrum's own
pixels (observed frame).

For each emission line in coverage the model in a window around it is a
local straight-line continuum plus one Gaussian per listed emission line
falling in the window (the line itself and its neighbours, e.g. [N II] next
to Hα), all sharing one velocity offset and one width. Continuum and
amplitudes enter linearly and are solved exactly (weighted least squares
with the inverse variance); offset and width are found by argmin's
Nelder–Mead on that profiled χ² (for a line detected at [`DETECT_SNR`]; an
undetected line's flux is forced at the rest centre and the start width).
Flux = amplitude · √(2π) σ_λ, its error
from the covariance of the linear solve, the rest-frame equivalent width =
flux / (continuum at the centre · (1+z)) (positive for emission).
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::prep::solve_normal;
use super::result::{Candidate, LineMeasurement};
use crate::constants::C_KMS;
use crate::spectrum::Spectrum;
use crate::ObjectClass;
use argmin::core::{CostFunction, Error, Executor};
use argmin::solver::neldermead::NelderMead;

/// Iterations of the Nelder–Mead search for offset and width (it stops
/// earlier once the simplex's χ² values agree to 0.01, far below a
/// meaningful Δχ²).
const MAX_ITERS: u64 = 60;
/// Amplitude S/N (at the rest centre, twice the start width) below which a
/// line counts as undetected and is measured at a fixed centre and width.
pub const DETECT_SNR: f64 = 2.0;
/// Fewest good pixels in a line window.
const MIN_WINDOW_PIXELS: usize = 8;

/// Width limits and window half-width (km/s) for a class: quasars have
/// broad lines (σ up to several thousand km/s), galaxies and stars narrow
/// ones (common practice).
fn limits(class: ObjectClass) -> (f64, f64, f64, f64) {
    // (σ_min, σ_max, σ_start, window half-width)
    match class {
        ObjectClass::Quasar => (300.0, 8000.0, 2000.0, 12000.0),
        _ => (20.0, 800.0, 120.0, 2500.0),
    }
}

struct Window {
    lam: Vec<f64>,
    f: Vec<f64>,
    w: Vec<f64>,
    centres: Vec<f64>,
    /// Σ w f² over the window.
    fww: f64,
    lam_c: f64,
    sig_lim: (f64, f64),
    vmax: f64,
}

struct LinearFit {
    chi2: f64,
    coef: Vec<f64>,
    /// Variance of the line's own amplitude (coefficient 2).
    amp_var: f64,
}

impl Window {
    /// Linear part at offset v (km/s) and width σ (km/s); the amplitude's
    /// variance only `with_variance` (a second solve).
    fn solve(&self, v: f64, sig: f64, with_variance: bool) -> Option<LinearFit> {
        let k = 2 + self.centres.len();
        let mut ata = vec![0.0; k * k];
        let mut atb = vec![0.0; k];
        let mut row = vec![0.0; k];
        for i in 0..self.lam.len() {
            self.design(i, v, sig, &mut row);
            for a in 0..k {
                let wa = self.w[i] * row[a];
                if wa == 0.0 {
                    continue;
                }
                atb[a] += wa * self.f[i];
                // upper triangle; mirrored below
                for b in a..k {
                    ata[a * k + b] += wa * row[b];
                }
            }
        }
        for a in 0..k {
            for b in 0..a {
                ata[a * k + b] = ata[b * k + a];
            }
        }
        let all = vec![true; k];
        let coef = solve_normal(&ata, &atb, &all);
        // (AᵀWA)⁻¹ column of the amplitude: the covariance of the linear fit
        let amp_var = if with_variance {
            let mut e = vec![0.0; k];
            e[2] = 1.0;
            solve_normal(&ata, &e, &all)[2]
        } else {
            f64::NAN
        };
        // χ² = Σ w f² − c·b at the least-squares solution
        let chi2 = self.fww - coef.iter().zip(&atb).map(|(c, b)| c * b).sum::<f64>();
        chi2.is_finite().then_some(LinearFit { chi2, coef, amp_var })
    }

    fn design(&self, i: usize, v: f64, sig: f64, row: &mut [f64]) {
        let l = self.lam[i];
        row[0] = 1.0;
        row[1] = (l - self.lam_c) / self.lam_c;
        let scale = 1.0 + v / C_KMS;
        let inv_s = C_KMS / sig;
        for (k, &c) in self.centres.iter().enumerate() {
            let mu = c * scale;
            // (λ − μ)/σ_λ with σ_λ = μ σ / c
            let u = (l - mu) * inv_s / mu;
            // beyond 8σ the profile is below 1e-13 of its peak
            row[2 + k] = if u.abs() < 8.0 { (-0.5 * u * u).exp() } else { 0.0 };
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
        Ok(win.solve(v, sig, false).map_or(f64::MAX, |f| f.chi2) + pen)
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
        let fww = idx.iter().map(|&i| s.ivar()[i] * s.flux()[i] * s.flux()[i]).sum();
        let win = Window {
            fww,
            lam: idx.iter().map(|&i| wave[i]).collect(),
            f: idx.iter().map(|&i| s.flux()[i]).collect(),
            w: idx.iter().map(|&i| s.ivar()[i]).collect(),
            centres,
            lam_c: obs,
            sig_lim: (smin, smax),
            vmax: 0.5 * half_kms,
        };
        // Probe at the rest centre with twice the start width (tolerant of an
        // offset): a line below DETECT_SNR there is not searched for, since
        // offset and width fitted to noise are noise; its flux is forced at
        // the rest centre and the start width (an upper-limit measurement,
        // common practice).
        let detected = win
            .solve(0.0, 2.0 * s0, true)
            .is_some_and(|f| f.amp_var > 0.0 && f.coef[2] >= DETECT_SNR * f.amp_var.sqrt());
        let (v, sig) = if detected {
            let simplex = vec![
                vec![0.0, s0.ln()],
                vec![0.3 * s0, s0.ln()],
                vec![0.0, (1.8 * s0).ln()],
            ];
            let Ok(nm) = NelderMead::new(simplex).with_sd_tolerance(1e-2) else {
                continue;
            };
            let best = Executor::new(Profiled(&win), nm)
                .configure(|st| st.max_iters(MAX_ITERS))
                .run()
                .ok()
                .and_then(|r| r.state.best_param);
            let Some(p) = best else { continue };
            (p[0].clamp(-win.vmax, win.vmax), p[1].exp().clamp(smin, smax))
        } else {
            (0.0, s0)
        };
        let Some(fit) = win.solve(v, sig, true) else {
            continue;
        };
        let mu = obs * (1.0 + v / C_KMS);
        let sig_l = mu * sig / C_KMS;
        let norm = (2.0 * std::f64::consts::PI).sqrt() * sig_l;
        let amp = fit.coef[2];
        let amp_err = if fit.amp_var > 0.0 && fit.amp_var.is_finite() {
            fit.amp_var.sqrt()
        } else {
            continue;
        };
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
            width_fitted: detected,
        });
    }
    out
}

/// Measure the emission lines of the line list in coverage at the candidate's redshift.
pub fn measure(s: &Spectrum, c: &Candidate) -> Vec<LineMeasurement> {
    let list = emission_list();
    measure_list(s, c.z, c.class, &list)
}

/// The emission lines to measure: every emission line of the line list
/// ([`crate::lines::all`]) as (name, rest vacuum Å).
fn emission_list() -> Vec<(&'static str, f64)> {
    crate::lines::all()
        .iter()
        .filter(|l| l.kind == crate::lines::LineKind::Emission)
        .map(|l| (l.name, l.wave))
        .collect()
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
        // the search stops once χ² agrees to 0.01: the centre to ≲ 1.5 km/s
        assert_relative_eq!(m[0].obs_wave, centre, max_relative = 5e-6);
        // EW_rest = F / (C (1+z)) = 30 / (2 · 1.1)
        assert_relative_eq!(m[0].ew_rest, 30.0 / 2.2, max_relative = 1e-3);
        assert!(m[0].width_fitted);
    }

    #[test]
    fn an_absent_line_is_forced_at_its_rest_centre_and_start_width() {
        // a flat continuum of 2 with σ = 0.1 noise (deterministic pseudo-random), no line
        let wave: Vec<f64> = (0..3000).map(|i| 5000.0 + 0.5 * i as f64).collect();
        let flux: Vec<f64> = (0..3000)
            .map(|i| 2.0 + 0.1 * ((i as f64 * 12.9898).sin() * 43_758.545).fract())
            .collect();
        let s = Spectrum::new(wave, flux, Some(vec![100.0; 3000]), None, SpectrumMeta::default()).unwrap();
        let m = measure_list(&s, 0.1, ObjectClass::Galaxy, &[("[O III] 5008", 5008.24)]);
        assert_eq!(m.len(), 1);
        assert!(!m[0].width_fitted);
        assert_relative_eq!(m[0].obs_wave, 5008.24 * 1.1, max_relative = 1e-15);
        assert_relative_eq!(
            m[0].sigma_kms,
            limits(ObjectClass::Galaxy).2,
            max_relative = 1e-15
        );
        assert!(m[0].snr.abs() < DETECT_SNR, "S/N {}", m[0].snr);
    }
}
