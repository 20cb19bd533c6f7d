/*!
One fitting window: the good pixels around a group of lines that share
pixels, the continuum columns (stellar populations at the redshift and
Legendre polynomials, fixed whatever the line kinematics) and one Gaussian
column per free line (a tied line adds into its parent's column with its
fixed ratio). At fixed kinematics the model is linear; the continuum block
of the normal equations is computed once, the line columns at each call.
*/
// Index loops mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::stellar::Basis;
use super::table::LineKind;
use crate::fit::prep::{legendre_into, solve_nonneg_greedy, solve_normal, MAX_COLUMNS};
use crate::fit::C_KMS;
use std::cell::RefCell;

/// The χ² of 1, 2, 3, 4 and 5 degrees of freedom exceeded with the
/// probability of a 3σ Gaussian deviation, 0.27 % (standard tables).
pub const CHI2_3SIGMA: [f64; 5] = [9.0, 11.83, 14.16, 16.25, 18.21];

/// Velocity offset and Gaussian σ (both km/s) of one kind.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Kin {
    /// Offset from the redshift (km/s).
    pub v: f64,
    /// Observed Gaussian σ (km/s).
    pub sigma: f64,
}

/// One Gaussian of a column.
#[derive(Debug, Clone, Copy)]
pub struct Comp {
    /// Rest vacuum wavelength (Å).
    pub rest: f64,
    /// Flux of this component per unit of the column's coefficient.
    pub weight: f64,
}

/// One linear line column (a free line and the lines tied to it).
#[derive(Debug, Clone)]
pub struct Column {
    /// Kinematic kind.
    pub kind: LineKind,
    /// Components, the free line first.
    pub comps: Vec<Comp>,
    /// Index of each component's line in the measured list.
    pub lines: Vec<usize>,
}

/// One trough column under a stellar Balmer line.
#[derive(Debug, Clone, Copy)]
pub struct TroughColumn {
    /// Observed centre (Å).
    pub centre: f64,
    /// Shape and observed widths.
    pub shape: TroughShape,
    /// Absorption only: the column is −profile with a non-negative
    /// coefficient; otherwise +profile, free in sign.
    pub absorb: bool,
}

/// Profile of a trough column (widths in observed Å).
#[derive(Debug, Clone, Copy)]
pub enum TroughShape {
    /// exp(−½ (Δλ/σ)²).
    Gaussian { sigma: f64 },
    /// 1 / (1 + (r/w)^{5/2}) with r = √(Δλ² + s²): the far wings fall as
    /// Δλ^{−5/2}, the Holtsmark (quasi-static linear Stark) limit of
    /// hydrogen lines (from memory), a core of half-width ≈ `w`, rounded
    /// over `s` (the populations' broadening).
    Stark { w: f64, s: f64 },
}

impl TroughColumn {
    /// The column's value at observed `lam`.
    pub fn at(&self, lam: f64) -> f64 {
        let d = lam - self.centre;
        let v = match self.shape {
            TroughShape::Gaussian { sigma } => {
                let u = d / sigma;
                if u.abs() < 8.0 {
                    (-0.5 * u * u).exp()
                } else {
                    0.0
                }
            }
            TroughShape::Stark { w, s } => 1.0 / (1.0 + ((d * d + s * s).sqrt() / w).powf(2.5)),
        };
        if self.absorb {
            -v
        } else {
            v
        }
    }
}

/// The pixels and continuum columns of one window.
pub struct Window<'b> {
    z: f64,
    lam: Vec<f64>,
    f: Vec<f64>,
    w: Vec<f64>,
    /// Continuum design rows, `n × m` row-major.
    base: Vec<f64>,
    nt: usize,
    np: usize,
    /// Trough columns under the stellar Balmer lines, continuum columns
    /// after the polynomial.
    broad: Vec<TroughColumn>,
    base_ata: Vec<f64>,
    base_atb: Vec<f64>,
    fww: f64,
    lam_mid: f64,
    half: f64,
    /// Line columns.
    pub cols: Vec<Column>,
    basis: Option<&'b Basis>,
    /// Which stellar populations take part ([`Window::restrict`]).
    allowed: Vec<bool>,
    /// Buffers of [`Window::solve`], reused from call to call.
    scratch: RefCell<Scratch>,
}

/// Reused buffers of one window's solves.
#[derive(Default)]
struct Scratch {
    ata: Vec<f64>,
    atb: Vec<f64>,
    /// Line columns, `l × n` column-major; zero outside `span`.
    g: Vec<f64>,
    /// Pixels each line column reaches in the last solve.
    span: Vec<(usize, usize)>,
    coef: Vec<f64>,
    active: Vec<bool>,
    chol: Vec<f64>,
}

/// A linear solution at given kinematics.
pub struct Solution {
    /// Coefficients: continuum columns, then line columns (fluxes).
    pub coef: Vec<f64>,
    active: Vec<bool>,
    ata: Vec<f64>,
    /// χ² of the window at this solution.
    chi2: f64,
}

impl<'b> Window<'b> {
    /// A window over observed `[lo, hi]` Å at redshift `z`; `None` when too
    /// few good pixels remain for its columns or the basis does not cover.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        wave: &[f64],
        flux: &[f64],
        ivar: &[f64],
        good: &[bool],
        z: f64,
        (lo, hi): (f64, f64),
        np: usize,
        basis: Option<&'b Basis>,
        broad: Vec<TroughColumn>,
        cols: Vec<Column>,
    ) -> Option<Window<'b>> {
        let nt = basis.map_or(0, |b| b.len());
        let m = nt + np + broad.len();
        if m + cols.len() > MAX_COLUMNS || cols.is_empty() {
            return None;
        }
        if let Some(b) = basis {
            let (r0, r1) = b.range();
            if lo / (1.0 + z) < r0 || hi / (1.0 + z) > r1 {
                return None;
            }
        }
        let a = wave.partition_point(|&l| l < lo);
        let b = wave.partition_point(|&l| l <= hi);
        let idx: Vec<usize> = (a..b)
            .filter(|&i| good[i] && ivar[i] > 0.0 && ivar[i].is_finite() && flux[i].is_finite())
            .collect();
        if idx.len() < m + cols.len() + 5 {
            return None;
        }
        let mut win = Window {
            z,
            lam: idx.iter().map(|&i| wave[i]).collect(),
            f: idx.iter().map(|&i| flux[i]).collect(),
            w: idx.iter().map(|&i| ivar[i]).collect(),
            base: vec![0.0; idx.len() * m],
            nt,
            np,
            broad,
            base_ata: vec![0.0; m * m],
            base_atb: vec![0.0; m],
            fww: 0.0,
            lam_mid: 0.5 * (lo + hi),
            half: 0.5 * (hi - lo),
            cols,
            basis,
            allowed: vec![true; nt],
            scratch: RefCell::new(Scratch::default()),
        };
        let mut row = vec![0.0; m];
        for i in 0..win.lam.len() {
            if !win.base_row(win.lam[i], &mut row) {
                return None;
            }
            win.base[i * m..(i + 1) * m].copy_from_slice(&row);
            let (wi, fi) = (win.w[i], win.f[i]);
            win.fww += wi * fi * fi;
            for p in 0..m {
                win.base_atb[p] += wi * row[p] * fi;
                for q in 0..m {
                    win.base_ata[p * m + q] += wi * row[p] * row[q];
                }
            }
        }
        win.fww.is_finite().then_some(win)
    }

    /// Continuum design row at observed `lam`.
    fn base_row(&self, lam: f64, row: &mut [f64]) -> bool {
        if let Some(b) = self.basis {
            if !b.at(lam / (1.0 + self.z), &mut row[..self.nt]) {
                return false;
            }
        }
        legendre_into(
            (lam - self.lam_mid) / self.half,
            &mut row[self.nt..self.nt + self.np],
        );
        for (k, t) in self.broad.iter().enumerate() {
            row[self.nt + self.np + k] = t.at(lam);
        }
        true
    }

    /// The factor by which the formal variances of `sol` are scaled: the
    /// window's reduced χ² at that solution, at least 1. Where the
    /// stellar populations do not match the spectrum to its noise the
    /// residuals are wider than the errors say, and the formal errors are too
    /// small by √χ²_r (common practice, as for the redshift's Δχ² cuts:
    /// [`crate::fit::mismatch_scale`]).
    pub fn mismatch_scale(&self, sol: &Solution) -> f64 {
        let free = sol.active.iter().filter(|&&a| a).count();
        let dof = self.lam.len().saturating_sub(free);
        if dof > 0 {
            crate::fit::mismatch_scale(sol.chi2 / dof as f64)
        } else {
            1.0
        }
    }

    /// Continuum columns.
    pub fn m(&self) -> usize {
        self.nt + self.np + self.broad.len()
    }

    /// Observed centre and σ (Å) of a component at kinematics `k`.
    pub fn centre_sigma(&self, rest: f64, k: Kin) -> (f64, f64) {
        let mu = rest * (1.0 + self.z) * (1.0 + k.v / C_KMS);
        (mu, mu * k.sigma / C_KMS)
    }

    /// The weighted least-squares solution at kinematics `kin` (indexed by
    /// [`LineKind::index`]), with non-negative stellar amplitudes (a
    /// negative population would turn absorption into false emission: the
    /// most negative is dropped and the fit repeated).
    pub fn solve(&self, kin: &[Kin; 2]) -> Option<Solution> {
        let mut sc = self.scratch.borrow_mut();
        let chi2 = self.solve_into(kin, &mut sc)?;
        Some(Solution {
            coef: sc.coef.clone(),
            active: sc.active.clone(),
            ata: sc.ata.clone(),
            chi2,
        })
    }

    /// χ² of [`Window::solve`] alone, with no allocation: the profiled χ²
    /// that the kinematics search calls hundreds of times per spectrum.
    pub fn chi2(&self, kin: &[Kin; 2]) -> Option<f64> {
        self.solve_into(kin, &mut self.scratch.borrow_mut())
    }

    /// [`Window::solve`] into the buffers of `sc`; returns χ².
    fn solve_into(&self, kin: &[Kin; 2], sc: &mut Scratch) -> Option<f64> {
        let m = self.m();
        let l = self.cols.len();
        let dim = m + l;
        let n = self.lam.len();
        let Scratch {
            ata,
            atb,
            g,
            span,
            coef,
            active,
            chol,
        } = sc;
        ata.clear();
        ata.resize(dim * dim, 0.0);
        atb.clear();
        atb.resize(dim, 0.0);
        for p in 0..m {
            atb[p] = self.base_atb[p];
            ata[p * dim..p * dim + m].copy_from_slice(&self.base_ata[p * m..(p + 1) * m]);
        }
        // line columns on the pixels they reach (8σ); the buffer holds zeros
        // outside the spans of the previous call, which are cleared first
        if g.len() != l * n {
            g.clear();
            g.resize(l * n, 0.0);
            span.clear();
        }
        for (j, &(a, b)) in span.iter().enumerate() {
            g[j * n + a..j * n + b.max(a)].fill(0.0);
        }
        span.clear();
        span.resize(l, (n, 0usize));
        for (j, col) in self.cols.iter().enumerate() {
            let k = kin[col.kind.index()];
            for c in &col.comps {
                let (mu, sl) = self.centre_sigma(c.rest, k);
                if !(sl > 0.0 && sl.is_finite()) {
                    return None;
                }
                let a = self.lam.partition_point(|&x| x < mu - 8.0 * sl);
                let b = self.lam.partition_point(|&x| x <= mu + 8.0 * sl);
                let norm = c.weight / ((2.0 * std::f64::consts::PI).sqrt() * sl);
                for i in a..b {
                    let u = (self.lam[i] - mu) / sl;
                    g[j * n + i] += norm * (-0.5 * u * u).exp();
                }
                span[j] = (span[j].0.min(a), span[j].1.max(b));
            }
        }
        for j in 0..l {
            let (a, b) = span[j];
            for i in a..b.max(a) {
                let wg = self.w[i] * g[j * n + i];
                if wg == 0.0 {
                    continue;
                }
                atb[m + j] += wg * self.f[i];
                let row = &self.base[i * m..(i + 1) * m];
                let out = &mut ata[(m + j) * dim..(m + j + 1) * dim];
                for p in 0..m {
                    out[p] += wg * row[p];
                }
                for j2 in 0..l {
                    out[m + j2] += wg * g[j2 * n + i];
                }
            }
            for p in 0..m {
                ata[p * dim + m + j] = ata[(m + j) * dim + p];
            }
        }
        active.clear();
        active.resize(dim, true);
        active[..self.nt].copy_from_slice(&self.allowed);
        coef.clear();
        coef.resize(dim, 0.0);
        // the stellar amplitudes, and the troughs that may only absorb
        let base = self.nt + self.np;
        let constrained = |p: usize| p < self.nt || (p >= base && p < m && self.broad[p - base].absorb);
        solve_nonneg_greedy(
            ata,
            atb,
            active,
            coef,
            chol,
            constrained,
            self.nt + self.broad.len(),
        );
        let chi2 = self.fww - coef.iter().zip(atb.iter()).map(|(c, b)| c * b).sum::<f64>();
        (chi2.is_finite() && coef.iter().all(|c| c.is_finite())).then_some(chi2)
    }

    /// Keep to the populations of `support` (those the whole spectrum
    /// holds, [`super::whole::support`]) unless the others lower the
    /// window's χ² at kinematics `kin` by more than the 3σ level of a χ²
    /// of as many degrees of freedom as they add ([`CHI2_3SIGMA`]): a
    /// population the galaxy lacks enters where the spectrum's own stars
    /// differ from the mix beyond the noise, not where noise alone asks
    /// for it (and the non-negativity would keep only its positive side).
    pub fn restrict(&mut self, support: &[bool], kin: &[Kin; 2]) {
        if support.len() != self.nt || support.iter().all(|&a| a) {
            return;
        }
        let mut sc = self.scratch.borrow_mut();
        let Some(all) = self.solve_into(kin, &mut sc) else {
            return;
        };
        let extra = (0..self.nt)
            .filter(|&p| !support[p] && sc.active[p] && sc.coef[p] > 0.0)
            .count();
        self.allowed.copy_from_slice(support);
        if extra == 0 {
            return;
        }
        let kept = self.solve_into(kin, &mut sc);
        if kept.is_none_or(|c| c - all > CHI2_3SIGMA[extra.min(CHI2_3SIGMA.len()) - 1]) {
            self.allowed.fill(true);
        }
    }

    /// Cross terms of the kinematic parameters with the linear ones at
    /// `sol`: with θ = (v, ln σ) of each kind (4 values, kind-major) and
    /// `src[kind]` the kind whose θ a kind's lines follow (`None`: fixed),
    /// returns B = Σ w · column · ∂model/∂θ (`dim × 4`, row-major) and
    /// D = Σ w · ∂model/∂θ ∂model/∂θ (4 × 4).
    pub fn kin_blocks(
        &self,
        sol: &Solution,
        kin: &[Kin; 2],
        src: [Option<usize>; 2],
    ) -> (Vec<f64>, [f64; 16]) {
        let m = self.m();
        let l = self.cols.len();
        let dim = m + l;
        let n = self.lam.len();
        let mut b = vec![0.0; dim * 4];
        let mut d = [0.0; 16];
        let mut g = vec![0.0; l * n];
        let mut dt = vec![0.0; 4 * n];
        let (mut lo, mut hi) = (n, 0);
        for (j, col) in self.cols.iter().enumerate() {
            let k = kin[col.kind.index()];
            let s = src[col.kind.index()];
            let c = sol.coef[m + j];
            for comp in &col.comps {
                let (mu, sl) = self.centre_sigma(comp.rest, k);
                let a = self.lam.partition_point(|&x| x < mu - 8.0 * sl);
                let e = self.lam.partition_point(|&x| x <= mu + 8.0 * sl);
                lo = lo.min(a);
                hi = hi.max(e);
                let norm = comp.weight / ((2.0 * std::f64::consts::PI).sqrt() * sl);
                let dmu_dv = comp.rest * (1.0 + self.z) / C_KMS;
                for i in a..e {
                    let u = (self.lam[i] - mu) / sl;
                    let gi = norm * (-0.5 * u * u).exp();
                    g[j * n + i] += gi;
                    if let Some(q) = s {
                        dt[4 * i + 2 * q] += c * gi * u / sl * dmu_dv;
                        dt[4 * i + 2 * q + 1] += c * gi * (u * u - 1.0);
                    }
                }
            }
        }
        for i in lo..hi.max(lo) {
            let t = &dt[4 * i..4 * i + 4];
            if t.iter().all(|&x| x == 0.0) {
                continue;
            }
            let wi = self.w[i];
            let row = &self.base[i * m..(i + 1) * m];
            for a in 0..4 {
                for p in 0..m {
                    b[p * 4 + a] += wi * row[p] * t[a];
                }
                for j in 0..l {
                    b[(m + j) * 4 + a] += wi * g[j * n + i] * t[a];
                }
                for c in 0..4 {
                    d[a * 4 + c] += wi * t[a] * t[c];
                }
            }
        }
        (b, d)
    }

    /// (AᵀWA)⁻¹ B for the active columns of `sol` (`dim × 4`, row-major).
    pub fn inverse_times(&self, sol: &Solution, b: &[f64]) -> Vec<f64> {
        let dim = sol.coef.len();
        let mut x = vec![0.0; dim * 4];
        for a in 0..4 {
            let rhs: Vec<f64> = (0..dim)
                .map(|p| if sol.active[p] { b[p * 4 + a] } else { 0.0 })
                .collect();
            let col = solve_normal(&sol.ata, &rhs, &sol.active);
            for p in 0..dim {
                x[p * 4 + a] = col[p];
            }
        }
        x
    }

    /// Variance of line column `j`'s coefficient in `sol`.
    pub fn variance(&self, sol: &Solution, j: usize) -> f64 {
        let dim = sol.coef.len();
        let mut e = vec![0.0; dim];
        e[self.m() + j] = 1.0;
        solve_normal(&sol.ata, &e, &sol.active)[self.m() + j]
    }

    /// The continuum model (stellar populations + polynomial) at observed `lam`.
    pub fn continuum(&self, sol: &Solution, lam: f64) -> f64 {
        let mut row = vec![0.0; self.m()];
        if !self.base_row(lam, &mut row) {
            return f64::NAN;
        }
        row.iter().zip(&sol.coef).map(|(r, c)| r * c).sum()
    }

    /// Whether observed `[a, b]` lies inside the window.
    pub fn covers(&self, a: f64, b: f64) -> bool {
        a >= self.lam_mid - self.half && b <= self.lam_mid + self.half
    }

    /// Whether the window has a stellar basis.
    pub fn has_stars(&self) -> bool {
        self.basis.is_some()
    }

    /// Redshift.
    pub fn z(&self) -> f64 {
        self.z
    }
}
