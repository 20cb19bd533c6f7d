/*!
The fast path: χ²(z) of one unit at every whole-pixel shift from FFT
cross-correlations.

At shift s, grid pixel i sees template pixel i + c with c = g0 − t0 − s, so
every normal-equation sum that involves a template is a cross-correlation
X(c) = Σ_i D[i] T[i + c] of a data array D (w, w·f or w·P_j) with a template
array T (T_a or the product T_a·T_b):

- Σ w T_a T_b  = corr(w,      T_a·T_b)
- Σ w T_a P_j  = corr(w·P_j,  T_a)
- Σ w T_a f    = corr(w·f,    T_a)

With throughput terms (columns T_a·x, x ∈ [−1, 1] across the grid, i.e.
the template times the first Legendre polynomial) the data arrays also come
multiplied by x and x²: Σ w (T_a x)(T_b x^v) = corr(w·x^(1+v), T_a·T_b),
Σ w (T_a x) P_j = corr(w·x·P_j, T_a), Σ w (T_a x) f = corr(w·x·f, T_a).

The polynomial-only sums do not depend on z (templates are zero outside
their coverage and χ² always runs over every good pixel), so they come from
[`Prepared`]. With L ≥ n + m − 1, X(c) = IFFT(conj(D̂)·T̂)[c mod L] / L
without wrap-around for every overlapping lag −n < c < m. Template
transforms are cached per (unit, L) in the engine; two real correlations
share one complex inverse FFT (real and imaginary part).
*/
// Index loops here mirror the sums of the normal equations term by term.
#![allow(clippy::needless_range_loop)]
use super::prep::{solve_normal, Prepared};
use super::reference::{active_columns, thresholds};
use super::units::Unit;
use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use std::collections::HashMap;
use std::sync::{Arc, Mutex, RwLock};

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

/// Transforms of one unit's templates and their pairwise products at one L.
struct UnitTransforms {
    t: Vec<Vec<C>>,
    tt: Vec<Vec<C>>,
}

/// FFT plans and cached template transforms (shared by all threads).
#[derive(Default)]
pub struct FftCache {
    plans: Mutex<PlanMap>,
    planner: Mutex<Option<FftPlanner<f64>>>,
    units: RwLock<HashMap<(usize, usize), Arc<UnitTransforms>>>,
}

impl std::fmt::Debug for FftCache {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("FftCache")
    }
}

/// Most (unit, L) transform sets kept before the cache is emptied.
const MAX_CACHED: usize = 64;

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

    fn unit_transforms(&self, key: usize, unit: &Unit, len: usize) -> Arc<UnitTransforms> {
        if let Some(u) = self
            .units
            .read()
            .unwrap_or_else(|e| e.into_inner())
            .get(&(key, len))
        {
            return u.clone();
        }
        let k = unit.k();
        let t = unit.t.iter().map(|a| self.forward_real(a, len)).collect();
        let mut tt = Vec::with_capacity(k * (k + 1) / 2);
        for a in 0..k {
            for b in a..k {
                let prod: Vec<f64> = unit.t[a].iter().zip(&unit.t[b]).map(|(x, y)| x * y).collect();
                tt.push(self.forward_real(&prod, len));
            }
        }
        let u = Arc::new(UnitTransforms { t, tt });
        let mut map = self.units.write().unwrap_or_else(|e| e.into_inner());
        if map.len() >= MAX_CACHED {
            map.clear();
        }
        map.insert((key, len), u.clone());
        u
    }
}

/// Conjugated transforms of the data arrays at one L: w·x^e (e < 2g − 1),
/// w·x^u·P_j and w·f·x^u (u < g), g = columns per template.
pub struct DataTransforms {
    w: Vec<Vec<C>>,
    wf: Vec<Vec<C>>,
    wp: Vec<Vec<Vec<C>>>,
}

/// Data transforms per FFT length, made lazily for one spectrum.
#[derive(Default)]
pub struct DataCache {
    by_len: HashMap<usize, DataTransforms>,
}

impl DataCache {
    fn get(&mut self, cache: &FftCache, prep: &Prepared, len: usize) -> &DataTransforms {
        self.by_len.entry(len).or_insert_with(|| {
            let conj = |v: Vec<C>| v.into_iter().map(|c| c.conj()).collect::<Vec<_>>();
            let g = prep.groups.max(1);
            // w·x^e for e = 0 .. 2g − 2
            let mut wx: Vec<Vec<f64>> = vec![prep.w.clone()];
            for _ in 1..2 * g - 1 {
                let next: Vec<f64> = wx[wx.len() - 1].iter().zip(&prep.x).map(|(a, x)| a * x).collect();
                wx.push(next);
            }
            let tr = |v: &[f64]| conj(cache.forward_real(v, len));
            DataTransforms {
                w: wx.iter().map(|v| tr(v)).collect(),
                wf: wx[..g]
                    .iter()
                    .map(|v| tr(&v.iter().zip(&prep.flux).map(|(a, f)| a * f).collect::<Vec<_>>()))
                    .collect(),
                wp: wx[..g]
                    .iter()
                    .map(|v| {
                        prep.p
                            .iter()
                            .map(|p| tr(&v.iter().zip(p).map(|(a, p)| a * p).collect::<Vec<_>>()))
                            .collect()
                    })
                    .collect(),
            }
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
}

/// Number of correlations of a unit with `k` templates, `j` polynomials and
/// `g` columns per template.
fn n_corr(k: usize, j: usize, g: usize) -> usize {
    k * (k + 1) / 2 * (2 * g - 1) + k * g * j + k * g
}

/// χ² of `unit` at every shift `s_lo..=s_hi` by the fast path.
/// `key` identifies the unit in the cache.
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
) -> Vec<f64> {
    let n = prep.grid.n;
    let m = unit.m();
    let (k, j) = (unit.k(), prep.j());
    let ns = (s_hi - s_lo + 1).max(0) as usize;
    let len = nice_len(n + m - 1);
    let use_fft = match plan {
        CorrPlan::Fft => true,
        CorrPlan::Direct => false,
        CorrPlan::Auto => {
            // measured costs (release build): a direct multiply-add at a lag
            // ≈ 1.3 ns; a complex FFT ≈ 0.75 ns · L log2 L, one per pair of
            // correlations (five more for the data, shared by all units)
            let direct = 1.3 * (ns * prep.n_good()) as f64 * n_corr(k, j, prep.groups.max(1)) as f64;
            let fft =
                0.75 * len as f64 * (len as f64).log2() * n_corr(k, j, prep.groups.max(1)).div_ceil(2) as f64;
            fft < direct
        }
    };
    let out = if !use_fft {
        sums_direct(prep, unit, s_lo, ns)
    } else {
        sums_fft(cache, data, prep, key, unit, s_lo, ns, len)
    };
    solve_shifts(prep, unit, &out, ns)
}

/// The template sums at each shift by FFT: `out[si * ncorr + ci]`.
#[allow(clippy::too_many_arguments)]
fn sums_fft(
    cache: &FftCache,
    data: &mut DataCache,
    prep: &Prepared,
    key: usize,
    unit: &Unit,
    s_lo: i64,
    ns: usize,
    len: usize,
) -> Vec<f64> {
    let n = prep.grid.n;
    let m = unit.m();
    let (k, j) = (unit.k(), prep.j());
    let ut = cache.unit_transforms(key, unit, len);
    let dt = data.get(cache, prep, len);
    // the list of correlations: (data spectrum, template spectrum)
    let g = prep.groups.max(1);
    let mut pairs: Vec<(&[C], &[C])> = Vec::new();
    for tt in &ut.tt {
        for e in 0..2 * g - 1 {
            pairs.push((&dt.w[e], tt));
        }
    }
    for a in 0..k {
        for u in 0..g {
            for q in 0..j {
                pairs.push((&dt.wp[u][q], &ut.t[a]));
            }
        }
    }
    for a in 0..k {
        for u in 0..g {
            pairs.push((&dt.wf[u], &ut.t[a]));
        }
    }
    let ncorr = pairs.len();
    let mut out = vec![0.0; ns * ncorr];
    let inv = cache.plan(len, false);
    let scale = 1.0 / len as f64;
    let mut buf = vec![C::new(0.0, 0.0); len];
    let lagpos = |s: i64| -> Option<usize> {
        let c = prep.g0 - unit.t0 - s;
        (c > -(n as i64) && c < m as i64).then(|| c.rem_euclid(len as i64) as usize)
    };
    for (ci, chunk) in pairs.chunks(2).enumerate() {
        let (d1, t1) = chunk[0];
        let second = chunk.get(1);
        for (x, b) in buf.iter_mut().enumerate() {
            let mut v = d1[x] * t1[x];
            if let Some((d2, t2)) = second {
                // i·(d2·t2): both correlations are real, so they come back as Re and Im
                let p = d2[x] * t2[x];
                v += C::new(-p.im, p.re);
            }
            *b = v;
        }
        inv.process(&mut buf);
        for si in 0..ns {
            if let Some(pos) = lagpos(s_lo + si as i64) {
                out[si * ncorr + 2 * ci] = buf[pos].re * scale;
                if second.is_some() {
                    out[si * ncorr + 2 * ci + 1] = buf[pos].im * scale;
                }
            }
        }
    }
    out
}

/// The template sums at each shift by direct loops over the good pixels.
fn sums_direct(prep: &Prepared, unit: &Unit, s_lo: i64, ns: usize) -> Vec<f64> {
    let m = unit.m() as i64;
    let (k, j) = (unit.k(), prep.j());
    let g = prep.groups.max(1);
    let ncorr = n_corr(k, j, g);
    let mut out = vec![0.0; ns * ncorr];
    let mut tv = vec![0.0; k];
    let mut xp = vec![1.0; 2 * g - 1];
    for si in 0..ns {
        let c = prep.g0 - unit.t0 - (s_lo + si as i64);
        let row = &mut out[si * ncorr..(si + 1) * ncorr];
        for &i in &prep.good {
            let r = i as i64 + c;
            if r < 0 || r >= m {
                continue;
            }
            for (a, t) in tv.iter_mut().enumerate() {
                *t = unit.t[a][r as usize];
            }
            for e in 1..xp.len() {
                xp[e] = xp[e - 1] * prep.x[i];
            }
            let (w, f) = (prep.w[i], prep.flux[i]);
            let mut ci = 0;
            for a in 0..k {
                for b in a..k {
                    for x in &xp {
                        row[ci] += w * x * tv[a] * tv[b];
                        ci += 1;
                    }
                }
            }
            for &t in &tv {
                for x in &xp[..g] {
                    for q in 0..j {
                        row[ci] += w * x * t * prep.p[q][i];
                        ci += 1;
                    }
                }
            }
            for &t in &tv {
                for x in &xp[..g] {
                    row[ci] += w * x * t * f;
                    ci += 1;
                }
            }
        }
    }
    out
}

/// Assemble and solve the normal equations at each shift from the sums.
/// Column u·k + a is T_a·x^u; then the polynomials.
fn solve_shifts(prep: &Prepared, unit: &Unit, out: &[f64], ns: usize) -> Vec<f64> {
    let (k, j) = (unit.k(), prep.j());
    let g = prep.groups.max(1);
    let ncorr = n_corr(k, j, g);
    let thr = thresholds(prep, unit);
    let kc = k * g;
    let dim = kc + j;
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    let mut chi2 = Vec::with_capacity(ns);
    for si in 0..ns {
        let row = &out[si * ncorr..(si + 1) * ncorr];
        let mut ci = 0;
        for p in 0..k {
            for q in p..k {
                // Σ w x^e T_p T_q fills every (u, v) with u + v = e
                for e in 0..2 * g - 1 {
                    for u in 0..g {
                        if e < u || e - u >= g {
                            continue;
                        }
                        let v = e - u;
                        let (r, c) = (u * k + p, v * k + q);
                        a[r * dim + c] = row[ci];
                        a[c * dim + r] = row[ci];
                    }
                    ci += 1;
                }
            }
        }
        for p in 0..k {
            for u in 0..g {
                for q in 0..j {
                    let r = u * k + p;
                    a[r * dim + kc + q] = row[ci];
                    a[(kc + q) * dim + r] = row[ci];
                    ci += 1;
                }
            }
        }
        for p in 0..k {
            for u in 0..g {
                b[u * k + p] = row[ci];
                ci += 1;
            }
        }
        for p in 0..j {
            b[kc + p] = prep.pf[p];
            for q in 0..j {
                a[(kc + p) * dim + kc + q] = prep.pp[p * j + q];
            }
        }
        let active = active_columns(&a, dim, k, kc, &thr);
        let c = solve_normal(&a, &b, &active);
        let fit: f64 = c.iter().zip(&b).map(|(c, b)| c * b).sum();
        chi2.push(prep.fww - fit);
    }
    chi2
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_lengths_are_smooth_and_minimal() {
        assert_eq!(nice_len(1), 1);
        assert_eq!(nice_len(7), 8);
        assert_eq!(nice_len(11), 12);
        assert_eq!(nice_len(1001), 1024);
        assert_eq!(nice_len(14415), 14580);
    }
}
