/*!
The direct path: χ² of one unit at one (possibly fractional) pixel shift by
plain loops over the pixels, with the residuals summed explicitly.

At whole shifts this is the oracle the FFT fast path is tested against (the
same definition of χ²: every good grid pixel, templates zero outside their
coverage, the same column-activity rule and the same solver); at fractional
shifts it is the cost function of the refinement, with the templates
interpolated in log λ.
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::prep::{solve_constrained, Prepared};
use super::units::Unit;

/// A template column whose Σ w T² is below this fraction of
/// `max(w) · Σ T²` (the most it could be) is treated as absent: the shifted
/// template hardly touches the good pixels and its coefficient is set to 0.
pub const ACTIVE_FRACTION: f64 = 1e-9;

/// χ² and coefficients (templates, then polynomials) at one shift.
#[derive(Debug, Clone, PartialEq)]
pub struct DirectFit {
    /// χ² over all good grid pixels.
    pub chi2: f64,
    /// Template coefficients, then (with throughput terms) the coefficients
    /// of T_k·x, then the polynomial coefficients.
    pub coeffs: Vec<f64>,
}

/// Per-template thresholds of Σ w T² below which a column is inactive.
pub fn thresholds(prep: &Prepared, unit: &Unit) -> Vec<f64> {
    let maxw = prep.w.iter().copied().fold(0.0, f64::max);
    unit.t
        .iter()
        .map(|t| ACTIVE_FRACTION * maxw * t.iter().map(|v| v * v).sum::<f64>())
        .collect()
}

/// Offset `x` such that grid pixel i of `prep` sees template pixel `i + x`
/// at a shift of `shift` pixels (log10(1+z) = shift · dloglam).
pub fn offset(prep: &Prepared, unit: &Unit, shift: f64) -> f64 {
    (prep.g0 - unit.t0) as f64 - shift
}

/// Fit `unit` at `shift` pixels by direct sums; χ² from explicit residuals.
/// With `nonneg` the template amplitudes are constrained to be ≥ 0.
pub fn direct_fit(prep: &Prepared, unit: &Unit, shift: f64, thr: &[f64], nonneg: bool) -> DirectFit {
    let k = unit.k();
    let kc = prep.cols(k);
    let j = prep.j();
    let dim = kc + j;
    let x0 = offset(prep, unit, shift);
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    let mut row = vec![0.0; dim];
    let mut rows = vec![0.0; dim * prep.good.len()];
    for (gi, &i) in prep.good.iter().enumerate() {
        for t in 0..k {
            let v = unit.interp(t, i as f64 + x0);
            // column u·k + t is T_t·x^u (u = 1: the throughput term)
            let mut m = v;
            for u in 0..prep.groups {
                row[u * k + t] = m;
                m *= prep.x[i];
            }
        }
        for q in 0..j {
            row[kc + q] = prep.p[q][i];
        }
        rows[gi * dim..(gi + 1) * dim].copy_from_slice(&row);
        let (w, f) = (prep.w[i], prep.flux[i]);
        for r in 0..dim {
            let wr = w * row[r];
            b[r] += wr * f;
            for s in r..dim {
                a[r * dim + s] += wr * row[s];
            }
        }
    }
    for r in 0..dim {
        for s in 0..r {
            a[r * dim + s] = a[s * dim + r];
        }
    }
    let active = active_columns(&a, dim, k, kc, thr);
    let coeffs = solve_constrained(&a, &b, &active, k, prep.groups, nonneg);
    let mut chi2 = 0.0;
    for (gi, &i) in prep.good.iter().enumerate() {
        let model: f64 = coeffs
            .iter()
            .zip(&rows[gi * dim..(gi + 1) * dim])
            .map(|(c, v)| c * v)
            .sum();
        let r = prep.flux[i] - model;
        chi2 += prep.w[i] * r * r;
    }
    DirectFit { chi2, coeffs }
}

/// Which columns take part: a template (and its throughput term) when its
/// Σ w T² exceeds the threshold; polynomials always.
pub(crate) fn active_columns(a: &[f64], dim: usize, k: usize, kc: usize, thr: &[f64]) -> Vec<bool> {
    (0..dim)
        .map(|r| r >= kc || a[(r % k) * dim + r % k] > thr[r % k])
        .collect()
}

/// The same fit as [`direct_fit`] computed for speed (the refinement's cost
/// function): the shift's sub-pixel part gives one set of cubic weights for
/// every pixel, so each shifted template is a 4-tap filter of its array; the
/// template sums are plain dot products, the polynomial-only sums come from
/// [`Prepared`], and χ² = Σ w f² − c·b.
pub fn sums_fit(prep: &Prepared, unit: &Unit, shift: f64, thr: &[f64], nonneg: bool) -> DirectFit {
    let (k, j, n) = (unit.k(), prep.j(), prep.grid.n);
    let x0 = offset(prep, unit, shift);
    let fl = x0.floor();
    let d = x0 - fl;
    let i0 = fl as i64;
    // Keys (1981) cubic-convolution weights for taps −1, 0, 1, 2 (as Unit::interp)
    let wts = if d == 0.0 {
        [0.0, 1.0, 0.0, 0.0]
    } else {
        [
            ((-0.5 * d + 1.0) * d - 0.5) * d,
            (1.5 * d - 2.5) * d * d + 1.0,
            ((-1.5 * d + 2.0) * d + 0.5) * d,
            (0.5 * d - 0.5) * d * d,
        ]
    };
    let m = unit.m() as i64;
    let shifted: Vec<Vec<f64>> = unit
        .t
        .iter()
        .map(|t| {
            (0..n as i64)
                .map(|i| {
                    let r = i + i0;
                    let mut v = 0.0;
                    for (q, wq) in wts.iter().enumerate() {
                        let idx = r + q as i64 - 1;
                        if idx >= 0 && idx < m {
                            v += wq * t[idx as usize];
                        }
                    }
                    v
                })
                .collect()
        })
        .collect();
    // the template columns T_a·x^u on the grid
    let kc = prep.cols(k);
    let dim = kc + j;
    let mut cols: Vec<Vec<f64>> = shifted;
    for _ in 1..prep.groups {
        for _ in 0..k {
            let next: Vec<f64> = cols[cols.len() - k]
                .iter()
                .zip(&prep.x)
                .map(|(v, x)| v * x)
                .collect();
            cols.push(next);
        }
    }
    let dot = |a: &[f64], b: &[f64]| -> f64 { a.iter().zip(b).map(|(x, y)| x * y).sum() };
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    for p in 0..kc {
        let wt: Vec<f64> = prep.w.iter().zip(&cols[p]).map(|(w, t)| w * t).collect();
        for q in p..kc {
            let v = dot(&wt, &cols[q]);
            a[p * dim + q] = v;
            a[q * dim + p] = v;
        }
        for q in 0..j {
            let v = dot(&prep.wp[q], &cols[p]);
            a[p * dim + kc + q] = v;
            a[(kc + q) * dim + p] = v;
        }
        b[p] = dot(&prep.wf, &cols[p]);
    }
    for p in 0..j {
        b[kc + p] = prep.pf[p];
        for q in 0..j {
            a[(kc + p) * dim + kc + q] = prep.pp[p * j + q];
        }
    }
    let active = active_columns(&a, dim, k, kc, thr);
    let coeffs = solve_constrained(&a, &b, &active, k, prep.groups, nonneg);
    let fit: f64 = coeffs.iter().zip(&b).map(|(c, b)| c * b).sum();
    DirectFit {
        chi2: prep.fww - fit,
        coeffs,
    }
}

/// The oracle: χ² at every whole shift in `s_lo..=s_hi`, one direct fit each
/// (unconstrained, like the fast path's curves).
pub fn chi2_curve(prep: &Prepared, unit: &Unit, s_lo: i64, s_hi: i64) -> Vec<f64> {
    let thr = thresholds(prep, unit);
    (s_lo..=s_hi)
        .map(|s| direct_fit(prep, unit, s as f64, &thr, false).chi2)
        .collect()
}
