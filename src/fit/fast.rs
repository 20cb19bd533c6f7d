/*!
The fast path: χ²(z) of one unit at every whole-pixel shift from FFT
cross-correlations.

At shift s, grid pixel i sees template pixel i + c with c = g0 − t0 − s, so
every normal-equation sum that involves a template is a cross-correlation
X(c) = Σ_i D[i] T[i + c] of a data array D with a template array T (T_a or
the product T_a·T_b). The data arrays are w·P_q (P_q the Legendre
polynomials of x ∈ [−1, 1] across the grid) and w·f·x^u:

- Σ w T_a T_b      = corr(w·P_0, T_a·T_b)
- Σ w T_a P_j      = corr(w·P_j, T_a)
- Σ w T_a f        = corr(w·f,   T_a)

With throughput terms (columns T_a·x, i.e. the template times P_1) the sums
pick up powers of x, which the Legendre recursion x·P_j = ((j+1)·P_{j+1} +
j·P_{j−1})/(2j+1) turns back into the same data arrays: x = P_1 and
x² = (P_0 + 2·P_2)/3, so Σ w x T_a T_b = corr(w·P_1, T_a·T_b), Σ w x² T_a T_b
= (corr(w·P_0, ·) + 2·corr(w·P_2, ·))/3, and Σ w x P_j T_a comes from
corr(w·P_{j±1}, T_a). One set of data transforms w·P_q (q ≤ J) serves all.

The polynomial-only sums do not depend on z (templates are zero outside
their coverage and χ² always runs over every good pixel), so they come from
[`Prepared`].

Only the template pixels some trial shift can reach matter: the template is
cut to that window (its ends rounded to [`WINDOW_QUANTUM`] pixels, so that
spectra on nearly the same grid share cached transforms). Only the lags of
the trial shifts are read back, so the transform length L need not hold the
whole linear correlation, only those lags free of wrap-around (the
overlap-save condition): with the cut template of m′ pixels and the wanted
lags in a..=b, L ≥ max(m′ − a, b + n). Template transforms are cached per
(unit, window, L) in the engine; two real correlations share one complex
inverse FFT (real and imaginary part).

For a narrow shift range (the stars' velocity window: a few dozen lags over
thousands of pixels) most of that inverse transform is thrown away; there the
correlations are partitioned instead ([`blocks`]): short transforms of data
blocks and template segments whose products are summed before one short
inverse transform.
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::prep::{
    amplitudes_feasible, normal_fit_value, solve_constrained, solve_normal_into, Prepared, MAX_COLUMNS,
};
use super::sums::{active_columns_into, assemble_polynomials, assemble_templates, dot, n_corr, thresholds};
use super::units::Unit;
use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use std::collections::HashMap;
use std::sync::{Arc, Mutex, RwLock};

mod blocks;
use blocks::{BlockKey, DataBlocks, Partition, UnitBlocks};

type C = Complex<f64>;

/// Smallest 2^a·3^b·5^c ≥ `min` (fast FFT sizes).
pub fn nice_len(min: usize) -> usize {
    let mut best = usize::MAX;
    let mut p2 = 1usize;
    while p2 < 2 * min.max(1) {
        let mut p3 = p2;
        while p3 < 2 * min.max(1) {
            let mut p5 = p3;
            while p5 < 2 * min.max(1) {
                if p5 >= min && p5 < best {
                    best = p5;
                }
                p5 *= 5;
            }
            p3 *= 3;
        }
        p2 *= 2;
    }
    best
}

/// FFT plans by (length, forward).
type PlanMap = HashMap<(usize, bool), Arc<dyn Fft<f64>>>;

/// Cache key of a unit's transforms: (unit, window start, window length, L).
type UnitKey = (usize, usize, usize, usize);

/// Transforms of one unit's (cut) templates and their pairwise products at
/// one L, each of the array scaled to unit norm (see [`Scaled`]).
struct UnitTransforms {
    t: Vec<Scaled>,
    tt: Vec<Scaled>,
}

/// The transform of an array divided by its L2 norm, and that norm. Two
/// correlations share one complex inverse transform, and the round-off of
/// that transform is relative to the larger of the two: unscaled, a sum of
/// the flux (in the file's units, 10⁻¹⁷ or less) would share it with a sum
/// of the weights (10³⁰ or more) and lose every digit. Scaled, every
/// correlation is of order one and keeps the transform's relative precision.
struct Scaled {
    x: Vec<C>,
    norm: f64,
}

/// FFT plans and cached template transforms (shared by all threads).
#[derive(Default)]
pub struct FftCache {
    plans: Mutex<PlanMap>,
    planner: Mutex<Option<FftPlanner<f64>>>,
    units: RwLock<HashMap<UnitKey, Arc<UnitTransforms>>>,
    /// Segment transforms for partitioned correlation (see [`blocks`]).
    blocks: RwLock<HashMap<BlockKey, Arc<UnitBlocks>>>,
}

impl std::fmt::Debug for FftCache {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("FftCache")
    }
}

/// Most (unit, window, L) transform sets kept before the cache is emptied:
/// the built-in set has 36 units (34 stars, two bases), so this holds about
/// four spectral set-ups.
const MAX_CACHED: usize = 160;

/// Template windows start and end on multiples of this many pixels.
pub const WINDOW_QUANTUM: usize = 256;

impl FftCache {
    pub(crate) fn plan(&self, len: usize, forward: bool) -> Arc<dyn Fft<f64>> {
        let mut plans = self.plans.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(p) = plans.get(&(len, forward)) {
            return p.clone();
        }
        let mut planner = self.planner.lock().unwrap_or_else(|e| e.into_inner());
        let planner = planner.get_or_insert_with(FftPlanner::new);
        let p = if forward {
            planner.plan_fft_forward(len)
        } else {
            planner.plan_fft_inverse(len)
        };
        plans.insert((len, forward), p.clone());
        p
    }

    /// Forward transform of a real array zero-padded to `len`.
    pub(crate) fn forward_real(&self, x: &[f64], len: usize) -> Vec<C> {
        let mut buf: Vec<C> = x.iter().map(|&v| C::new(v, 0.0)).collect();
        buf.resize(len, C::new(0.0, 0.0));
        self.plan(len, true).process(&mut buf);
        buf
    }

    /// Forward transforms of two real arrays (zero-padded to `len`) from one
    /// complex FFT: with Z = FFT(x + i·y), X[k] = (Z[k] + conj Z[−k])/2 and
    /// Y[k] = (Z[k] − conj Z[−k])/(2i).
    fn forward_real_pair(&self, x: &[f64], y: &[f64], len: usize) -> (Vec<C>, Vec<C>) {
        let mut buf = vec![C::new(0.0, 0.0); len];
        for (b, v) in buf.iter_mut().zip(x) {
            b.re = *v;
        }
        for (b, v) in buf.iter_mut().zip(y) {
            b.im = *v;
        }
        self.plan(len, true).process(&mut buf);
        let mut fx = Vec::with_capacity(len);
        let mut fy = Vec::with_capacity(len);
        for k in 0..len {
            let (z, zc) = (buf[k], buf[(len - k) % len].conj());
            fx.push((z + zc) * 0.5);
            let d = (z - zc) * 0.5;
            fy.push(C::new(d.im, -d.re));
        }
        (fx, fy)
    }

    /// Forward transforms of real arrays, each scaled to unit L2 norm (an
    /// array of zeros stays as it is), two per complex FFT.
    fn forward_many(&self, arrays: &[Vec<f64>], len: usize) -> Vec<Scaled> {
        let scaled: Vec<(Vec<f64>, f64)> = arrays
            .iter()
            .map(|a| {
                let norm = a.iter().map(|v| v * v).sum::<f64>().sqrt();
                if norm > 0.0 && norm.is_finite() {
                    (a.iter().map(|v| v / norm).collect(), norm)
                } else {
                    (a.clone(), 1.0)
                }
            })
            .collect();
        let mut out = Vec::with_capacity(arrays.len());
        for pair in scaled.chunks(2) {
            if let [(x, nx), (y, ny)] = pair {
                let (fx, fy) = self.forward_real_pair(x, y, len);
                out.push(Scaled { x: fx, norm: *nx });
                out.push(Scaled { x: fy, norm: *ny });
            } else {
                let (x, nx) = &pair[0];
                out.push(Scaled {
                    x: self.forward_real(x, len),
                    norm: *nx,
                });
            }
        }
        out
    }

    fn unit_transforms(&self, key: usize, unit: &Unit, win: &Window) -> Arc<UnitTransforms> {
        let ck = (key, win.r0, win.m, win.len);
        if let Some(u) = self.units.read().unwrap_or_else(|e| e.into_inner()).get(&ck) {
            return u.clone();
        }
        let cut: Vec<&[f64]> = unit.t.iter().map(|a| &a[win.r0..win.r0 + win.m]).collect();
        let t = self.forward_many(&cut.iter().map(|a| a.to_vec()).collect::<Vec<_>>(), win.len);
        let prods = template_products(&cut);
        let tt = self.forward_many(&prods, win.len);
        let u = Arc::new(UnitTransforms { t, tt });
        let mut map = self.units.write().unwrap_or_else(|e| e.into_inner());
        if map.len() >= MAX_CACHED {
            map.clear();
        }
        map.insert(ck, u.clone());
        u
    }
}

/// The products T_a·T_b (a ≤ b) of template arrays, in the order of the sums.
fn template_products(t: &[&[f64]]) -> Vec<Vec<f64>> {
    let k = t.len();
    let mut out = Vec::with_capacity(k * (k + 1) / 2);
    for a in 0..k {
        for b in a..k {
            out.push(t[a].iter().zip(t[b]).map(|(x, y)| x * y).collect());
        }
    }
    out
}

/// Conjugated transforms of the data arrays at one L (scaled, see [`Scaled`]).
pub struct DataTransforms {
    wp: Vec<Scaled>,
    wf: Vec<Scaled>,
}

/// Data transforms per FFT length (and per partition, cut in blocks), made
/// lazily for one spectrum.
#[derive(Default)]
pub struct DataCache {
    by_len: HashMap<usize, DataTransforms>,
    blocks: HashMap<Partition, DataBlocks>,
}

/// The complex conjugates of transforms (the data side of a correlation).
fn conjugated(v: Vec<Scaled>) -> Vec<Scaled> {
    v.into_iter()
        .map(|a| Scaled {
            x: a.x.into_iter().map(|c| c.conj()).collect(),
            norm: a.norm,
        })
        .collect()
}

impl DataCache {
    fn get(&mut self, cache: &FftCache, prep: &Prepared, len: usize) -> &DataTransforms {
        self.by_len.entry(len).or_insert_with(|| DataTransforms {
            wp: conjugated(cache.forward_many(&prep.wl, len)),
            wf: conjugated(cache.forward_many(&prep.wfx, len)),
        })
    }
}

/// How the template sums are computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CorrPlan {
    /// Pick by cost: FFTs for long shift ranges, direct sums for short ones.
    Auto,
    /// Always FFT cross-correlations.
    Fft,
    /// Direct sums at each needed lag.
    Direct,
    /// Partitioned correlation (short transforms of blocks summed before
    /// one inverse, as the module text says): for narrow shift ranges.
    Blocks,
}

/// The template pixels some trial shift reaches, and the transform length.
#[derive(Debug, Clone, Copy)]
struct Window {
    /// First template pixel of the cut.
    r0: usize,
    /// Pixels in the cut.
    m: usize,
    /// FFT length free of wrap-around at the wanted lags.
    len: usize,
}

impl Window {
    /// `None` when no trial shift puts the template over the grid.
    fn new(n: usize, m: usize, c_lo: i64, c_hi: i64) -> Option<Window> {
        let (n_i, m_i) = (n as i64, m as i64);
        // template pixels r = i + c, 0 ≤ i < n, c_lo ≤ c ≤ c_hi
        let lo = c_lo.max(0);
        let hi = (c_hi + n_i).min(m_i); // exclusive
        if hi <= lo {
            return None;
        }
        let q = WINDOW_QUANTUM as i64;
        let r0 = lo.div_euclid(q) * q;
        let r1 = (((hi + q - 1).div_euclid(q)) * q).min(m_i);
        let mc = r1 - r0;
        // wanted lags relative to the cut: a..=b
        let (a, b) = (c_lo - r0, c_hi - r0);
        let need = (mc - a).max(b + n_i).max(mc).max(n_i).max(1);
        Some(Window {
            r0: r0 as usize,
            m: mc as usize,
            len: nice_len(need as usize),
        })
    }
}

/// The template sums of one unit at every whole shift, as [`chi2_curve`]
/// returns them (correlation-major).
pub struct ShiftSums {
    sums: Vec<f64>,
    ns: usize,
    s_lo: i64,
}

impl ShiftSums {
    /// The sums at whole shift `shift` in the order of [`n_corr`] (the
    /// order [`super::sums::fit_from_sums`] reads); `None` outside the curve.
    pub fn row(&self, shift: i64) -> Option<Vec<f64>> {
        let si = usize::try_from(shift - self.s_lo)
            .ok()
            .filter(|&si| si < self.ns)?;
        Some(self.sums.iter().skip(si).step_by(self.ns).copied().collect())
    }
}

/// χ² of `unit` at every shift `s_lo..=s_hi` by the fast path (`key`
/// identifies the unit in the cache), and the template sums it was solved
/// from, so that a fit at a whole shift (re-ranking a minimum with a
/// constraint) needs no new pass over the pixels.
#[allow(clippy::too_many_arguments)]
pub fn chi2_curve(
    cache: &FftCache,
    data: &mut DataCache,
    prep: &Prepared,
    key: usize,
    unit: &Unit,
    s_lo: i64,
    s_hi: i64,
    plan: CorrPlan,
) -> (Vec<f64>, ShiftSums) {
    let n = prep.grid.n;
    let (k, j, g) = (unit.k(), prep.j(), unit.groups);
    let ns = (s_hi - s_lo + 1).max(0) as usize;
    let ncorr = n_corr(k, j, g);
    let base = prep.g0 - unit.t0;
    let win = Window::new(n, unit.m(), base - s_hi, base - s_lo);
    let out = match win {
        None => vec![0.0; ns * ncorr],
        Some(win) => {
            let part = Partition::choose(n, ns);
            let plan = match plan {
                CorrPlan::Auto => {
                    // measured costs (release build): a direct multiply-add
                    // ≈ 0.35 ns; a complex FFT ≈ 0.5 ns · L log2 L, one per pair
                    // of correlations (the data's own are shared by all units);
                    // partitioned: its blocks' products and a short inverse
                    // against the full transform and its products
                    let len = win.len as f64;
                    let pairs = ncorr.div_ceil(2) as f64;
                    let direct = 0.35 * (ns * n) as f64 * ncorr as f64;
                    let fft = blocks::NS_PER_FFT_OP * len * len.log2() * pairs;
                    let full = fft + blocks::NS_PER_PRODUCT * len * pairs;
                    // (only for a narrow range, transforms of at most a
                    // quarter of the full length: over the wide ranges of the
                    // bases a few long blocks model cheaper than the full
                    // transform, but their accumulated products over the
                    // bases' many correlations measured dearer)
                    if part.q * 4 <= win.len && part.cost(n) * pairs < full.min(direct) {
                        CorrPlan::Blocks
                    } else if fft < direct {
                        CorrPlan::Fft
                    } else {
                        CorrPlan::Direct
                    }
                }
                p => p,
            };
            match plan {
                CorrPlan::Direct => sums_direct(prep, unit, s_lo, ns),
                CorrPlan::Blocks => {
                    let c0 = base - s_lo;
                    let phase = (c0 - ns as i64 + 1).rem_euclid(part.b as i64) as usize;
                    let ub = cache.unit_blocks(key, unit, part, phase);
                    let db = data
                        .blocks
                        .entry(part)
                        .or_insert_with(|| DataBlocks::of(cache, prep, part));
                    let (wl, wfx) = prep.data_for(g);
                    let pairs = corr_pairs(k, g, wl.len(), prep.wl.len(), wfx.len());
                    debug_assert_eq!(pairs.len(), ncorr);
                    blocks::sums_blocks(cache, db, &ub, &pairs, (n, unit.m()), c0, ns, part)
                }
                _ => sums_fft(cache, data, prep, key, unit, s_lo, ns, &win),
            }
        }
    };
    let chi2 = solve_shifts(prep, unit, &out, ns);
    (chi2, ShiftSums { sums: out, ns, s_lo })
}

/// The correlations of the template sums in the order of [`n_corr`], as
/// (data array, template array): data arrays numbered w·P_q (q < `nwp`)
/// then w·f·x^u (u < `nwf`) from `wf0`, templates T_a (a < k) then the
/// products T_a·T_b in the order of [`template_products`].
fn corr_pairs(k: usize, g: usize, nwp: usize, wf0: usize, nwf: usize) -> Vec<(usize, usize)> {
    let mut pairs = Vec::new();
    for tt in 0..k * (k + 1) / 2 {
        for q in 0..2 * g - 1 {
            pairs.push((q, k + tt));
        }
    }
    for a in 0..k {
        for q in 0..nwp {
            pairs.push((q, a));
        }
    }
    for a in 0..k {
        for u in 0..nwf {
            pairs.push((wf0 + u, a));
        }
    }
    pairs
}

/// The template sums at each shift by FFT, correlation-major: `out[ci · ns + si]`.
#[allow(clippy::too_many_arguments)]
fn sums_fft(
    cache: &FftCache,
    data: &mut DataCache,
    prep: &Prepared,
    key: usize,
    unit: &Unit,
    s_lo: i64,
    ns: usize,
    win: &Window,
) -> Vec<f64> {
    let n = prep.grid.n as i64;
    let (k, g) = (unit.k(), unit.groups);
    let len = win.len;
    let ut = cache.unit_transforms(key, unit, win);
    let dt = data.get(cache, prep, len);
    // the data arrays this unit's columns use (a prefix of those made)
    let (wl, wfx) = prep.data_for(g);
    let (dwp, dwf) = (&dt.wp[..wl.len()], &dt.wf[..wfx.len()]);
    // the list of correlations: (data spectrum, template spectrum)
    let mut pairs: Vec<(&Scaled, &Scaled)> = Vec::new();
    for tt in &ut.tt {
        for q in 0..2 * g - 1 {
            pairs.push((&dwp[q], tt));
        }
    }
    for t in &ut.t {
        for wp in dwp {
            pairs.push((wp, t));
        }
    }
    for t in &ut.t {
        for wf in dwf {
            pairs.push((wf, t));
        }
    }
    debug_assert_eq!(pairs.len(), n_corr(k, prep.j(), g));
    let ncorr = pairs.len();
    // correlation-major, out[ci · ns + si], filled in order (no zero fill)
    let mut out = Vec::with_capacity(ns * ncorr);
    let inv = cache.plan(len, false);
    let scale = 1.0 / len as f64;
    let mut buf = vec![C::new(0.0, 0.0); len];
    // one scratch for every inverse transform (`process` would allocate and
    // zero a new one at each call)
    let mut scratch = vec![C::new(0.0, 0.0); inv.get_inplace_scratch_len()];
    let (mc, r0) = (win.m as i64, win.r0 as i64);
    // lag of shift si: c0 − si; the shifts whose lag overlaps the data
    let c0 = prep.g0 - unit.t0 - s_lo - r0;
    let si_lo = (c0 - mc + 1).clamp(0, ns as i64) as usize;
    let si_hi = (c0 + n).clamp(si_lo as i64, ns as i64) as usize;
    let p0 = (c0 - si_lo as i64).rem_euclid(len as i64) as usize;
    for chunk in pairs.chunks(2) {
        let (d1, t1) = (&chunk[0].0.x, &chunk[0].1.x);
        if let Some((d2, t2)) = chunk.get(1) {
            let same = std::ptr::eq(chunk[0].1, *t2);
            let (d2, t2) = (&d2.x[..len], &t2.x[..len]);
            // i·(d2·t2): both correlations are real, so they come back as Re and Im
            if same {
                // one template for both (consecutive pairs mostly share one):
                // t·(d1 + i·d2), one complex product instead of two
                let terms = d1[..len].iter().zip(d2).zip(t2);
                for (o, ((a1, a2), b)) in buf.iter_mut().zip(terms) {
                    *o = b * C::new(a1.re - a2.im, a1.im + a2.re);
                }
            } else {
                let terms = d1[..len].iter().zip(&t1[..len]).zip(d2.iter().zip(t2));
                for (o, ((a1, b1), (a2, b2))) in buf.iter_mut().zip(terms) {
                    let p = a2 * b2;
                    *o = a1 * b1 + C::new(-p.im, p.re);
                }
            }
        } else {
            for (o, (a1, b1)) in buf.iter_mut().zip(d1[..len].iter().zip(&t1[..len])) {
                *o = a1 * b1;
            }
        }
        inv.process_with_scratch(&mut buf, &mut scratch);
        // shift si reads lag c0 − si: from position p0 backwards, wrapping at 0
        let parts: [&[C]; 2] = if p0 + 1 >= si_hi - si_lo {
            [&buf[p0 + 1 - (si_hi - si_lo)..=p0], &[]]
        } else {
            [&buf[..=p0], &buf[len - (si_hi - si_lo - p0 - 1)..]]
        };
        for part in 0..chunk.len() {
            // the arrays' norms back in
            let scale = scale * chunk[part].0.norm * chunk[part].1.norm;
            out.resize(out.len() + si_lo, 0.0);
            for seg in parts {
                out.extend(
                    seg.iter()
                        .rev()
                        .map(|v| if part == 0 { v.re } else { v.im } * scale),
                );
            }
            out.resize(out.len() + ns - si_hi, 0.0);
        }
    }
    debug_assert_eq!(out.len(), ns * ncorr);
    out
}

/// The template sums at each shift by direct dot products over the overlap
/// of the data arrays and the shifted template arrays.
fn sums_direct(prep: &Prepared, unit: &Unit, s_lo: i64, ns: usize) -> Vec<f64> {
    let (n, m) = (prep.grid.n as i64, unit.m() as i64);
    let (k, g) = (unit.k(), unit.groups);
    let ncorr = n_corr(k, prep.j(), g);
    let (wp, wf) = prep.data_for(g);
    let t: Vec<&[f64]> = unit.t.iter().map(Vec::as_slice).collect();
    let tt = template_products(&t);
    let mut out = vec![0.0; ns * ncorr];
    for si in 0..ns {
        let c = prep.g0 - unit.t0 - (s_lo + si as i64);
        // pixels i with 0 ≤ i < n and 0 ≤ i + c < m
        let (i0, i1) = ((-c).max(0), n.min(m - c));
        if i1 <= i0 {
            continue;
        }
        let (i0, i1) = (i0 as usize, i1 as usize);
        let (r0, r1) = ((i0 as i64 + c) as usize, (i1 as i64 + c) as usize);
        // correlation-major: out[ci · ns + si]
        let mut ci = 0;
        for p in &tt {
            for q in 0..2 * g - 1 {
                out[ci * ns + si] = dot(&wp[q][i0..i1], &p[r0..r1]);
                ci += 1;
            }
        }
        for a in &t {
            for d in wp {
                out[ci * ns + si] = dot(&d[i0..i1], &a[r0..r1]);
                ci += 1;
            }
        }
        for a in &t {
            for d in wf {
                out[ci * ns + si] = dot(&d[i0..i1], &a[r0..r1]);
                ci += 1;
            }
        }
    }
    out
}

/// Whether the χ² curve of `unit` has its template amplitudes constrained to
/// be ≥ 0: for a single template (each star) when the fit is non-negative, at
/// the cost of one more solve where the amplitude comes out negative. The
/// curves of a basis stay unconstrained (the exact constrained solve of four
/// templates at ~10⁴ shifts would triple the time of a fit); their deepest
/// minima are ranked again with the constraint.
pub fn curve_constrained(prep: &Prepared, unit: &Unit) -> bool {
    prep.nonneg && unit.k() == 1
}

/// Solve the normal equations at each shift from the sums (correlation-major),
/// constrained as [`curve_constrained`] says.
fn solve_shifts(prep: &Prepared, unit: &Unit, out: &[f64], ns: usize) -> Vec<f64> {
    let (k, j, g) = (unit.k(), prep.j(), unit.groups);
    let constrained = curve_constrained(prep, unit);
    let ncorr = n_corr(k, j, g);
    let thr = thresholds(prep, unit);
    let kc = k * g;
    let dim = kc + j;
    assert!(dim <= MAX_COLUMNS, "{dim} columns");
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    let mut c = vec![0.0; dim];
    let mut active = [false; MAX_COLUMNS];
    let mut scratch = Vec::with_capacity(dim * dim);
    let mut chi2 = Vec::with_capacity(ns);
    let mut row = vec![0.0; ncorr];
    assemble_polynomials(prep, k, g, &mut a, &mut b);
    let poly = (!constrained).then(|| PolyBlock::new(&a, &b, kc, j)).flatten();
    for si in 0..ns {
        for (ci, r) in row.iter_mut().enumerate() {
            *r = out[ci * ns + si];
        }
        if g == 1 {
            // a basis without throughput columns: straight from the sums
            if let Some(fit) = poly
                .as_ref()
                .and_then(|p| p.fit_value_row(&row, k, &thr, &mut scratch))
            {
                chi2.push(prep.fww - fit);
                continue;
            }
        }
        assemble_templates(prep, k, g, &row, &mut a, &mut b);
        active_columns_into(&a, dim, k, kc, &thr, &mut active[..dim]);
        if !constrained {
            // the coefficients are not needed, only bᵀc: from the polynomial
            // block factored once, else (a near-singular template block) by
            // the full solve
            let fit = poly
                .as_ref()
                .and_then(|p| p.fit_value(&a, &b, &active[..kc], &mut scratch))
                .unwrap_or_else(|| normal_fit_value(&a, &b, &active[..dim], &mut scratch));
            chi2.push(prep.fww - fit);
            continue;
        }
        solve_normal_into(&a, &b, &active[..dim], &mut c, &mut scratch);
        if !amplitudes_feasible(&a, &c, k, g) {
            // the least-squares amplitudes break the constraint: the constrained optimum
            let cc = solve_constrained(&a, &b, &active[..dim], k, g, true);
            c.copy_from_slice(&cc);
        }
        let fit: f64 = c.iter().zip(&b).map(|(c, b)| c * b).sum();
        chi2.push(prep.fww - fit);
    }
    chi2
}

/// Most polynomial terms a [`PolyBlock`] holds (the engine allows 10).
const MAX_POLY: usize = 10;

/// The polynomial block of the normal equations, the same at every trial
/// shift, factored once per curve: with the columns ordered polynomials
/// first, bᵀA⁻¹b = |q|² + rᵀS⁻¹r, where L_P L_Pᵀ = P (the polynomial block),
/// q = L_P⁻¹ b_P, W = L_P⁻¹ X (X the template × polynomial block),
/// S = T − WᵀW (T the template block: the Schur complement) and
/// r = b_T − Wᵀq. Per shift only the k × k complement is factored instead of
/// the whole (k + j)² system. Everything is scaled to unit diagonal, as in
/// [`solve_normal_into`], with the same relative pivot test.
struct PolyBlock {
    /// Offset of the polynomial columns (the template columns k·g).
    kc: usize,
    /// Number of polynomials.
    j: usize,
    /// 1/√diagonal of the polynomial block.
    d: [f64; MAX_POLY],
    /// Cholesky factor of the scaled polynomial block (row-major j × j, lower).
    l: [f64; MAX_POLY * MAX_POLY],
    /// L_P⁻¹ (scaled b_P).
    q: [f64; MAX_POLY],
    /// |q|².
    qn: f64,
}

impl PolyBlock {
    /// Factor the polynomial block of `a` (`dim = kc + j`); `None` when there
    /// are too many polynomials or the block is singular.
    fn new(a: &[f64], b: &[f64], kc: usize, j: usize) -> Option<PolyBlock> {
        if j == 0 || j > MAX_POLY {
            return None;
        }
        let dim = kc + j;
        let mut p = PolyBlock {
            kc,
            j,
            d: [0.0; MAX_POLY],
            l: [0.0; MAX_POLY * MAX_POLY],
            q: [0.0; MAX_POLY],
            qn: 0.0,
        };
        for r in 0..j {
            let v = a[(kc + r) * dim + kc + r];
            if v.is_nan() || v <= 0.0 {
                return None;
            }
            p.d[r] = 1.0 / v.sqrt();
        }
        for r in 0..j {
            for c in 0..=r {
                p.l[r * MAX_POLY + c] = a[(kc + r) * dim + kc + c] * p.d[r] * p.d[c];
            }
        }
        for c in 0..j {
            let mut s = p.l[c * MAX_POLY + c];
            for t in 0..c {
                s -= p.l[c * MAX_POLY + t] * p.l[c * MAX_POLY + t];
            }
            if s <= 1e-10 {
                return None;
            }
            let piv = s.sqrt();
            p.l[c * MAX_POLY + c] = piv;
            for r in c + 1..j {
                let mut s = p.l[r * MAX_POLY + c];
                for t in 0..c {
                    s -= p.l[r * MAX_POLY + t] * p.l[c * MAX_POLY + t];
                }
                p.l[r * MAX_POLY + c] = s / piv;
            }
        }
        let mut bp = [0.0; MAX_POLY];
        for r in 0..j {
            bp[r] = b[kc + r] * p.d[r];
        }
        let mut q = [0.0; MAX_POLY];
        p.forward(&bp, &mut q);
        p.q = q;
        p.qn = p.q[..j].iter().map(|v| v * v).sum();
        Some(p)
    }

    /// L_P⁻¹ x into `out`.
    fn forward(&self, x: &[f64; MAX_POLY], out: &mut [f64; MAX_POLY]) {
        for r in 0..self.j {
            let mut s = x[r];
            for t in 0..r {
                s -= self.l[r * MAX_POLY + t] * out[t];
            }
            out[r] = s / self.l[r * MAX_POLY + r];
        }
    }

    /// bᵀA⁻¹b over the active template columns and every polynomial, from
    /// the normal equations `a`, `b` of one shift; `None` when the Schur
    /// complement is (nearly) singular.
    fn fit_value(&self, a: &[f64], b: &[f64], active: &[bool], scratch: &mut Vec<f64>) -> Option<f64> {
        let (kc, dim) = (self.kc, self.kc + self.j);
        let mut idx = [0usize; MAX_COLUMNS];
        let mut ka = 0;
        for t in 0..kc {
            if active[t] && a[t * dim + t] > 0.0 {
                idx[ka] = t;
                ka += 1;
            }
        }
        self.schur(
            &idx[..ka],
            |m, n| a[m * dim + n],
            |t, c| a[t * dim + kc + c],
            |t| b[t],
            scratch,
        )
    }

    /// [`PolyBlock::fit_value`] straight from one shift's template sums
    /// `row` (in the order of [`n_corr`]) for a unit of `k` templates and no
    /// throughput columns, without assembling the normal equations; the
    /// template columns active as [`active_columns_into`] says.
    fn fit_value_row(&self, row: &[f64], k: usize, thr: &[f64], scratch: &mut Vec<f64>) -> Option<f64> {
        let j = self.j;
        // Σ w T_p T_q (p ≤ q, packed), then Σ w P_q T_p (j per template), then Σ w f T_p
        let tt_at = |p: usize, q: usize| {
            let (p, q) = if p <= q { (p, q) } else { (q, p) };
            row[p * k - p * (p + 1) / 2 + q]
        };
        let tt_len = k * (k + 1) / 2;
        let mut idx = [0usize; MAX_COLUMNS];
        let mut ka = 0;
        for t in 0..k {
            let d = tt_at(t, t);
            if d > thr[t] && d > 0.0 {
                idx[ka] = t;
                ka += 1;
            }
        }
        self.schur(
            &idx[..ka],
            tt_at,
            |t, c| row[tt_len + t * j + c],
            |t| row[tt_len + k * j + t],
            scratch,
        )
    }

    /// |q|² + rᵀS⁻¹r over the template columns `idx`, with the template
    /// block, the template × polynomial block and the template part of b
    /// read through `tt`, `tp` and `bt`.
    fn schur(
        &self,
        idx: &[usize],
        tt: impl Fn(usize, usize) -> f64,
        tp: impl Fn(usize, usize) -> f64,
        bt: impl Fn(usize) -> f64,
        scratch: &mut Vec<f64>,
    ) -> Option<f64> {
        let (j, ka) = (self.j, idx.len());
        // scratch (reused between shifts; only what is used is set, this
        // runs at every trial shift): W (ka × MAX_POLY), then S (ka × ka)
        // every entry read below is written first: grow only, never clear
        if scratch.len() < ka * MAX_POLY + ka * ka {
            scratch.resize(ka * MAX_POLY + ka * ka, 0.0);
        }
        let (w, s) = scratch.split_at_mut(ka * MAX_POLY);
        let mut dt = [0.0; MAX_COLUMNS];
        let mut r = [0.0; MAX_COLUMNS];
        for (n, &t) in idx.iter().enumerate() {
            dt[n] = 1.0 / tt(t, t).sqrt();
            let mut x = [0.0; MAX_POLY];
            for c in 0..j {
                x[c] = tp(t, c) * dt[n] * self.d[c];
            }
            let wn: &mut [f64; MAX_POLY] = (&mut w[n * MAX_POLY..(n + 1) * MAX_POLY]).try_into().ok()?;
            self.forward(&x, wn);
            let wq: f64 = wn[..j].iter().zip(&self.q[..j]).map(|(x, y)| x * y).sum();
            r[n] = bt(t) * dt[n] - wq;
        }
        // the Schur complement, factored in place (lower triangle)
        for m in 0..ka {
            for n in 0..=m {
                let (wm, wn) = (
                    &w[m * MAX_POLY..m * MAX_POLY + j],
                    &w[n * MAX_POLY..n * MAX_POLY + j],
                );
                let ww: f64 = wm.iter().zip(wn).map(|(x, y)| x * y).sum();
                s[m * ka + n] = tt(idx[m], idx[n]) * dt[m] * dt[n] - ww;
            }
        }
        let mut y = [0.0; MAX_COLUMNS];
        let mut fit = self.qn;
        for c in 0..ka {
            let mut v = s[c * ka + c];
            for t in 0..c {
                v -= s[c * ka + t] * s[c * ka + t];
            }
            if v <= 1e-10 {
                return None;
            }
            let piv = v.sqrt();
            s[c * ka + c] = piv;
            for m in c + 1..ka {
                let mut v = s[m * ka + c];
                for t in 0..c {
                    v -= s[m * ka + t] * s[c * ka + t];
                }
                s[m * ka + c] = v / piv;
            }
            let mut v = r[c];
            for t in 0..c {
                v -= s[c * ka + t] * y[t];
            }
            y[c] = v / piv;
            fit += y[c] * y[c];
        }
        Some(fit)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_schur_complement_gives_the_full_solve() {
        // a random symmetric positive definite system of 4 template columns
        // and 3 polynomials: bᵀA⁻¹b by the polynomial block factored once
        // equals the full solve's bᵀc, with and without an inactive column
        let (kc, j) = (4, 3);
        let dim = kc + j;
        let mut x = vec![0.0; dim * 20];
        let mut seed = 12345u64;
        for v in x.iter_mut() {
            seed = seed
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            *v = (seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
        }
        let mut a = vec![0.0; dim * dim];
        let mut b = vec![0.0; dim];
        for row in x.chunks(dim) {
            for r in 0..dim {
                b[r] += row[r] * (r as f64 + 0.5);
                for c in 0..dim {
                    a[r * dim + c] += row[r] * row[c];
                }
            }
        }
        let p = PolyBlock::new(&a, &b, kc, j).expect("positive definite");
        for off in [None, Some(2)] {
            let mut active = vec![true; dim];
            if let Some(o) = off {
                active[o] = false;
            }
            let full = normal_fit_value(&a, &b, &active, &mut Vec::new());
            let schur = p.fit_value(&a, &b, &active[..kc], &mut Vec::new()).unwrap();
            assert!(((full - schur) / full).abs() < 1e-12, "{full} vs {schur}");
            // the same from the sums in the fast path's order (n_corr, g = 1),
            // the switched-off column below its threshold
            let mut row = Vec::new();
            for p in 0..kc {
                for q in p..kc {
                    row.push(a[p * dim + q]);
                }
            }
            for t in 0..kc {
                row.extend((0..j).map(|c| a[t * dim + kc + c]));
            }
            row.extend(&b[..kc]);
            assert_eq!(row.len(), n_corr(kc, j, 1));
            let thr: Vec<f64> = (0..kc)
                .map(|t| if active[t] { 0.0 } else { f64::INFINITY })
                .collect();
            let from_row = p.fit_value_row(&row, kc, &thr, &mut Vec::new()).unwrap();
            assert!(((full - from_row) / full).abs() < 1e-12, "{full} vs {from_row}");
        }
    }

    #[test]
    fn nice_lengths_are_smooth_and_minimal() {
        assert_eq!(nice_len(1), 1);
        assert_eq!(nice_len(7), 8);
        assert_eq!(nice_len(11), 12);
        assert_eq!(nice_len(1001), 1024);
        assert_eq!(nice_len(14415), 14580);
    }
}
