/*!
Classic Fourier cross-correlation, the second method (`Method::XCorr`).

Following Tonry & Davis (1979, AJ 84, 1511): spectrum and template are put on
the same log10 λ grid, their continua removed (a running median of
[`CONT_WINDOW`] pixels subtracted), the ends apodised with a cosine bell
([`APODISE`] of the good span at each end), and they are cross-correlated by
FFT. The peak is located by a parabola through the three highest points, its
full width at half maximum `w` measured on the correlation, and the
antisymmetric part of the correlation about the peak gives σ_a:

  σ_a² = 1/(2N) Σ_n [c(δ+n) − c(δ−n)]²,   r = h / (√2 σ_a),

with h the peak height. The shift error is 3w / (8(1 + r)) pixels (the form
given by Tonry & Davis and used by later cross-correlation codes; from
memory), converted to redshift with dz = ln 10 · Δ · (1+z).
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::config::FitError;
use super::method::{too_fast_star, FitMethod, Setup, Solution};
use super::prep::Prepared;
use super::result::Candidate;
use super::sums::{sums_fit, thresholds};
use crate::templates::TemplateKind;
use crate::ObjectClass;
use rustfft::num_complex::Complex;
use serde::{Deserialize, Serialize};

/// Width (pixels) of the running median taken as continuum (≈ 14 000 km/s at
/// the default step: wide enough to keep broad quasar lines).
pub const CONT_WINDOW: usize = 201;
/// Fraction of the good span tapered by a cosine bell at each end.
pub const APODISE: f64 = 0.05;
/// r below which the answer is flagged ambiguous (r ≳ 3 is the usual
/// threshold of a trustworthy peak; from memory, common practice).
pub const R_AMBIGUOUS: f64 = 3.0;

/// One correlation peak.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct XCorrPeak {
    /// Class of the template.
    pub class: ObjectClass,
    /// Template name.
    pub template: String,
    /// Emission or absorption template.
    pub kind: TemplateKind,
    /// Redshift of the peak (parabola-refined).
    pub z: f64,
    /// Tonry & Davis redshift error.
    pub z_err: f64,
    /// Normalised peak height h.
    pub height: f64,
    /// Tonry & Davis r = h / (√2 σ_a).
    pub r: f64,
    /// FWHM of the correlation peak (pixels).
    pub fwhm_pixels: f64,
}

/// Running median over the pixels where `use_px` is true; NaN where none.
fn running_median(x: &[f64], use_px: &[bool], window: usize) -> Vec<f64> {
    let n = x.len();
    let half = window / 2;
    // only a coarse set of nodes is computed, then interpolated: the continuum is smooth
    let step = (window / 8).max(1);
    let mut nodes: Vec<(usize, f64)> = Vec::new();
    let mut buf = Vec::with_capacity(window);
    let mut i = 0;
    while i < n {
        buf.clear();
        // symmetric window (shrunk at the ends) so a linear trend is exact
        let h = half.min(i).min(n - 1 - i).max(2);
        let lo = i.saturating_sub(h);
        let hi = (i + h + 1).min(n);
        buf.extend((lo..hi).filter(|&k| use_px[k]).map(|k| x[k]));
        if buf.len() >= 5 {
            let m = buf.len() / 2;
            let (_, v, _) = buf.select_nth_unstable_by(m, f64::total_cmp);
            nodes.push((i, *v));
        }
        if i + 1 == n {
            break;
        }
        i = (i + step).min(n - 1);
    }
    let mut out = vec![f64::NAN; n];
    if nodes.is_empty() {
        return out;
    }
    let mut k = 0;
    for (p, o) in out.iter_mut().enumerate() {
        while k + 1 < nodes.len() && nodes[k + 1].0 <= p {
            k += 1;
        }
        // linear between nodes, extrapolated from the last pair at the ends
        let j = if k + 1 < nodes.len() {
            k
        } else {
            k.saturating_sub(1)
        };
        let (a, va) = nodes[j];
        *o = match nodes.get(j + 1) {
            Some(&(b, vb)) => va + (vb - va) * (p as f64 - a as f64) / (b as f64 - a as f64),
            None => va,
        };
    }
    out
}

/// Continuum-subtracted, apodised copy of `x` (zero where `use_px` is false).
pub fn flatten(x: &[f64], use_px: &[bool]) -> Vec<f64> {
    let cont = running_median(x, use_px, CONT_WINDOW);
    let first = use_px.iter().position(|u| *u).unwrap_or(0);
    let last = use_px.iter().rposition(|u| *u).unwrap_or(0);
    let span = (last.saturating_sub(first) + 1) as f64;
    let taper = (APODISE * span).max(1.0);
    (0..x.len())
        .map(|i| {
            if !use_px[i] || !cont[i].is_finite() {
                return 0.0;
            }
            let d = ((i - first) as f64).min((last - i) as f64);
            let wgt = if d < taper {
                0.5 * (1.0 - (std::f64::consts::PI * d / taper).cos())
            } else {
                1.0
            };
            (x[i] - cont[i]) * wgt
        })
        .collect()
}

/// Parabola through (−1, a), (0, b), (1, c): vertex offset and height.
fn parabola(a: f64, b: f64, c: f64) -> (f64, f64) {
    let den = a - 2.0 * b + c;
    if den >= 0.0 {
        return (0.0, b);
    }
    let d = (0.5 * (a - c) / den).clamp(-0.5, 0.5);
    (d, b - 0.25 * (a - c) * d)
}

/// The correlation peaks of `prep` against every template of the classes of
/// `ranges` (only those of `kind` when given), each class searched over its
/// range of shifts; sorted by r, best first, up to `n_candidates` per class
/// separated by the minimum velocity.
pub(crate) fn peaks(
    setup: Setup<'_>,
    prep: &Prepared,
    kind: Option<TemplateKind>,
    ranges: &[(ObjectClass, (i64, i64))],
) -> Vec<XCorrPeak> {
    let cfg = setup.config;
    let dll = cfg.dloglam;
    let n = prep.grid.n;
    let use_px: Vec<bool> = prep.w.iter().map(|w| *w > 0.0).collect();
    let g = flatten(&prep.flux, &use_px);
    let n_good = prep.n_good().max(1) as f64;
    let sg = (g.iter().map(|v| v * v).sum::<f64>() / n_good).sqrt();
    let min_sep = setup.min_sep_pixels();
    let mut out = Vec::new();
    for &(class, (lo, hi)) in ranges {
        let mut peaks: Vec<XCorrPeak> = Vec::new();
        for u in setup.units.iter().filter(|u| u.class == class) {
            let m = u.m();
            let len = super::fast::nice_len(n + m - 1);
            let gh: Vec<Complex<f64>> = setup
                .cache
                .forward_real(&g, len)
                .into_iter()
                .map(|c| c.conj())
                .collect();
            for a in 0..u.k() {
                if kind.is_some_and(|k| k != u.kinds[a]) {
                    continue;
                }
                let t = flatten(&u.t[a], &vec![true; m]);
                let st = (t.iter().map(|v| v * v).sum::<f64>() / m as f64).sqrt();
                if !(sg > 0.0 && st > 0.0) {
                    continue;
                }
                let th = setup.cache.forward_real(&t, len);
                let mut buf: Vec<Complex<f64>> = gh.iter().zip(&th).map(|(x, y)| x * y).collect();
                setup.cache.plan(len, false).process(&mut buf);
                let norm = 1.0 / (len as f64 * n_good * sg * st);
                // correlation as a function of shift s (lag c = g0 − t0 − s)
                let corr = |s: i64| -> f64 {
                    let c = prep.g0 - u.t0 - s;
                    if c > -(n as i64) && c < m as i64 {
                        buf[c.rem_euclid(len as i64) as usize].re * norm
                    } else {
                        0.0
                    }
                };
                let vals: Vec<f64> = (lo..=hi).map(corr).collect();
                // local maxima in the class range, highest first
                let mut maxima: Vec<usize> = (0..vals.len())
                    .filter(|&i| {
                        (i == 0 || vals[i] > vals[i - 1]) && (i + 1 == vals.len() || vals[i] >= vals[i + 1])
                    })
                    .filter(|&i| vals[i] > 0.0)
                    .collect();
                maxima.sort_by(|&x, &y| vals[y].total_cmp(&vals[x]));
                maxima.truncate(3 * cfg.n_candidates);
                for i in maxima {
                    let s0 = lo + i as i64;
                    let (d, h) = parabola(corr(s0 - 1), corr(s0), corr(s0 + 1));
                    // FWHM by walking down to half height on each side
                    let half = 0.5 * h;
                    let walk = |dir: i64| -> f64 {
                        let mut k = 1i64;
                        let mut prev = corr(s0);
                        while k < n as i64 {
                            let v = corr(s0 + dir * k);
                            if v < half {
                                return (k - 1) as f64 + (prev - half) / (prev - v).max(1e-300);
                            }
                            prev = v;
                            k += 1;
                        }
                        k as f64
                    };
                    let w = walk(-1) + walk(1);
                    // antisymmetric part about the peak over ±n/2 lags
                    let kmax = (n / 2).max(1) as i64;
                    let mut sa = 0.0;
                    for k in 1..=kmax {
                        let a1 = corr(s0 + k) - corr(s0 - k);
                        sa += a1 * a1;
                    }
                    let sigma_a = (sa / (2.0 * kmax as f64)).sqrt();
                    let r = if sigma_a > 0.0 {
                        h / (std::f64::consts::SQRT_2 * sigma_a)
                    } else {
                        0.0
                    };
                    let shift = s0 as f64 + d;
                    let z = 10f64.powf(shift * dll) - 1.0;
                    let err_px = 3.0 * w / (8.0 * (1.0 + r));
                    peaks.push(XCorrPeak {
                        class,
                        template: u.names[a].clone(),
                        kind: u.kinds[a],
                        z,
                        z_err: err_px * std::f64::consts::LN_10 * dll * (1.0 + z),
                        height: h,
                        r,
                        fwhm_pixels: w,
                    });
                }
            }
        }
        peaks.sort_by(|x, y| y.r.total_cmp(&x.r));
        let mut kept: Vec<XCorrPeak> = Vec::new();
        for p in peaks {
            if kept.len() >= cfg.n_candidates {
                break;
            }
            let sep_px = |q: &XCorrPeak| ((1.0 + p.z) / (1.0 + q.z)).log10().abs() / dll;
            if kept.iter().all(|q| sep_px(q) >= min_sep) {
                kept.push(p);
            }
        }
        out.extend(kept);
    }
    // best r first, except that a star faster than STAR_VMAX_KMS ranks after
    // every other class (as in the χ² decision)
    let too_fast = |p: &XCorrPeak| too_fast_star(p.class, p.z);
    let any_other = out.iter().any(|p| !too_fast(p));
    out.sort_by(|x, y| {
        (any_other && too_fast(x))
            .cmp(&(any_other && too_fast(y)))
            .then(y.r.total_cmp(&x.r))
    });
    out
}

/// The cross-correlation method (`Method::XCorr`): candidates are the
/// correlation peaks ordered by r (best first; too-fast stars last, see
/// [`super::STAR_VMAX_KMS`]); each carries the χ² of its class's templates
/// fitted at the peak redshift (same definition as the χ² method) so that
/// reduced χ² and Δχ² mean the same thing for both methods. The answer is
/// ambiguous when the best peak's r is below [`R_AMBIGUOUS`].
pub(crate) struct XCorr;

impl FitMethod for XCorr {
    fn solve(
        &self,
        setup: Setup<'_>,
        prep: &Prepared,
        ranges: &[(ObjectClass, (i64, i64))],
    ) -> Result<Solution, FitError> {
        let peaks = peaks(setup, prep, None, ranges);
        let dll = setup.config.dloglam;
        let mut cands = Vec::new();
        let mut k_best = 0;
        for p in &peaks {
            let Some(u) = setup
                .units
                .iter()
                .find(|u| u.class == p.class && u.names.contains(&p.template))
            else {
                continue;
            };
            let thr = thresholds(prep, u);
            let f = sums_fit(prep, u, (1.0 + p.z).log10() / dll, &thr, prep.nonneg);
            if cands.is_empty() {
                k_best = u.cols();
            }
            cands.push(Candidate {
                class: p.class,
                template: u.name.clone(),
                z: p.z,
                z_err: p.z_err,
                chi2: f.chi2,
                coeffs: f.coeffs,
            });
        }
        Ok(Solution {
            candidates: cands,
            n_par: k_best + prep.j(),
            ambiguous: peaks.first().is_none_or(|p| p.r < R_AMBIGUOUS),
            dchi2_cut: false,
            at_edge: false,
            negative_template: false,
            curves: Vec::new(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn parabola_vertex_is_exact_for_a_parabola() {
        // y = 2 − (x − 0.3)²
        let f = |x: f64| 2.0 - (x - 0.3) * (x - 0.3);
        let (d, h) = parabola(f(-1.0), f(0.0), f(1.0));
        assert_relative_eq!(d, 0.3, epsilon = 1e-12);
        assert_relative_eq!(h, 2.0, epsilon = 1e-12);
    }

    #[test]
    fn flatten_removes_a_smooth_continuum() {
        let x: Vec<f64> = (0..2000).map(|i| 5.0 + 0.001 * i as f64).collect();
        let f = flatten(&x, &vec![true; 2000]);
        assert!(
            f.iter().all(|v| v.abs() < 1e-6),
            "max {}",
            f.iter().fold(0.0f64, |a, b| a.max(b.abs()))
        );
    }
}
