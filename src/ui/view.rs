/*!
Plot-ready data for one object: the smoothed flux and its 1σ band, the model
of the shown solution, runs of masked pixels, line and sky markers at the
shown z, and the close-up windows. Computed once when the object, the shown
solution or the view settings change, never per frame; this is the work the
GUI benchmark measures after a switch.
*/
use crate::lines::{self, LineKind};
use crate::Spectrum;

use super::state::ViewSettings;

/// A vertical marker with a label.
#[derive(Debug, Clone, PartialEq)]
pub struct Marker {
    /// Position on the plot's x axis.
    pub x: f64,
    /// Line name.
    pub label: &'static str,
    /// Emission, absorption or sky.
    pub kind: LineKind,
    /// Rough relative strength 0–1 (labels only for the stronger lines).
    pub strength: f64,
}

/// A small window around one diagnostic line.
#[derive(Debug, Clone, PartialEq)]
pub struct Closeup {
    /// Line name.
    pub name: &'static str,
    /// Emission or absorption.
    pub kind: LineKind,
    /// Expected position on the x axis.
    pub centre: f64,
    /// Smoothed flux points inside the window.
    pub flux: Vec<[f64; 2]>,
    /// Model points inside the window.
    pub model: Vec<[f64; 2]>,
}

/// Everything the spectrum and close-up panels draw.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Prepared {
    /// x of each good pixel (observed or rest Å).
    pub x: Vec<f64>,
    /// Smoothed flux at good pixels.
    pub flux: Vec<f64>,
    /// Lower edge of the 1σ band.
    pub lo: Vec<f64>,
    /// Upper edge of the 1σ band.
    pub hi: Vec<f64>,
    /// Model points (x, flux), empty when no model.
    pub model: Vec<[f64; 2]>,
    /// Runs of masked pixels as (x from, x to).
    pub masked: Vec<(f64, f64)>,
    /// Emission and absorption markers in range.
    pub lines: Vec<Marker>,
    /// Sky-line markers in range.
    pub sky: Vec<f64>,
    /// Close-up windows, blue to red.
    pub closeups: Vec<Closeup>,
    /// A y range that ignores spikes (1st–99th percentile, padded).
    pub y_range: (f64, f64),
    /// x range of the spectrum.
    pub x_range: (f64, f64),
}

/// Half-width of a close-up window in rest-frame Å (common practice: wide
/// enough for a broad quasar line's core, narrow enough to see a doublet).
pub const CLOSEUP_HALF_WIDTH_REST: f64 = 60.0;

/// Most close-ups shown at once.
pub const MAX_CLOSEUPS: usize = 8;

/// Prepare `s` for drawing at redshift `z` (markers) with `model` (flux at
/// `s.wave()`, NaN where undefined; may be empty).
pub fn prepare(s: &Spectrum, z: Option<f64>, model: &[f64], view: &ViewSettings) -> Prepared {
    let wave = s.wave();
    let n = wave.len();
    let zf = match (view.rest_frame, z) {
        (true, Some(z)) if z > -1.0 => 1.0 + z,
        _ => 1.0,
    };
    let (flux_s, sigma_s) = smooth(s, view.smoothing.max(1));
    let mut p = Prepared {
        x_range: (wave[0] / zf, wave[n - 1] / zf),
        ..Default::default()
    };
    let mut run: Option<(f64, f64)> = None;
    for i in 0..n {
        let x = wave[i] / zf;
        if s.good()[i] {
            if let Some(r) = run.take() {
                p.masked.push(r);
            }
            p.x.push(x);
            p.flux.push(flux_s[i]);
            p.lo.push(flux_s[i] - sigma_s[i]);
            p.hi.push(flux_s[i] + sigma_s[i]);
        } else {
            // Half a pixel each side (pixel width from its neighbours).
            let half = 0.25 * (wave[(i + 1).min(n - 1)] - wave[i.saturating_sub(1)]) / zf;
            run = Some(match run {
                Some((a, _)) => (a, x + half),
                None => (x - half, x + half),
            });
        }
    }
    if let Some(r) = run {
        p.masked.push(r);
    }
    if model.len() == n {
        p.model = (0..n)
            .filter(|&i| model[i].is_finite())
            .map(|i| [wave[i] / zf, model[i]])
            .collect();
    }
    p.y_range = robust_range(&p.flux);
    let (lam_lo, lam_hi) = (wave[0], wave[n - 1]);
    if let Some(z) = z {
        for l in lines::all() {
            let obs = l.wave * (1.0 + z);
            if obs >= lam_lo && obs <= lam_hi {
                p.lines.push(Marker {
                    x: obs / zf,
                    label: l.name,
                    kind: l.kind,
                    strength: l.strength,
                });
            }
        }
        for l in lines::diagnostic() {
            if p.closeups.len() >= MAX_CLOSEUPS {
                break;
            }
            let obs = l.wave * (1.0 + z);
            let half = CLOSEUP_HALF_WIDTH_REST * (1.0 + z);
            if obs - 0.5 * half < lam_lo || obs + 0.5 * half > lam_hi {
                continue;
            }
            let inside = |lam: f64| (lam - obs).abs() <= half;
            let flux = (0..n)
                .filter(|&i| s.good()[i] && inside(wave[i]))
                .map(|i| [wave[i] / zf, flux_s[i]])
                .collect();
            let model = if model.len() == n {
                (0..n)
                    .filter(|&i| inside(wave[i]) && model[i].is_finite())
                    .map(|i| [wave[i] / zf, model[i]])
                    .collect()
            } else {
                Vec::new()
            };
            p.closeups.push(Closeup {
                name: l.name,
                kind: l.kind,
                centre: obs / zf,
                flux,
                model,
            });
        }
    }
    if view.show_sky {
        p.sky = lines::sky()
            .iter()
            .filter(|l| l.wave >= lam_lo && l.wave <= lam_hi)
            .map(|l| l.wave / zf)
            .collect();
    }
    p
}

/// Inverse-variance weighted boxcar of `width` pixels over good pixels, and
/// the 1σ error of each smoothed value. Prefix sums keep it O(n) whatever the width.
pub fn smooth(s: &Spectrum, width: usize) -> (Vec<f64>, Vec<f64>) {
    let n = s.len();
    let (f, iv, g) = (s.flux(), s.ivar(), s.good());
    let mut sw = vec![0.0; n + 1];
    let mut swf = vec![0.0; n + 1];
    for i in 0..n {
        let w = if g[i] { iv[i] } else { 0.0 };
        sw[i + 1] = sw[i] + w;
        swf[i + 1] = swf[i] + w * f[i];
    }
    let half = width / 2;
    let mut out = vec![0.0; n];
    let mut err = vec![0.0; n];
    for i in 0..n {
        let a = i.saturating_sub(half);
        let b = (i + half + 1).min(n);
        let w = sw[b] - sw[a];
        if w > 0.0 {
            out[i] = (swf[b] - swf[a]) / w;
            err[i] = 1.0 / w.sqrt();
        } else {
            out[i] = f[i];
            err[i] = 0.0;
        }
    }
    (out, err)
}

/// 1st–99th percentile of `v`, padded by 15 % (robust against spikes).
fn robust_range(v: &[f64]) -> (f64, f64) {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if s.is_empty() {
        return (0.0, 1.0);
    }
    s.sort_by(|a, b| a.total_cmp(b));
    let lo = s[(s.len() as f64 * 0.01) as usize];
    let hi = s[((s.len() as f64 * 0.99) as usize).min(s.len() - 1)];
    let pad = 0.15 * (hi - lo).max(1e-12);
    (lo.min(0.0) - pad, hi + pad)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectrum::SpectrumMeta;
    use approx::assert_relative_eq;

    fn spec(flux: Vec<f64>, ivar: Vec<f64>, good: Vec<bool>) -> Spectrum {
        let wave = (0..flux.len()).map(|i| 4000.0 + i as f64).collect();
        Spectrum::new(wave, flux, Some(ivar), Some(good), SpectrumMeta::default()).unwrap()
    }

    #[test]
    fn smoothing_weights_by_inverse_variance() {
        // Weighted mean of (1, 3) with weights (3, 1) is 1.5; error 1/sqrt(4).
        let s = spec(vec![1.0, 3.0], vec![3.0, 1.0], vec![true, true]);
        let (f, e) = smooth(&s, 3);
        assert_relative_eq!(f[0], 1.5);
        assert_relative_eq!(e[0], 0.5);
    }

    #[test]
    fn masked_runs_and_rest_axis() {
        let mut good = vec![true; 10];
        good[3] = false;
        good[4] = false;
        let s = spec(vec![1.0; 10], vec![1.0; 10], good);
        let view = ViewSettings {
            rest_frame: true,
            smoothing: 1,
            ..Default::default()
        };
        let p = prepare(&s, Some(1.0), &[], &view);
        assert_eq!(p.x.len(), 8);
        assert_eq!(p.masked.len(), 1);
        // pixels 3 and 4 at 4003, 4004 Å observed → 2001.5, 2002 rest; ±0.25 edges.
        assert_relative_eq!(p.masked[0].0, 2001.25);
        assert_relative_eq!(p.masked[0].1, 2002.25);
        assert_relative_eq!(p.x_range.0, 2000.0);
    }
}
