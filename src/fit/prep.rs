/*!
A spectrum made ready for the engine: resampled onto the log10 λ grid, noise
scaled for correlated pixels, and the Legendre polynomials of the continuum
evaluated with their redshift-independent normal-equation sums.
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::config::FitError;
use crate::spectrum::{LogGrid, Spectrum};
use nalgebra::{DMatrix, DVector};

/// Fewest good grid pixels the engine accepts.
pub const MIN_PIXELS: usize = 20;

/// Width (grid pixels) of the running mean of the flux that scales the
/// systematic floor ([`FitConfig::sys_floor`](super::FitConfig::sys_floor)):
/// 51 pixels of 1e-4 in log10 λ ≈ 3500 km/s, wider than any line of a
/// galaxy or star, so that the floor follows the continuum.
pub const SYS_FLOOR_WINDOW: usize = 51;

/// A spectrum on the engine grid.
#[derive(Debug, Clone)]
pub struct Prepared {
    /// The grid.
    pub grid: LogGrid,
    /// Global index of grid pixel 0 (`grid.index0()`).
    pub g0: i64,
    /// Flux (0 where bad).
    pub flux: Vec<f64>,
    /// Weights = inverse variance / Σρ, the pixel's summed noise correlation
    /// with its neighbours from the resampling (0 where bad).
    pub w: Vec<f64>,
    /// Indices of pixels with w > 0.
    pub good: Vec<usize>,
    /// Legendre polynomials P_j at each grid pixel.
    pub p: Vec<Vec<f64>>,
    /// w·P_q at each grid pixel for q < [`n_legendre`]`(j, groups)`: the
    /// data arrays of every template sum (see [`super::fast`]).
    pub wl: Vec<Vec<f64>>,
    /// w·f·x^u at each grid pixel for u < groups.
    pub wfx: Vec<Vec<f64>>,
    /// Σ w f².
    pub fww: f64,
    /// Σ w P_i P_j (row-major J×J).
    pub pp: Vec<f64>,
    /// Σ w f P_j.
    pub pf: Vec<f64>,
    /// The resampler's mean oversampling (good pixels per independent pixel).
    pub oversampling: f64,
    /// Template amplitudes are constrained to be ≥ 0.
    pub nonneg: bool,
    /// x ∈ [−1, 1] across the grid (the argument of the Legendre polynomials).
    pub x: Vec<f64>,
    /// Most columns per template the data arrays serve: 1 (T_k) or 2 (T_k
    /// and the throughput term T_k·x); set by [`Prepared::set_groups`], which
    /// also makes the data arrays.
    groups: usize,
}

/// Number of Legendre data arrays w·P_q the template sums need for `j`
/// polynomials and `g` columns per template: q ≤ j − 1 + (g − 1) for the
/// polynomial sums and q ≤ 2(g − 1) for the template products.
pub fn n_legendre(j: usize, g: usize) -> usize {
    (j + g - 1).max(2 * g - 1)
}

/// [`legendre`] into `out` (P_0..P_{out.len()-1}), without allocating.
pub fn legendre_into(x: f64, out: &mut [f64]) {
    for k in 0..out.len() {
        out[k] = match k {
            0 => 1.0,
            1 => x,
            _ => {
                let kf = k as f64;
                ((2.0 * kf - 1.0) * x * out[k - 1] - (kf - 1.0) * out[k - 2]) / kf
            }
        };
    }
}

/// Legendre polynomials P_0..P_{j-1} at x ∈ [−1, 1] (Bonnet's recursion).
pub fn legendre(j: usize, x: f64) -> Vec<f64> {
    let mut out = vec![0.0; j];
    legendre_into(x, &mut out);
    out
}

impl Prepared {
    /// Resample `s` onto its grid of step `dll`, cut to the observed range
    /// `lam` (Å), and prepare the sums.
    pub fn new(s: &Spectrum, dll: f64, poly_terms: usize, lam: (f64, f64)) -> Result<Prepared, FitError> {
        Prepared::with_floor(s, dll, poly_terms, lam, 0.0, false)
    }

    /// As [`Prepared::new`] with a systematic error floor: each good pixel's
    /// variance becomes σ² + (`sys_floor`·|F̄|)² with F̄ the running mean of
    /// the good flux over [`SYS_FLOOR_WINDOW`] pixels; with `telluric`, plus
    /// (d·|F̄|)² where d is the typical depth of the telluric band the pixel
    /// lies in ([`crate::lines::telluric_depth`], observed frame).
    pub fn with_floor(
        s: &Spectrum,
        dll: f64,
        poly_terms: usize,
        lam: (f64, f64),
        sys_floor: f64,
        telluric: bool,
    ) -> Result<Prepared, FitError> {
        let w = s.wave();
        let lo = w[0].max(lam.0);
        let hi = w[w.len() - 1].min(lam.1);
        if hi.is_nan() || lo.is_nan() || hi <= lo {
            return Err(FitError::NoCoverage);
        }
        let grid = crate::spectrum::LogGrid::covering(lo, hi, dll);
        let r = s.resample(&grid);
        let os = if r.oversampling.is_finite() && r.oversampling >= 1.0 {
            r.oversampling
        } else {
            1.0
        };
        let n = grid.n;
        let mut w = vec![0.0; n];
        let mut flux = vec![0.0; n];
        let mut good = Vec::new();
        for i in 0..n {
            if r.ivar[i] > 0.0 && r.ivar[i].is_finite() && r.flux[i].is_finite() {
                w[i] = r.ivar[i] / r.correlation[i];
                flux[i] = r.flux[i];
                good.push(i);
            }
        }
        let sys_floor = if sys_floor > 0.0 && sys_floor.is_finite() {
            sys_floor
        } else {
            0.0
        };
        if sys_floor > 0.0 || telluric {
            let fbar = running_mean(&flux, &w, SYS_FLOOR_WINDOW);
            for &i in &good {
                let d = if telluric {
                    crate::lines::telluric_depth(grid.wave(i))
                } else {
                    0.0
                };
                // w = ivar / Σρ; the floors are variances per pixel like σ²
                let var = 1.0 / r.ivar[i] + (sys_floor * fbar[i]).powi(2) + (d * fbar[i]).powi(2);
                w[i] = 1.0 / var / r.correlation[i];
            }
        }
        let needed = MIN_PIXELS.max(poly_terms + 2);
        if good.len() < needed {
            return Err(FitError::TooFewPixels {
                good: good.len(),
                needed,
            });
        }
        let (l0, l1) = (grid.wave(0), grid.wave(n - 1));
        let mut p = vec![vec![0.0; n]; poly_terms];
        let mut xs = vec![0.0; n];
        let mut pj = vec![0.0; poly_terms];
        for i in 0..n {
            let x = 2.0 * (grid.wave(i) - l0) / (l1 - l0) - 1.0;
            xs[i] = x;
            legendre_into(x, &mut pj);
            for (j, v) in pj.iter().enumerate() {
                p[j][i] = *v;
            }
        }
        let j = poly_terms;
        let mut pp = vec![0.0; j * j];
        let mut pf = vec![0.0; j];
        let mut fww = 0.0;
        for &i in &good {
            fww += w[i] * flux[i] * flux[i];
            for a in 0..j {
                pf[a] += w[i] * flux[i] * p[a][i];
                for b in 0..j {
                    pp[a * j + b] += w[i] * p[a][i] * p[b][i];
                }
            }
        }
        let mut prep = Prepared {
            wl: Vec::new(),
            wfx: Vec::new(),
            grid,
            g0: grid.index0(),
            flux,
            w,
            good,
            p,
            fww,
            pp,
            pf,
            oversampling: os,
            nonneg: false,
            x: xs,
            groups: 1,
        };
        prep.set_groups(1);
        Ok(prep)
    }

    /// Most columns per template the data arrays serve: 1 (T_k) or 2 (T_k
    /// and the throughput term T_k·x). A unit of [`Unit::groups`](super::units::Unit::groups) ≤ this
    /// uses the first [`n_legendre`]`(j, groups)` arrays of
    /// [`Prepared::wl`] and the first `groups` of [`Prepared::wfx`].
    pub fn max_groups(&self) -> usize {
        self.groups
    }

    /// The data arrays w·P_q and w·f·x^u a unit of `groups` columns per
    /// template uses. Panics when they were not made for that many
    /// ([`Prepared::set_groups`]): a unit's sums would be wrong, not merely
    /// slow (the engine prepares every spectrum for its units).
    pub fn data_for(&self, groups: usize) -> (&[Vec<f64>], &[Vec<f64>]) {
        assert!(
            groups <= self.groups,
            "data arrays made for {} columns per template, {groups} asked",
            self.groups
        );
        let g = groups.max(1);
        (&self.wl[..n_legendre(self.j(), g)], &self.wfx[..g])
    }

    /// Set the most columns per template (1, or 2 with throughput terms;
    /// clamped to that) and make the data arrays w·P_q and w·f·x^u for it.
    pub fn set_groups(&mut self, groups: usize) {
        let g = groups.clamp(1, 2);
        self.groups = g;
        let n = self.grid.n;
        let nq = n_legendre(self.j(), g);
        // both sets are prefixes of one sequence (q, u = 0, 1, …): those
        // already made for fewer columns are kept, only the missing ones made
        self.wl.truncate(nq);
        let have = self.wl.len();
        if have < nq {
            self.wl.resize(nq, vec![0.0; n]);
            let mut p = vec![0.0; nq];
            for &i in &self.good {
                legendre_into(self.x[i], &mut p);
                for q in have..nq {
                    self.wl[q][i] = self.w[i] * p[q];
                }
            }
        }
        self.wfx.truncate(g);
        for u in self.wfx.len()..g {
            let col = (0..n)
                .map(|i| self.w[i] * self.flux[i] * self.x[i].powi(u as i32))
                .collect();
            self.wfx.push(col);
        }
    }
    /// Number of good pixels.
    pub fn n_good(&self) -> usize {
        self.good.len()
    }

    /// Degrees of freedom for `n_par` fitted parameters: independent pixels
    /// (good grid pixels / oversampling) minus parameters, at least 1.
    pub fn dof(&self, n_par: usize) -> f64 {
        (self.good.len() as f64 / self.oversampling - n_par as f64).max(1.0)
    }

    /// Number of polynomial terms.
    pub fn j(&self) -> usize {
        self.p.len()
    }
}

/// Mean of `f` over the pixels with `w > 0` in a window of `width` pixels
/// centred on each pixel (0 where the window holds no good pixel).
pub(crate) fn running_mean(f: &[f64], w: &[f64], width: usize) -> Vec<f64> {
    let n = f.len();
    let half = width / 2;
    let mut cs = vec![0.0; n + 1];
    let mut cn = vec![0.0; n + 1];
    for i in 0..n {
        let g = w[i] > 0.0;
        cs[i + 1] = cs[i] + if g { f[i] } else { 0.0 };
        cn[i + 1] = cn[i] + if g { 1.0 } else { 0.0 };
    }
    (0..n)
        .map(|i| {
            let a = i.saturating_sub(half);
            let b = (i + half + 1).min(n);
            let m = cn[b] - cn[a];
            if m > 0.0 {
                (cs[b] - cs[a]) / m
            } else {
                0.0
            }
        })
        .collect()
}

/// Least squares with the template amplitudes constrained to be ≥ 0 when
/// `nonneg` is set: the unconstrained solution when it is feasible, else the
/// best feasible solution over the subsets of template columns (exact for
/// these small systems: the constrained optimum is the unconstrained optimum
/// on its own support). Returns the coefficients; the fitted part of χ² is
/// c·b.
///
/// Columns `k..k·groups` are the throughput terms of the templates (column
/// `u·k + a` belongs to template `a`): they leave the fit together with their
/// template. With them, template a's amplitude is c_a + c_{k+a}·x, which
/// varies across the grid; what is constrained is its value at x̄_a, the
/// mean x of the template's own information (Σ w T_a² x / Σ w T_a², from the
/// normal matrix). A template with a single line in the range then has that
/// line's amplitude constrained, not the amplitude at the grid's centre,
/// where the template is empty and the value means nothing.
///
/// A single template with its throughput term (a star, fitted alone) has its
/// amplitude c_0 + c_1·x kept ≥ 0 over the whole span of its information,
/// not only at x̄, and the optimum is found exactly ([`solve_one_tilted`]):
/// a steep tilt through zero at x̄ let a star template stand upside down in
/// half the range, and the subset search, which could only take the template
/// out with its tilt, made χ²(z) jump where that began (a real K giant's
/// velocity sat on such a step, 200–250 km/s off, σ_v ≈ 1 km/s).
pub fn solve_constrained(
    a: &[f64],
    b: &[f64],
    active: &[bool],
    k: usize,
    groups: usize,
    nonneg: bool,
) -> Vec<f64> {
    let dim = b.len();
    if !nonneg || groups < 2 {
        return solve_nonneg_leading(a, b, active, k, groups, nonneg);
    }
    if k == 1 && groups == 2 && active[0] && active[1] {
        return solve_one_tilted(a, b, active);
    }
    // θ = M θ′: c_a = c′_a − x̄_a c_{k+a}, so that c′_a is the amplitude at x̄_a
    let xbar: Vec<f64> = (0..k).map(|t| information_centre(a, dim, k, t)).collect();
    let (ap, bp) = tilted_about(a, b, k, &xbar);
    let mut c = solve_nonneg_leading(&ap, &bp, active, k, groups, true);
    for t in 0..k {
        c[t] -= xbar[t] * c[k + t];
    }
    c
}

/// The normal equations in the coefficients θ′ with c_t = c′_t − x_t·c_{k+t}
/// for each template t < k (the others unchanged): A′ = Mᵀ A M and b′ = Mᵀ b,
/// M the identity but for (t, k + t) = −x_t. The template's leading
/// coefficient c′_t is then its amplitude at x = x_t, and its throughput
/// column becomes T_t·(x − x_t).
fn tilted_about(a: &[f64], b: &[f64], k: usize, x: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let dim = b.len();
    let mut am = a.to_vec();
    for t in 0..k {
        // columns: col(k+t) −= x_t · col(t)
        for r in 0..dim {
            am[r * dim + k + t] -= x[t] * a[r * dim + t];
        }
    }
    let mut ap = am.clone();
    for t in 0..k {
        // rows: row(k+t) −= x_t · row(t)
        for c in 0..dim {
            ap[(k + t) * dim + c] -= x[t] * am[t * dim + c];
        }
    }
    let mut bp = b.to_vec();
    for t in 0..k {
        bp[k + t] -= x[t] * b[t];
    }
    (ap, bp)
}

/// The least-squares solution for one template (column 0), its throughput
/// term (column 1) and free columns after them, with the template's
/// amplitude c_0 + c_1·x ≥ 0 at both ends of the template's information
/// ([`information_ends`]). The optimum of a quadratic over that cone is the
/// unconstrained one when it is feasible, else the best of its two faces
/// (amplitude β·(x − x₁) or β·(x₂ − x), β ≥ 0) and its vertex (the template
/// out), each an ordinary solve in the coordinates of [`tilted_about`]:
/// exact, and it moves continuously with the data, so χ²(z) has no step
/// where the constraint begins to bind.
fn solve_one_tilted(a: &[f64], b: &[f64], active: &[bool]) -> Vec<f64> {
    let dim = b.len();
    let c = solve_normal(a, b, active);
    let (x1, x2) = information_ends(a, dim);
    if c[0] + c[1] * x1 >= 0.0 && c[0] + c[1] * x2 >= 0.0 {
        return c;
    }
    // the vertex: the free columns alone
    let mut out = active.to_vec();
    out[0] = false;
    out[1] = false;
    let c_out = solve_normal(a, b, &out);
    let value = |c: &[f64]| -> f64 { c.iter().zip(b).map(|(x, y)| x * y).sum() };
    let mut best = (value(&c_out), c_out);
    // a face: the amplitude 0 at one end x_e, so the template is its tilt
    // column T·(x − x_e) alone (tilted_about), whose coefficient must keep
    // the amplitude ≥ 0 at the other end: ≥ 0 at x₁, ≤ 0 at x₂
    for (x_e, sign) in [(x1, 1.0), (x2, -1.0)] {
        let (ap, bp) = tilted_about(a, b, 1, &[x_e]);
        let mut act = active.to_vec();
        act[0] = false;
        let mut c = solve_normal(&ap, &bp, &act);
        if sign * c[1] < 0.0 {
            continue;
        }
        c[0] = -x_e * c[1];
        let v = value(&c);
        if v > best.0 {
            best = (v, c);
        }
    }
    best.1
}

/// Where the information of template 0 lies along x, from the normal matrix
/// `a` (dim × dim) whose column 1 is its throughput term: x̄ ∓ √3·s with x̄
/// and s² the mean and variance of x weighted by w·T² (Σ w T² x / Σ w T²,
/// Σ w T² x² / Σ w T² − x̄²), kept within the grid's [−1, 1]. For
/// information spread evenly over the grid these are its ends (a uniform
/// spread reaches √3 standard deviations either side of its mean); for one
/// line they meet at the line.
fn information_ends(a: &[f64], dim: usize) -> (f64, f64) {
    let d = a[0];
    if d.is_nan() || d <= 0.0 {
        return (-1.0, 1.0);
    }
    let xbar = a[1] / d;
    let sd = (a[dim + 1] / d - xbar * xbar).max(0.0).sqrt();
    let h = 3f64.sqrt() * sd;
    ((xbar - h).max(-1.0), (xbar + h).min(1.0))
}

/// Whether coefficients `c` of a system with normal matrix `a` meet the
/// constraint of [`solve_constrained`]: every template amplitude ≥ 0, taken
/// at the template's x̄ when there are throughput terms (for a single
/// template with its throughput term: at both ends of its information,
/// [`information_ends`]).
pub fn amplitudes_feasible(a: &[f64], c: &[f64], k: usize, groups: usize) -> bool {
    let dim = c.len();
    if k == 1 && groups == 2 {
        let (x1, x2) = information_ends(a, dim);
        return c[0] + c[1] * x1 >= 0.0 && c[0] + c[1] * x2 >= 0.0;
    }
    (0..k).all(|t| {
        if groups < 2 {
            return c[t] >= 0.0;
        }
        c[t] + information_centre(a, dim, k, t) * c[k + t] >= 0.0
    })
}

/// x̄ of template `t`: Σ w T_t² x / Σ w T_t², read from the normal matrix
/// `a` (dim × dim) whose column k + t is the template's throughput term.
fn information_centre(a: &[f64], dim: usize, k: usize, t: usize) -> f64 {
    let d = a[t * dim + t];
    if d > 0.0 {
        a[t * dim + k + t] / d
    } else {
        0.0
    }
}

/// The constrained solve with the first `k` coefficients ≥ 0 (see
/// [`solve_constrained`]).
fn solve_nonneg_leading(
    a: &[f64],
    b: &[f64],
    active: &[bool],
    k: usize,
    groups: usize,
    nonneg: bool,
) -> Vec<f64> {
    let c = solve_normal(a, b, active);
    if !nonneg || c[..k].iter().all(|v| *v >= 0.0) {
        return c;
    }
    let on: Vec<usize> = (0..k).filter(|&i| active[i]).collect();
    let mut best: Option<(f64, Vec<f64>)> = None;
    let mut mask = active.to_vec();
    // subsets of the active template columns (bit i ↔ on[i]); the full set failed already
    for bits in 0..(1u32 << on.len().min(16)) - 1 {
        for (i, &col) in on.iter().enumerate() {
            for u in 0..groups.max(1) {
                mask[u * k + col] = bits & (1 << i) != 0 && active[u * k + col];
            }
        }
        let c = solve_normal(a, b, &mask);
        if c[..k].iter().any(|v| *v < 0.0) {
            continue;
        }
        let fit: f64 = c.iter().zip(b).map(|(x, y)| x * y).sum();
        if best.as_ref().is_none_or(|(f, _)| fit > *f) {
            best = Some((fit, c));
        }
    }
    best.map_or_else(|| vec![0.0; b.len()], |(_, c)| c)
}

/// Most columns (templates, throughput terms and polynomials) a system may have.
pub const MAX_COLUMNS: usize = 32;

/// Solve the symmetric normal equations `a c = b` (row-major `dim × dim`).
/// Columns with `active[i] == false` get coefficient 0 and are left out.
/// See [`solve_normal_into`].
pub fn solve_normal(a: &[f64], b: &[f64], active: &[bool]) -> Vec<f64> {
    let mut c = vec![0.0; b.len()];
    solve_normal_into(a, b, active, &mut c, &mut Vec::new());
    c
}

/// [`solve_normal`] writing the coefficients into `c` (no allocation on the
/// common path: it runs at every trial shift). The system is scaled to unit
/// diagonal and solved by a Cholesky factorisation written out in plain
/// loops (nalgebra's generic code is compiled at the caller's optimisation
/// level, far too slow for the thousands of tiny solves per spectrum in a
/// debug build); when a pivot shows the system is singular or nearly so,
/// nalgebra's SVD solves it with small singular values dropped. At most
/// [`MAX_COLUMNS`] active columns take part. `scratch` holds the factor
/// (reused between calls).
pub fn solve_normal_into(a: &[f64], b: &[f64], active: &[bool], c: &mut [f64], scratch: &mut Vec<f64>) {
    solve_normal_impl(a, b, active, Some(c), scratch);
}

/// [`solve_normal_into`] with the columns for which `constrained` holds kept
/// non-negative greedily: the most negative of them leaves `active` and the
/// system is solved again, at most `rounds` times. Not the exact optimum of
/// [`solve_constrained`] (which tries every subset), but one solve per
/// dropped column, for the line windows' many solves per spectrum.
pub fn solve_nonneg_greedy(
    a: &[f64],
    b: &[f64],
    active: &mut [bool],
    c: &mut [f64],
    scratch: &mut Vec<f64>,
    constrained: impl Fn(usize) -> bool,
    rounds: usize,
) {
    solve_normal_into(a, b, active, c, scratch);
    for _ in 0..rounds {
        let worst = (0..b.len())
            .filter(|&p| constrained(p) && active[p] && c[p] < 0.0)
            .min_by(|&x, &y| c[x].total_cmp(&c[y]));
        let Some(p) = worst else { break };
        active[p] = false;
        solve_normal_into(a, b, active, c, scratch);
    }
}

/// bᵀc for the solution c of [`solve_normal_into`] (the part of χ² the fit
/// explains: χ² = Σ w f² − bᵀc) without the coefficients: with the
/// factorisation L Lᵀ of the (scaled) matrix, bᵀc = |L⁻¹ b|², so the back
/// substitution is skipped. For the χ²(z) curves whose coefficients are not
/// needed (the unconstrained bases), at every trial shift.
pub fn normal_fit_value(a: &[f64], b: &[f64], active: &[bool], scratch: &mut Vec<f64>) -> f64 {
    solve_normal_impl(a, b, active, None, scratch)
}

/// [`solve_normal_into`] (with `c`) or [`normal_fit_value`] (without);
/// returns bᵀc either way.
fn solve_normal_impl(
    a: &[f64],
    b: &[f64],
    active: &[bool],
    c: Option<&mut [f64]>,
    scratch: &mut Vec<f64>,
) -> f64 {
    let dim = b.len();
    let mut c = c;
    if let Some(c) = c.as_deref_mut() {
        c[..dim].fill(0.0);
    }
    let mut idx = [0usize; MAX_COLUMNS];
    let mut k = 0;
    for i in 0..dim {
        if active[i] && a[i * dim + i] > 0.0 && k < idx.len() {
            idx[k] = i;
            k += 1;
        }
    }
    if k == 0 {
        return 0.0;
    }
    let idx = &idx[..k];
    // 1/√diagonal (multiplications below instead of divisions: this runs
    // at every trial shift)
    let mut d = [0.0f64; MAX_COLUMNS];
    for r in 0..k {
        d[r] = 1.0 / a[idx[r] * dim + idx[r]].sqrt();
    }
    // scaled matrix (lower triangle used) and right-hand side
    scratch.clear();
    scratch.resize(k * k, 0.0);
    let l = &mut scratch[..k * k];
    let mut v = [0.0f64; MAX_COLUMNS];
    for r in 0..k {
        v[r] = b[idx[r]] * d[r];
        let row = &a[idx[r] * dim..(idx[r] + 1) * dim];
        for s in 0..=r {
            l[r * k + s] = row[idx[s]] * (d[r] * d[s]);
        }
    }
    // reciprocal pivots
    let mut inv = [0.0f64; MAX_COLUMNS];
    let mut ok = true;
    'outer: for j in 0..k {
        let (head, tail) = l.split_at_mut(j * k + j);
        let lj = &head[j * k..];
        let sum = tail[0] - lj.iter().map(|v| v * v).sum::<f64>();
        // relative pivot test on the unit-diagonal matrix
        if sum <= 1e-10 {
            ok = false;
            break 'outer;
        }
        let piv = sum.sqrt();
        tail[0] = piv;
        inv[j] = 1.0 / piv;
        for i in j + 1..k {
            let (upper, lower) = l.split_at_mut(i * k);
            let lj = &upper[j * k..j * k + j];
            let li = &mut lower[..k];
            let s2 = li[j] - li[..j].iter().zip(lj).map(|(a, b)| a * b).sum::<f64>();
            li[j] = s2 * inv[j];
        }
    }
    let mut x = [0.0f64; MAX_COLUMNS];
    if ok {
        let mut y = [0.0f64; MAX_COLUMNS];
        for i in 0..k {
            let li = &l[i * k..i * k + i];
            let s2 = v[i] - li.iter().zip(&y[..i]).map(|(a, b)| a * b).sum::<f64>();
            y[i] = s2 * inv[i];
        }
        if c.is_none() {
            return y[..k].iter().map(|v| v * v).sum();
        }
        for i in (0..k).rev() {
            let mut s2 = y[i];
            for p in i + 1..k {
                s2 -= l[p * k + i] * x[p];
            }
            x[i] = s2 * inv[i];
        }
    } else {
        let m = DMatrix::from_fn(k, k, |r, s| a[idx[r] * dim + idx[s]] * (d[r] * d[s]));
        let rhs = DVector::from_fn(k, |r, _| v[r]);
        if let Ok(sol) = m.svd(true, true).solve(&rhs, 1e-10) {
            for (xi, si) in x.iter_mut().zip(sol.iter()) {
                *xi = *si;
            }
        }
    }
    if let Some(c) = c {
        for r in 0..k {
            c[idx[r]] = x[r] * d[r];
        }
    }
    x[..k].iter().zip(&v[..k]).map(|(x, v)| x * v).sum()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn legendre_matches_closed_forms() {
        // P2 = (3x²−1)/2, P3 = (5x³−3x)/2 (closed forms, common practice).
        for &x in &[-1.0, -0.3, 0.0, 0.7, 1.0] {
            let p = legendre(4, x);
            let mut q = [0.0; 4];
            legendre_into(x, &mut q);
            assert_eq!(p, q);
            assert_relative_eq!(p[2], 0.5 * (3.0 * x * x - 1.0), epsilon = 1e-14);
            assert_relative_eq!(p[3], 0.5 * (5.0 * x * x * x - 3.0 * x), epsilon = 1e-14);
        }
    }

    #[test]
    fn cholesky_solves_a_known_system() {
        // a = [[4, 2], [2, 3]], b = [2, 1] → c = [0.5, 0] (by hand)
        let c = solve_normal(&[4.0, 2.0, 2.0, 3.0], &[2.0, 1.0], &[true, true]);
        assert_relative_eq!(c[0], 0.5, epsilon = 1e-14);
        assert_relative_eq!(c[1], 0.0, epsilon = 1e-14);
        let c = solve_normal(&[4.0, 2.0, 2.0, 3.0], &[2.0, 1.0], &[true, false]);
        assert_relative_eq!(c[0], 0.5, epsilon = 1e-14);
    }

    #[test]
    fn data_arrays_follow_the_columns_per_template() {
        // w·P_q (q < n_legendre(j, g)) and w·f·x^u (u < g) by their
        // definition, however often the number of columns changes
        let wave: Vec<f64> = (0..300).map(|i| 5000.0 + 2.0 * i as f64).collect();
        let flux: Vec<f64> = (0..300).map(|i| 1.0 + 0.01 * i as f64).collect();
        let s = Spectrum::new(
            wave,
            flux,
            Some(vec![4.0; 300]),
            None,
            crate::spectrum::SpectrumMeta::default(),
        )
        .unwrap();
        let mut p = Prepared::new(&s, 1e-4, 3, (0.0, 1e9)).unwrap();
        for g in [2, 1, 2, 2, 1] {
            p.set_groups(g);
            let nq = n_legendre(3, g);
            assert_eq!((p.wl.len(), p.wfx.len(), p.max_groups()), (nq, g, g));
            for i in 0..p.grid.n {
                let l = legendre(nq, p.x[i]);
                for q in 0..nq {
                    // the same arithmetic: the same bits
                    let want = if p.w[i] > 0.0 { p.w[i] * l[q] } else { 0.0 };
                    assert_eq!(p.wl[q][i].to_bits(), want.to_bits(), "q {q} pixel {i}");
                }
                for u in 0..g {
                    let want = p.w[i] * p.flux[i] * p.x[i].powi(u as i32);
                    assert_relative_eq!(p.wfx[u][i], want, max_relative = 1e-15);
                }
            }
        }
    }

    /// A flat spectrum of flux 10 and σ = 1 at `wave`.
    fn flat_ten(wave: Vec<f64>) -> Spectrum {
        let n = wave.len();
        let meta = crate::spectrum::SpectrumMeta::default();
        Spectrum::new(wave, vec![10.0; n], Some(vec![1.0; n]), None, meta).unwrap()
    }

    #[test]
    fn systematic_floor_adds_its_variance_to_every_pixel() {
        // flat spectrum of flux 10 and σ = 1: the floor ε = 0.1 adds (0.1·10)² = 1
        // to each pixel's variance (definition of FitConfig::sys_floor)
        let s = flat_ten((0..400).map(|i| 5000.0 + 2.0 * i as f64).collect());
        let a = Prepared::new(&s, 1e-4, 2, (0.0, 1e9)).unwrap();
        let b = Prepared::with_floor(&s, 1e-4, 2, (0.0, 1e9), 0.1, false).unwrap();
        assert_eq!(a.good, b.good);
        let rho = s.resample(&s.log_grid(1e-4)).correlation;
        for &i in &a.good {
            let var = 1.0 / (a.w[i] * rho[i]) + 1.0;
            assert_relative_eq!(b.w[i], 1.0 / var / rho[i], max_relative = 1e-12);
        }
        assert!(b.fww < a.fww);
    }

    #[test]
    fn telluric_floor_adds_the_band_depth_inside_the_bands_only() {
        // flat spectrum of flux 10 and σ = 1 across the O₂ A band: inside it
        // the variance gains (d·10)², d = crate::lines::telluric_depth;
        // outside nothing (definition of FitConfig::telluric_floor)
        let s = flat_ten((0..500).map(|i| 7400.0 + i as f64).collect());
        let a = Prepared::new(&s, 1e-4, 2, (0.0, 1e9)).unwrap();
        let b = Prepared::with_floor(&s, 1e-4, 2, (0.0, 1e9), 0.0, true).unwrap();
        let rho = s.resample(&s.log_grid(1e-4)).correlation;
        let (mut inside, mut outside) = (0, 0);
        for &i in &a.good {
            let d = crate::lines::telluric_depth(a.grid.wave(i));
            let var = 1.0 / (a.w[i] * rho[i]) + (d * 10.0).powi(2);
            assert_relative_eq!(b.w[i], 1.0 / var / rho[i], max_relative = 1e-9);
            if d > 0.0 {
                inside += 1;
            } else {
                assert_eq!(a.w[i].to_bits(), b.w[i].to_bits());
                outside += 1;
            }
        }
        assert!(inside > 50 && outside > 50, "{inside} in, {outside} out");
    }

    /// Normal matrix and right-hand side of `cols` against `data` (w = 1).
    fn normal(cols: &[Vec<f64>], data: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let dim = cols.len();
        let mut a = vec![0.0; dim * dim];
        let mut b = vec![0.0; dim];
        for r in 0..dim {
            b[r] = cols[r].iter().zip(data).map(|(u, v)| u * v).sum();
            for c in 0..dim {
                a[r * dim + c] = cols[r].iter().zip(&cols[c]).map(|(u, v)| u * v).sum();
            }
        }
        (a, b)
    }

    #[test]
    fn a_tilted_star_stays_positive_where_it_has_flux_and_its_chi2_has_no_step() {
        // a star-like template over the whole grid, its throughput term, and
        // three Legendre terms; the data are the template times (α + x) plus
        // a smooth continuum. For α < 1 that amplitude is negative at one end,
        // which the constraint forbids there (x̄ ∓ √3·s, computed here from
        // the definition). Each constrained answer must equal a brute-force
        // search over the feasible amplitudes at the two ends (the Legendre
        // terms solved for each), and χ²(α) must move without a step.
        let n = 600;
        let xs: Vec<f64> = (0..n).map(|i| -1.0 + 2.0 * i as f64 / (n - 1) as f64).collect();
        let t: Vec<f64> = xs.iter().map(|x| 1.0 + 0.3 * (9.0 * x).sin() + 0.2 * x).collect();
        let mut cols = vec![
            t.clone(),
            t.iter().zip(&xs).map(|(t, x)| t * x).collect::<Vec<f64>>(),
        ];
        for q in 0..3 {
            cols.push(xs.iter().map(|&x| legendre(3, x)[q]).collect());
        }
        let (s0, s1, s2) = t.iter().zip(&xs).fold((0.0, 0.0, 0.0), |acc, (t, x)| {
            (acc.0 + t * t, acc.1 + t * t * x, acc.2 + t * t * x * x)
        });
        let xbar = s1 / s0;
        let half = 3f64.sqrt() * (s2 / s0 - xbar * xbar).sqrt();
        let (x1, x2) = ((xbar - half).max(-1.0), (xbar + half).min(1.0));
        let mut chi2s = Vec::new();
        for step in 0..=40 {
            let alpha = -1.0 + 0.05 * step as f64;
            let data: Vec<f64> = t
                .iter()
                .zip(&xs)
                .map(|(t, x)| t * (alpha + x) + 0.5 + 0.2 * x)
                .collect();
            let fww: f64 = data.iter().map(|v| v * v).sum();
            let (a, b) = normal(&cols, &data);
            let c = solve_constrained(&a, &b, &[true; 5], 1, 2, true);
            assert!(
                c[0] + c[1] * x1 >= -1e-9 && c[0] + c[1] * x2 >= -1e-9,
                "α {alpha}: {c:?}"
            );
            let chi2 = fww - c.iter().zip(&b).map(|(c, b)| c * b).sum::<f64>();
            // brute force: amplitudes p1, p2 ≥ 0 at x1, x2 on a grid, the
            // Legendre terms by least squares for each
            let mut brute = f64::INFINITY;
            for i in 0..=80 {
                for j in 0..=80 {
                    let (p1, p2) = (0.05 * i as f64, 0.05 * j as f64);
                    let c1 = (p2 - p1) / (x2 - x1);
                    let c0 = p1 - c1 * x1;
                    let rest: Vec<f64> = (0..n)
                        .map(|k| data[k] - c0 * cols[0][k] - c1 * cols[1][k])
                        .collect();
                    let (ap, bp) = normal(&cols[2..], &rest);
                    let cp = solve_normal(&ap, &bp, &[true; 3]);
                    let r: f64 = (0..n)
                        .map(|k| (rest[k] - (0..3).map(|q| cp[q] * cols[2 + q][k]).sum::<f64>()).powi(2))
                        .sum();
                    brute = brute.min(r);
                }
            }
            // the grid's best is feasible, so the exact optimum is at least as good
            assert!(
                chi2 <= brute + 1e-9 * fww,
                "α {alpha}: χ² {chi2} above the brute-force {brute}"
            );
            chi2s.push(chi2);
        }
        // the constraint binds for part of the run (α + x < 0 at the blue end)
        let range = chi2s.iter().cloned().fold(0.0, f64::max);
        assert!(range > 1.0, "{chi2s:?}");
        for w in chi2s.windows(2) {
            assert!((w[1] - w[0]).abs() < 0.1 * range, "a step in χ²(α): {chi2s:?}");
        }
    }

    #[test]
    fn the_constraint_holds_a_throughput_scaled_line_where_the_line_is() {
        // one template holding a single line near x = −0.8, its throughput term
        // T·x, and a constant; the data are the line times (−1 − 2.5x): negative
        // at the grid's centre (x = 0) but +1 at the line, so a line of positive
        // amplitude that the constraint must keep (by construction)
        let n = 400;
        let xs: Vec<f64> = (0..n).map(|i| -1.0 + 2.0 * i as f64 / (n - 1) as f64).collect();
        let line: Vec<f64> = xs
            .iter()
            .map(|x| (-0.5 * ((x + 0.8) / 0.02).powi(2)).exp())
            .collect();
        let cols: Vec<Vec<f64>> = vec![
            line.clone(),
            line.iter().zip(&xs).map(|(t, x)| t * x).collect(),
            vec![1.0; n],
        ];
        let data: Vec<f64> = line
            .iter()
            .zip(&xs)
            .map(|(t, x)| 0.3 + t * (-1.0 - 2.5 * x))
            .collect();
        let dim = cols.len();
        let mut a = vec![0.0; dim * dim];
        let mut b = vec![0.0; dim];
        for r in 0..dim {
            b[r] = (0..n).map(|i| cols[r][i] * data[i]).sum();
            for c in 0..dim {
                a[r * dim + c] = (0..n).map(|i| cols[r][i] * cols[c][i]).sum();
            }
        }
        let fww: f64 = data.iter().map(|v| v * v).sum();
        let c = solve_constrained(&a, &b, &[true; 3], 1, 2, true);
        let chi2 = fww - c.iter().zip(&b).map(|(c, b)| c * b).sum::<f64>();
        assert!(chi2.abs() < 1e-8 * fww, "χ² {chi2}, coefficients {c:?}");
        assert_relative_eq!(c[0], -1.0, epsilon = 1e-6);
        assert_relative_eq!(c[1], -2.5, epsilon = 1e-6);
        // a line of negative amplitude is still refused
        let neg: Vec<f64> = line.iter().map(|t| 0.3 - t).collect();
        let bn: Vec<f64> = (0..dim)
            .map(|r| (0..n).map(|i| cols[r][i] * neg[i]).sum())
            .collect();
        let c = solve_constrained(&a, &bn, &[true; 3], 1, 2, true);
        assert_eq!((c[0], c[1]), (0.0, 0.0), "{c:?}");
    }

    #[test]
    fn singular_system_falls_back() {
        // two identical columns: any split of the coefficient fits; the sum must be right
        let a = [2.0, 2.0, 2.0, 2.0];
        let b = [4.0, 4.0];
        let c = solve_normal(&a, &b, &[true, true]);
        assert_relative_eq!(c[0] + c[1], 2.0, epsilon = 1e-9);
    }
}
