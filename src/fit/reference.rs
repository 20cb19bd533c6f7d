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
    /// Template coefficients followed by polynomial coefficients.
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
    let j = prep.j();
    let dim = k + j;
    let x0 = offset(prep, unit, shift);
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    let mut row = vec![0.0; dim];
    let mut tvals = vec![0.0; k * prep.good.len()];
    for (gi, &i) in prep.good.iter().enumerate() {
        for t in 0..k {
            let v = unit.interp(t, i as f64 + x0);
            tvals[gi * k + t] = v;
            row[t] = v;
        }
        for q in 0..j {
            row[k + q] = prep.p[q][i];
        }
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
    let active: Vec<bool> = (0..dim)
        .map(|r| if r < k { a[r * dim + r] > thr[r] } else { true })
        .collect();
    let coeffs = solve_constrained(&a, &b, &active, k, nonneg);
    let mut chi2 = 0.0;
    for (gi, &i) in prep.good.iter().enumerate() {
        let mut model = 0.0;
        for t in 0..k {
            model += coeffs[t] * tvals[gi * k + t];
        }
        for q in 0..j {
            model += coeffs[k + q] * prep.p[q][i];
        }
        let r = prep.flux[i] - model;
        chi2 += prep.w[i] * r * r;
    }
    DirectFit { chi2, coeffs }
}

/// The same fit as [`direct_fit`] computed for speed (the refinement's cost
/// function): the shift's sub-pixel part gives one set of cubic weights for
/// every pixel, so each shifted template is a 4-tap filter of its array; the
/// template sums are plain dot products, the polynomial-only sums come from
/// [`Prepared`], and χ² = Σ w f² − c·b.
pub fn sums_fit(prep: &Prepared, unit: &Unit, shift: f64, thr: &[f64], nonneg: bool) -> DirectFit {
    let (k, j, n) = (unit.k(), prep.j(), prep.grid.n);
    let dim = k + j;
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
    let dot = |a: &[f64], b: &[f64]| -> f64 { a.iter().zip(b).map(|(x, y)| x * y).sum() };
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    for p in 0..k {
        let wt: Vec<f64> = prep.w.iter().zip(&shifted[p]).map(|(w, t)| w * t).collect();
        for q in p..k {
            let v = dot(&wt, &shifted[q]);
            a[p * dim + q] = v;
            a[q * dim + p] = v;
        }
        for q in 0..j {
            let v = dot(&prep.wp[q], &shifted[p]);
            a[p * dim + k + q] = v;
            a[(k + q) * dim + p] = v;
        }
        b[p] = dot(&prep.wf, &shifted[p]);
    }
    for p in 0..j {
        b[k + p] = prep.pf[p];
        for q in 0..j {
            a[(k + p) * dim + k + q] = prep.pp[p * j + q];
        }
    }
    let active: Vec<bool> = (0..dim).map(|r| r >= k || a[r * dim + r] > thr[r]).collect();
    let coeffs = solve_constrained(&a, &b, &active, k, nonneg);
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
