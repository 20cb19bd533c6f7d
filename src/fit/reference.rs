/*!
The direct path: χ² of one unit at one (possibly fractional) pixel shift by
plain loops over the pixels, with the residuals summed explicitly.

At whole shifts this is the oracle the FFT fast path is tested against (the
same definition of χ²: every good grid pixel, templates zero outside their
coverage, the same column-activity rule and the same solver); at fractional
shifts it is the cost function of the refinement, with the templates
interpolated in log λ.
*/
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

/// The oracle: χ² at every whole shift in `s_lo..=s_hi`, one direct fit each
/// (unconstrained, like the fast path's curves).
pub fn chi2_curve(prep: &Prepared, unit: &Unit, s_lo: i64, s_hi: i64) -> Vec<f64> {
    let thr = thresholds(prep, unit);
    (s_lo..=s_hi)
        .map(|s| direct_fit(prep, unit, s as f64, &thr, false).chi2)
        .collect()
}
