/*!
Refinement of a grid minimum on a continuous redshift: Brent's method (argmin)
on χ² with the templates interpolated in log λ (a Lanczos kernel,
[`super::units::shift_weights`];
[`super::sums::sums_fit`], the same χ² as the direct oracle), and σ_z from
the curvature of χ² at the minimum (Δχ² = 1).
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::prep::Prepared;
use super::sums::{residual_chi2, sums_fit, sums_fit_at_residuals, DirectFit};
use super::units::Unit;
use argmin::core::{CostFunction, Error, Executor};
use argmin::solver::brent::BrentOpt;
use std::cell::RefCell;

/// Tolerance of the refined shift, in pixels (0.02 px ≈ 1.4 km/s at the default step).
const SHIFT_TOL: f64 = 0.02;
/// Step (pixels) of the finite-difference second derivative.
const CURV_STEP: f64 = 0.25;

struct Cost<'a> {
    prep: &'a Prepared,
    unit: &'a Unit,
    thr: &'a [f64],
    /// The lowest fit evaluated so far and its shift (the search's best
    /// point is one of them: kept instead of fitted again).
    best: RefCell<Option<(f64, DirectFit)>>,
}

impl CostFunction for Cost<'_> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, shift: &f64) -> Result<f64, Error> {
        let fit = sums_fit(self.prep, self.unit, *shift, self.thr, self.prep.nonneg);
        let chi2 = fit.chi2;
        let mut best = self.best.borrow_mut();
        if best.as_ref().is_none_or(|(_, b)| chi2 < b.chi2) {
            *best = Some((*shift, fit));
        }
        Ok(chi2)
    }
}

/// A refined minimum.
#[derive(Debug, Clone)]
pub struct Refined {
    /// Shift in pixels (log10(1+z) = shift · dloglam).
    pub shift: f64,
    /// 1σ of the shift in pixels from the curvature (Δχ² = 1).
    pub sigma_shift: f64,
    /// The fit at the refined shift.
    pub fit: DirectFit,
}

/// Refine the grid minimum at whole shift `s0` within ±1 pixel.
pub fn refine(prep: &Prepared, unit: &Unit, thr: &[f64], s0: i64) -> Refined {
    let grid = sums_fit_at_residuals(prep, unit, s0 as f64, thr, prep.nonneg);
    let cost = Cost {
        prep,
        unit,
        thr,
        best: RefCell::new(None),
    };
    let lo = s0 as f64 - 1.0;
    let hi = s0 as f64 + 1.0;
    let solver = BrentOpt::new(lo, hi).set_tolerance(1e-10, SHIFT_TOL);
    let evaluated = Executor::new(cost, solver)
        .configure(|st| st.max_iters(60))
        .run()
        .ok()
        .and_then(|r| r.problem.problem)
        .and_then(|c| c.best.into_inner());
    // the search's best point against the grid's, each at the χ² of its
    // residuals (see residual_chi2: the sums' χ² can lose its digits); the
    // sums' χ² of the one kept is the curvature's centre
    let (grid_fit, grid_sums_chi2) = grid;
    let mut kept = (s0 as f64, grid_fit, grid_sums_chi2);
    if let Some((x, f)) = evaluated.filter(|(x, _)| x.is_finite()) {
        let chi2 = residual_chi2(prep, unit, x, &f.coeffs);
        if chi2 < kept.1.chi2 {
            let sums_chi2 = f.chi2;
            kept = (x, DirectFit { chi2, ..f }, sums_chi2);
        }
    }
    let (shift, fit, sums_chi2) = kept;
    let fp = sums_fit(prep, unit, shift + CURV_STEP, thr, prep.nonneg).chi2;
    let fm = sums_fit(prep, unit, shift - CURV_STEP, thr, prep.nonneg).chi2;
    let d2 = (fp + fm - 2.0 * sums_chi2) / (CURV_STEP * CURV_STEP);
    // χ² ≈ χ²_min + ½ d2 (x − x0)²; Δχ² = 1 at |x − x0| = sqrt(2 / d2)
    let sigma_shift = if d2 > 0.0 && d2.is_finite() {
        (2.0 / d2).sqrt()
    } else {
        1.0
    };
    Refined {
        shift,
        sigma_shift,
        fit,
    }
}

/// Sub-pixel minimum and σ from the parabola through the grid χ² at
/// `s0 − 1, s0, s0 + 1` (`curve[i]` is χ² at shift `lo + i`); the fit itself
/// (χ², coefficients) is the one at the whole shift `s0`.
pub fn grid_parabola(prep: &Prepared, unit: &Unit, thr: &[f64], s0: i64, curve: &[f64], lo: i64) -> Refined {
    let (fit, _) = sums_fit_at_residuals(prep, unit, s0 as f64, thr, prep.nonneg);
    let at = |s: i64| usize::try_from(s - lo).ok().and_then(|i| curve.get(i).copied());
    let (shift, sigma_shift) = match (at(s0 - 1), at(s0), at(s0 + 1)) {
        (Some(a), Some(b), Some(c)) if a + c - 2.0 * b > 0.0 => {
            let d2 = a + c - 2.0 * b;
            let dx = (0.5 * (a - c) / d2).clamp(-0.5, 0.5);
            (s0 as f64 + dx, (2.0 / d2).sqrt())
        }
        _ => (s0 as f64, 1.0),
    };
    Refined {
        shift,
        sigma_shift,
        fit,
    }
}
