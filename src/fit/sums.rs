/*!
The template sums at one shift and the normal equations built from them: the
pieces the production path shares — the fast path's χ²(z) curves
([`super::fast`]), the refinement of each minimum ([`super::refine`], through
[`sums_fit`]) and the cross-correlation method's χ² at its peaks. The direct
oracle ([`super::reference`]) is apart from all of them and serves the tests.
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::prep::{n_legendre, solve_constrained, Prepared};
use super::units::{shift_at, Unit, FIRST_TAP, SHIFT_TAPS};
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

/// Number of template sums (correlations) of a unit with `k` templates, `j`
/// polynomials and `g` columns per template. Their order, at one shift:
/// Σ w P_q T_a T_b for a ≤ b and q < 2g − 1; Σ w P_q T_a for each a and
/// q < [`n_legendre`]; Σ w f x^u T_a for each a and u < g.
pub(crate) fn n_corr(k: usize, j: usize, g: usize) -> usize {
    k * (k + 1) / 2 * (2 * g - 1) + k * n_legendre(j, g) + k * g
}

/// Fill the normal equations `a` (row-major, dim × dim with dim = k·g + j)
/// and `b` of a unit of `k` templates from one shift's template sums `row`
/// (in the order of [`n_corr`]) and the polynomial sums of `prep`.
/// Column u·k + a is T_a·x^u; then the polynomials.
pub(crate) fn assemble(prep: &Prepared, k: usize, g: usize, row: &[f64], a: &mut [f64], b: &mut [f64]) {
    assemble_templates(prep, k, g, row, a, b);
    assemble_polynomials(prep, k, g, a, b);
}

/// The polynomial block of the normal equations (the same at every shift).
pub(crate) fn assemble_polynomials(prep: &Prepared, k: usize, g: usize, a: &mut [f64], b: &mut [f64]) {
    let j = prep.j();
    let kc = k * g;
    let dim = kc + j;
    for p in 0..j {
        b[kc + p] = prep.pf[p];
        for q in 0..j {
            a[(kc + p) * dim + kc + q] = prep.pp[p * j + q];
        }
    }
}

/// The rows and columns of the template terms (see [`assemble`]).
pub(crate) fn assemble_templates(
    prep: &Prepared,
    k: usize,
    g: usize,
    row: &[f64],
    a: &mut [f64],
    b: &mut [f64],
) {
    let j = prep.j();
    let nq = n_legendre(j, g);
    let kc = k * g;
    let dim = kc + j;
    // Σ w x^u P_jj T from the sums against w·P_q (Legendre recursion for x·P_jj)
    let xp = |sums: &[f64], u: usize, jj: usize| -> f64 {
        if u == 0 {
            sums[jj]
        } else if jj == 0 {
            sums[1]
        } else {
            let jf = jj as f64;
            ((jf + 1.0) * sums[jj + 1] + jf * sums[jj - 1]) / (2.0 * jf + 1.0)
        }
    };
    let mut ci = 0;
    for p in 0..k {
        for q in p..k {
            // Σ w x^e T_p T_q (e = u + v) from the sums against P_0, P_1, P_2
            let s = &row[ci..ci + 2 * g - 1];
            ci += 2 * g - 1;
            for u in 0..g {
                for v in 0..g {
                    let val = match u + v {
                        0 => s[0],
                        1 => s[1],
                        _ => (s[0] + 2.0 * s[2]) / 3.0,
                    };
                    let (r, cc) = (u * k + p, v * k + q);
                    a[r * dim + cc] = val;
                    a[cc * dim + r] = val;
                }
            }
        }
    }
    for p in 0..k {
        let sums = &row[ci..ci + nq];
        ci += nq;
        for u in 0..g {
            for q in 0..j {
                let v = xp(sums, u, q);
                let r = u * k + p;
                a[r * dim + kc + q] = v;
                a[(kc + q) * dim + r] = v;
            }
        }
    }
    for p in 0..k {
        for u in 0..g {
            b[u * k + p] = row[ci];
            ci += 1;
        }
    }
}

/// The same fit as the oracle's [`direct_fit`](super::reference::direct_fit) computed for speed (the refinement's cost
/// function): the shift's sub-pixel part gives one set of kernel weights for
/// every pixel, so each shifted template is an 8-tap filter of its array; the
/// template sums are the fast path's (the same data arrays, the same order,
/// here as plain dot products at one fractional shift) and so is the
/// assembly of the normal equations; χ² = Σ w f² − c·b.
pub fn sums_fit(prep: &Prepared, unit: &Unit, shift: f64, thr: &[f64], nonneg: bool) -> DirectFit {
    sums_fit_on(prep, unit, &shifted(prep, unit, shift), thr, nonneg)
}

/// [`sums_fit`] at the shift, with χ² from the residuals
/// ([`residual_chi2`]); also the sums' own χ². The shifted templates are made
/// once for both.
pub fn sums_fit_at_residuals(
    prep: &Prepared,
    unit: &Unit,
    shift: f64,
    thr: &[f64],
    nonneg: bool,
) -> (DirectFit, f64) {
    let t = shifted(prep, unit, shift);
    let fit = sums_fit_on(prep, unit, &t, thr, nonneg);
    let sums_chi2 = fit.chi2;
    let chi2 = residual_chi2_on(prep, unit, &t, &fit.coeffs);
    (DirectFit { chi2, ..fit }, sums_chi2)
}

/// Every template of `unit` on the grid pixels of `prep` at `shift` (the
/// weights of [`Unit::interp`], one set for every pixel).
fn shifted(prep: &Prepared, unit: &Unit, shift: f64) -> Vec<Vec<f64>> {
    let (i0, wts) = shift_at(offset(prep, unit, shift));
    unit.t
        .iter()
        .map(|t| shift_kernel(t, i0, &wts, prep.grid.n))
        .collect()
}

/// [`sums_fit`] on the templates `t` already shifted.
fn sums_fit_on(prep: &Prepared, unit: &Unit, t: &[Vec<f64>], thr: &[f64], nonneg: bool) -> DirectFit {
    let (k, j) = (unit.k(), prep.j());
    // the template sums in the fast path's order, then its normal equations
    let g = unit.groups;
    let (wl, wfx) = prep.data_for(g);
    let mut row = Vec::with_capacity(n_corr(k, j, g));
    for a in 0..k {
        for b in a..k {
            for q in 0..2 * g - 1 {
                row.push(dot3(&wl[q], &t[a], &t[b]));
            }
        }
    }
    for ta in t {
        for d in wl {
            row.push(dot(d, ta));
        }
    }
    for ta in t {
        for d in wfx {
            row.push(dot(d, ta));
        }
    }
    fit_from_sums(prep, unit, &row, thr, nonneg)
}

/// χ² of `coeffs` at `shift` from the residuals, pixel by pixel: the χ² a
/// refined candidate reports. The normal equations' Σ w f² − c·b loses its
/// digits where they are near-singular (ten continuum terms against a
/// template that barely overlaps the spectrum) and can even go negative, so
/// that a meaningless fit would outrank every other; a sum of squares cannot.
pub fn residual_chi2(prep: &Prepared, unit: &Unit, shift: f64, coeffs: &[f64]) -> f64 {
    residual_chi2_on(prep, unit, &shifted(prep, unit, shift), coeffs)
}

/// [`residual_chi2`] on the templates `t` already shifted.
fn residual_chi2_on(prep: &Prepared, unit: &Unit, t: &[Vec<f64>], coeffs: &[f64]) -> f64 {
    let (k, j, g) = (unit.k(), prep.j(), unit.groups);
    let kc = k * g;
    if coeffs.len() != kc + j {
        return f64::INFINITY;
    }
    let mut chi2 = 0.0;
    for &i in &prep.good {
        let mut model = 0.0;
        let mut xu = 1.0;
        for u in 0..g {
            for (p, tp) in t.iter().enumerate() {
                model += coeffs[u * k + p] * tp[i] * xu;
            }
            xu *= prep.x[i];
        }
        for q in 0..j {
            model += coeffs[kc + q] * prep.p[q][i];
        }
        let r = prep.flux[i] - model;
        chi2 += prep.w[i] * r * r;
    }
    chi2
}

/// The fit at one shift from its template sums `row` (in the order of
/// [`n_corr`]): the tail of [`sums_fit`], also fed with the sums the fast
/// path computed at whole shifts ([`super::fast::chi2_curve`]).
pub(crate) fn fit_from_sums(
    prep: &Prepared,
    unit: &Unit,
    row: &[f64],
    thr: &[f64],
    nonneg: bool,
) -> DirectFit {
    let (k, j, g) = (unit.k(), prep.j(), unit.groups);
    let kc = unit.cols();
    let dim = kc + j;
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    assemble(prep, k, g, row, &mut a, &mut b);
    let active = active_columns(&a, dim, k, kc, thr);
    let coeffs = solve_constrained(&a, &b, &active, k, g, nonneg);
    let fit: f64 = coeffs.iter().zip(&b).map(|(c, b)| c * b).sum();
    DirectFit {
        chi2: prep.fww - fit,
        coeffs,
    }
}

/// `out[i] = Σ_q wts[q] · t[i + i0 + q + FIRST_TAP]` for i < n, zero-padded
/// outside `t` (the [`shift_weights`] filter; edges by index checks, the
/// interior without them).
fn shift_kernel(t: &[f64], i0: i64, wts: &[f64; SHIFT_TAPS], n: usize) -> Vec<f64> {
    let m = t.len() as i64;
    let taps = SHIFT_TAPS as i64;
    let at = |j: i64| if j >= 0 && j < m { t[j as usize] } else { 0.0 };
    let edge = |i: i64| -> f64 {
        (0..SHIFT_TAPS)
            .map(|q| wts[q] * at(i + i0 + q as i64 + FIRST_TAP))
            .sum()
    };
    let mut out = vec![0.0; n];
    // interior: 0 ≤ i + i0 + FIRST_TAP and i + i0 + FIRST_TAP + taps − 1 < m
    let lo = (-FIRST_TAP - i0).clamp(0, n as i64) as usize;
    let hi = (m - taps - FIRST_TAP - i0 + 1).clamp(lo as i64, n as i64) as usize;
    for i in (0..lo).chain(hi..n) {
        out[i] = edge(i as i64);
    }
    if hi > lo {
        let base = (lo as i64 + i0 + FIRST_TAP) as usize;
        let src = &t[base..base + (hi - lo) + SHIFT_TAPS - 1];
        for (o, w) in out[lo..hi].iter_mut().zip(src.windows(SHIFT_TAPS)) {
            *o = w.iter().zip(wts).map(|(a, b)| a * b).sum();
        }
    }
    out
}
