/*!
The direct path: χ² of one unit at one (possibly fractional) pixel shift by
plain loops over the pixels, with the residuals summed explicitly.

This is the oracle the tests hold the production path to (the same
definition of χ²: every good grid pixel, templates zero outside their
coverage, the same column-activity rule and the same solver): the FFT fast
path at whole shifts, and the refinement's [`sums_fit`](super::sums::sums_fit)
at fractional shifts (templates interpolated in log λ). Nothing in the
production path calls it.
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::prep::{solve_constrained, Prepared};
use super::sums::{active_columns, offset};
pub use super::sums::{thresholds, DirectFit};
use super::units::Unit;

/// Fit `unit` at `shift` pixels by direct sums; χ² from explicit residuals.
/// With `nonneg` the template amplitudes are constrained to be ≥ 0.
pub fn direct_fit(prep: &Prepared, unit: &Unit, shift: f64, thr: &[f64], nonneg: bool) -> DirectFit {
    let k = unit.k();
    let (kc, g) = (unit.cols(), unit.groups);
    let j = prep.j();
    let dim = kc + j;
    let (x0i, wts) = super::units::shift_at(offset(prep, unit, shift));
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    let mut row = vec![0.0; dim];
    let mut rows = vec![0.0; dim * prep.good.len()];
    for (gi, &i) in prep.good.iter().enumerate() {
        for t in 0..k {
            let v = unit.interp_with(t, i as i64 + x0i, &wts);
            // column u·k + t is T_t·x^u (u = 1: the throughput term)
            let mut m = v;
            for u in 0..g {
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
    let coeffs = solve_constrained(&a, &b, &active, k, g, nonneg);
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
