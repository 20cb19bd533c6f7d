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
            for u in 0..prep.groups() {
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
    let coeffs = solve_constrained(&a, &b, &active, k, prep.groups(), nonneg);
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
    let mut out = vec![false; dim];
    active_columns_into(a, dim, k, kc, thr, &mut out);
    out
}

/// [`active_columns`] into `out` (length `dim`).
pub(crate) fn active_columns_into(a: &[f64], dim: usize, k: usize, kc: usize, thr: &[f64], out: &mut [bool]) {
    for (r, o) in out.iter_mut().enumerate().take(dim) {
        *o = r >= kc || a[(r % k) * dim + r % k] > thr[r % k];
    }
}

/// Σ a_i b_i c_i over the shortest length (eight partial sums, as [`dot`]).
pub fn dot3(a: &[f64], b: &[f64], c: &[f64]) -> f64 {
    let n = a.len().min(b.len()).min(c.len());
    let (a, b, c) = (&a[..n], &b[..n], &c[..n]);
    let mut acc = [0.0f64; 8];
    let (ca, cb, cc) = (a.chunks_exact(8), b.chunks_exact(8), c.chunks_exact(8));
    let tail: f64 = (ca.remainder().iter().zip(cb.remainder()).zip(cc.remainder()))
        .map(|((x, y), z)| x * y * z)
        .sum();
    for ((x, y), z) in ca.zip(cb).zip(cc) {
        for l in 0..8 {
            acc[l] += x[l] * y[l] * z[l];
        }
    }
    tail + ((acc[0] + acc[4]) + (acc[1] + acc[5])) + ((acc[2] + acc[6]) + (acc[3] + acc[7]))
}

/// Σ a_i b_i over the shorter length, with eight partial sums so that the
/// loop pipelines (and vectorises) instead of waiting on one running sum.
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0f64; 8];
    let (ca, cb) = (a.chunks_exact(8), b.chunks_exact(8));
    let tail: f64 = ca
        .remainder()
        .iter()
        .zip(cb.remainder())
        .map(|(x, y)| x * y)
        .sum();
    for (x, y) in ca.zip(cb) {
        for l in 0..8 {
            acc[l] += x[l] * y[l];
        }
    }
    tail + ((acc[0] + acc[4]) + (acc[1] + acc[5])) + ((acc[2] + acc[6]) + (acc[3] + acc[7]))
}

/// The same fit as [`direct_fit`] computed for speed (the refinement's cost
/// function): the shift's sub-pixel part gives one set of cubic weights for
/// every pixel, so each shifted template is a 4-tap filter of its array; the
/// template sums are the fast path's (the same data arrays, the same order,
/// here as plain dot products at one fractional shift) and so is the
/// assembly of the normal equations; χ² = Σ w f² − c·b.
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
    let t: Vec<Vec<f64>> = unit.t.iter().map(|t| shift_cubic(t, i0, &wts, n)).collect();
    // the template sums in the fast path's order, then its normal equations
    let g = prep.groups();
    let mut row = Vec::with_capacity(super::fast::n_corr(k, j, g));
    for a in 0..k {
        for b in a..k {
            for q in 0..2 * g - 1 {
                row.push(dot3(&prep.wl[q], &t[a], &t[b]));
            }
        }
    }
    for ta in &t {
        for d in &prep.wl {
            row.push(dot(d, ta));
        }
    }
    for ta in &t {
        for d in &prep.wfx {
            row.push(dot(d, ta));
        }
    }
    let kc = prep.cols(k);
    let dim = kc + j;
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    super::fast::assemble(prep, k, &row, &mut a, &mut b);
    let active = active_columns(&a, dim, k, kc, thr);
    let coeffs = solve_constrained(&a, &b, &active, k, prep.groups(), nonneg);
    let fit: f64 = coeffs.iter().zip(&b).map(|(c, b)| c * b).sum();
    DirectFit {
        chi2: prep.fww - fit,
        coeffs,
    }
}

/// `out[i] = Σ_q wts[q] · t[i + i0 + q − 1]` for i < n, zero-padded outside `t`
/// (the 4-tap cubic-convolution filter; edges by index checks, the interior
/// without them).
fn shift_cubic(t: &[f64], i0: i64, wts: &[f64; 4], n: usize) -> Vec<f64> {
    let m = t.len() as i64;
    let at = |j: i64| if j >= 0 && j < m { t[j as usize] } else { 0.0 };
    let edge = |i: i64| -> f64 { (0..4).map(|q| wts[q] * at(i + i0 + q as i64 - 1)).sum() };
    let mut out = vec![0.0; n];
    // interior: 0 ≤ i + i0 − 1 and i + i0 + 2 < m
    let lo = (1 - i0).clamp(0, n as i64) as usize;
    let hi = (m - 2 - i0).clamp(lo as i64, n as i64) as usize;
    for i in (0..lo).chain(hi..n) {
        out[i] = edge(i as i64);
    }
    if hi > lo {
        let base = (lo as i64 + i0 - 1) as usize;
        let src = &t[base..base + (hi - lo) + 3];
        for (o, w) in out[lo..hi].iter_mut().zip(src.windows(4)) {
            *o = wts[0] * w[0] + wts[1] * w[1] + wts[2] * w[2] + wts[3] * w[3];
        }
    }
    out
}

/// The oracle: χ² at every whole shift in `s_lo..=s_hi`, one direct fit each
/// (constrained as the fast path's curves are, see
/// [`curve_constrained`](super::fast::curve_constrained)).
pub fn chi2_curve(prep: &Prepared, unit: &Unit, s_lo: i64, s_hi: i64) -> Vec<f64> {
    let thr = thresholds(prep, unit);
    let nonneg = super::fast::curve_constrained(prep, unit);
    (s_lo..=s_hi)
        .map(|s| direct_fit(prep, unit, s as f64, &thr, nonneg).chi2)
        .collect()
}
