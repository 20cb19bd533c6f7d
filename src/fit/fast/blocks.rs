/*!
Partitioned correlation: the template sums of a unit over a narrow range of
lags (the stars' velocity window) without a transform of the whole spectrum.

A correlation X(c) = Σ_i D[i] T[i + c] wanted only at M lags
c_lo ≤ c < c_lo + M splits over data blocks of B pixels: block γ holds
D[γB + u], u < B, and sees the template segment S_γ[v] = T[γB + c_lo + v],
v < Q, so that X(c_lo + e) = Σ_γ Σ_u D_γ[u] S_γ[u + e]. With Q ≥ B + M − 1
the circular correlation of length Q holds every lag e < M free of
wrap-around (u + e ≤ B + M − 2 < Q), and since the inverse transform is
linear the blocks' products are summed in the frequency domain first:

  X(c_lo + e) = IDFT_Q( Σ_γ conj(DFT D_γ) · DFT S_γ )[e].

One inverse transform of length Q (a few hundred) per pair of correlations
replaces one of length L (the whole spectrum, thousands), and the products
stay about as many (blocks · Q ≈ L · Q/B). This is the uniformly partitioned
form of overlap-save (common practice in long convolutions).

The data blocks start at multiples of B, so one set serves every unit of a
spectrum; the template segments then start at c_lo mod B plus multiples of
B, and are cached per (unit, partition, that phase).
*/
use super::{FftCache, Scaled, C};
use crate::fit::prep::Prepared;
use crate::fit::units::Unit;
use std::sync::Arc;

/// Data blocks of `b` pixels, transforms of length `q` ≥ b + lags − 1.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub(super) struct Partition {
    pub(super) b: usize,
    pub(super) q: usize,
}

/// Modelled cost (ns, release build) of one complex multiply-add of the
/// summed products, per element and pair of correlations; see
/// [`Partition::cost`].
pub(super) const NS_PER_PRODUCT: f64 = 0.6;

/// Modelled cost (ns) of a complex FFT per L·log2 L, as in `chi2_curve`.
pub(super) const NS_PER_FFT_OP: f64 = 0.5;

impl Partition {
    /// Data blocks over `n` pixels.
    pub(super) fn blocks(&self, n: usize) -> usize {
        n.div_ceil(self.b)
    }

    /// Modelled time (ns) of one pair of correlations over `n` pixels: the
    /// summed products of every block and one inverse transform.
    pub(super) fn cost(&self, n: usize) -> f64 {
        let q = self.q as f64;
        NS_PER_PRODUCT * (self.blocks(n) as f64) * q + NS_PER_FFT_OP * q * q.log2().max(1.0)
    }

    /// The partition of least [`Partition::cost`] for `lags` wanted lags
    /// over `n` pixels, among transform lengths 2^a·3^b·5^c.
    pub(super) fn choose(n: usize, lags: usize) -> Partition {
        let (n, lags) = (n.max(1), lags.max(1));
        // past Q = n + lags − 1 one block holds everything: no gain
        let top = super::nice_len(n + lags);
        let mut best: Option<(f64, Partition)> = None;
        let mut p2 = 1usize;
        while p2 <= top {
            let mut p3 = p2;
            while p3 <= top {
                let mut q = p3;
                while q <= top {
                    if q >= lags {
                        let p = Partition { b: q + 1 - lags, q };
                        let c = p.cost(n);
                        if best.is_none_or(|(bc, _)| c < bc) {
                            best = Some((c, p));
                        }
                    }
                    q *= 5;
                }
                p3 *= 3;
            }
            p2 *= 2;
        }
        best.map_or(Partition { b: 1, q: lags }, |(_, p)| p)
    }
}

/// Forward transforms of the segments of real arrays, each array scaled to
/// unit L2 norm (see [`Scaled`]; an array of zeros stays as it is): segment
/// j of an array holds its values at indices `start(j) .. start(j) + width`
/// (zero outside the array) zero-padded to `q`, and sits at `j·q` of the
/// result. Two arrays share one complex FFT (as `forward_real_pair`).
fn forward_segments(
    cache: &FftCache,
    arrays: &[&[f64]],
    count: usize,
    start: impl Fn(usize) -> i64,
    width: usize,
    q: usize,
) -> Vec<Scaled> {
    let plan = cache.plan(q, true);
    let total = count * q;
    let mut out = Vec::with_capacity(arrays.len());
    let mut buf = vec![C::new(0.0, 0.0); total];
    let mut scratch = vec![C::new(0.0, 0.0); plan.get_inplace_scratch_len()];
    for pair in arrays.chunks(2) {
        let norms: Vec<f64> = pair
            .iter()
            .map(|a| {
                let norm = a.iter().map(|v| v * v).sum::<f64>().sqrt();
                if norm > 0.0 && norm.is_finite() {
                    norm
                } else {
                    1.0
                }
            })
            .collect();
        buf.fill(C::new(0.0, 0.0));
        for (p, (a, norm)) in pair.iter().zip(&norms).enumerate() {
            let len = a.len() as i64;
            for j in 0..count {
                let s = start(j);
                let (lo, hi) = (s.max(0), (s + width as i64).min(len));
                for r in lo..hi {
                    let v = a[r as usize] / norm;
                    let o = &mut buf[j * q + (r - s) as usize];
                    if p == 0 {
                        o.re = v;
                    } else {
                        o.im = v;
                    }
                }
            }
        }
        plan.process_with_scratch(&mut buf, &mut scratch);
        if pair.len() == 1 {
            out.push(Scaled {
                x: buf.clone(),
                norm: norms[0],
            });
            continue;
        }
        // X[k] = (Z[k] + conj Z[−k])/2, Y[k] = (Z[k] − conj Z[−k])/(2i), per segment
        let mut fx = Vec::with_capacity(total);
        let mut fy = Vec::with_capacity(total);
        for seg in buf.chunks(q) {
            for k in 0..q {
                let (z, zc) = (seg[k], seg[(q - k) % q].conj());
                fx.push((z + zc) * 0.5);
                let d = (z - zc) * 0.5;
                fy.push(C::new(d.im, -d.re));
            }
        }
        out.push(Scaled {
            x: fx,
            norm: norms[0],
        });
        out.push(Scaled {
            x: fy,
            norm: norms[1],
        });
    }
    out
}

/// Conjugated transforms of one spectrum's data arrays cut in blocks of a
/// [`Partition`] (block γ at pixels γB .. γB + B).
pub(super) struct DataBlocks {
    wp: Vec<Scaled>,
    wf: Vec<Scaled>,
    count: usize,
}

impl DataBlocks {
    /// From the data arrays w·P_q (`wp`) and w·f·x^u (`wf`) of `n` pixels.
    pub(super) fn new(
        cache: &FftCache,
        wp: &[&[f64]],
        wf: &[&[f64]],
        n: usize,
        part: Partition,
    ) -> DataBlocks {
        let count = part.blocks(n);
        let start = |j: usize| (j * part.b) as i64;
        DataBlocks {
            wp: super::conjugated(forward_segments(cache, wp, count, start, part.b, part.q)),
            wf: super::conjugated(forward_segments(cache, wf, count, start, part.b, part.q)),
            count,
        }
    }

    /// Of a prepared spectrum.
    pub(super) fn of(cache: &FftCache, prep: &Prepared, part: Partition) -> DataBlocks {
        let wl: Vec<&[f64]> = prep.wl.iter().map(Vec::as_slice).collect();
        let wfx: Vec<&[f64]> = prep.wfx.iter().map(Vec::as_slice).collect();
        DataBlocks::new(cache, &wl, &wfx, prep.grid.n, part)
    }
}

/// Transforms of one unit's template segments (and of the products T_a·T_b)
/// at one partition and phase: segment β starts at template pixel βB + phase
/// and sits at (β − first)·Q.
pub(super) struct UnitBlocks {
    first: i64,
    count: usize,
    t: Vec<Scaled>,
    tt: Vec<Scaled>,
}

impl UnitBlocks {
    /// From template arrays `t` (all of one length).
    pub(super) fn new(cache: &FftCache, t: &[&[f64]], part: Partition, phase: usize) -> UnitBlocks {
        let m = t.first().map_or(0, |a| a.len()) as i64;
        let (b, q) = (part.b as i64, part.q as i64);
        let phase = phase as i64;
        // segments [βB + phase, βB + phase + Q) that meet [0, m)
        let first = (-q - phase).div_euclid(b) + 1;
        let last = (m - 1 - phase).div_euclid(b);
        let count = (last - first + 1).max(0) as usize;
        let start = |j: usize| (first + j as i64) * b + phase;
        let prods = super::template_products(t);
        let prods: Vec<&[f64]> = prods.iter().map(Vec::as_slice).collect();
        UnitBlocks {
            first,
            count,
            t: forward_segments(cache, t, count, start, part.q, part.q),
            tt: forward_segments(cache, &prods, count, start, part.q, part.q),
        }
    }
}

/// The correlations `pairs` (data array, template array: indices into the
/// data's w·P_q then w·f·x^u, and into the templates then their products) of
/// data of `n` pixels and templates of `m` at the lags c0 − si, si < ns, by
/// partitioned correlation: `out[ci · ns + si]` (correlation-major), zero
/// where the lag leaves no overlap. `part.q ≥ part.b + ns − 1`, and `ub`
/// made at the phase (c0 − ns + 1) mod B.
#[allow(clippy::too_many_arguments)]
pub(super) fn sums_blocks(
    cache: &FftCache,
    data: &DataBlocks,
    ub: &UnitBlocks,
    pairs: &[(usize, usize)],
    (n, m): (usize, usize),
    c0: i64,
    ns: usize,
    part: Partition,
) -> Vec<f64> {
    assert!(part.q + 1 >= part.b + ns, "{part:?} cannot hold {ns} lags");
    let (n, m) = (n as i64, m as i64);
    let (q, b) = (part.q, part.b as i64);
    // the lowest wanted lag, at si = ns − 1
    let c_lo = c0 - (ns as i64 - 1);
    // data block γ meets template segment β = γ + c_lo div B
    let dbeta = c_lo.div_euclid(b);
    let data_of = |i: usize| {
        if i < data.wp.len() {
            &data.wp[i]
        } else {
            &data.wf[i - data.wp.len()]
        }
    };
    let tmpl_of = |i: usize| {
        if i < ub.t.len() {
            &ub.t[i]
        } else {
            &ub.tt[i - ub.t.len()]
        }
    };
    let nchunk = pairs.len().div_ceil(2);
    let mut acc = vec![C::new(0.0, 0.0); nchunk * q];
    for g in 0..data.count {
        let beta = g as i64 + dbeta;
        if beta < ub.first || beta >= ub.first + ub.count as i64 {
            continue; // the template is zero over this block's lags
        }
        let (dof, tof) = (g * q, (beta - ub.first) as usize * q);
        for (chunk, a) in pairs.chunks(2).zip(acc.chunks_mut(q)) {
            let d1 = &data_of(chunk[0].0).x[dof..dof + q];
            let t1 = &tmpl_of(chunk[0].1).x[tof..tof + q];
            match chunk.get(1) {
                // one template for both: t·(d1 + i·d2)
                Some(&(d2, t2)) if t2 == chunk[0].1 => {
                    let d2 = &data_of(d2).x[dof..dof + q];
                    for (o, ((a1, a2), t)) in a.iter_mut().zip(d1.iter().zip(d2).zip(t1)) {
                        *o += t * C::new(a1.re - a2.im, a1.im + a2.re);
                    }
                }
                // d1·t1 + i·(d2·t2)
                Some(&(d2, t2)) => {
                    let (d2, t2) = (&data_of(d2).x[dof..dof + q], &tmpl_of(t2).x[tof..tof + q]);
                    let terms = d1.iter().zip(t1).zip(d2.iter().zip(t2));
                    for (o, ((a1, b1), (a2, b2))) in a.iter_mut().zip(terms) {
                        let p = a2 * b2;
                        *o += a1 * b1 + C::new(-p.im, p.re);
                    }
                }
                None => {
                    for (o, (a1, b1)) in a.iter_mut().zip(d1.iter().zip(t1)) {
                        *o += a1 * b1;
                    }
                }
            }
        }
    }
    // every chunk's inverse transform in one call
    let inv = cache.plan(q, false);
    let mut scratch = vec![C::new(0.0, 0.0); inv.get_inplace_scratch_len()];
    inv.process_with_scratch(&mut acc, &mut scratch);
    // shifts whose lag overlaps the data (c0 − si in (−n, m)); zero outside
    let si_lo = (c0 - m + 1).clamp(0, ns as i64) as usize;
    let si_hi = (c0 + n).clamp(si_lo as i64, ns as i64) as usize;
    let scale = 1.0 / q as f64;
    let mut out = Vec::with_capacity(ns * pairs.len());
    for (ci, &(d, t)) in pairs.iter().enumerate() {
        let y = &acc[(ci / 2) * q..(ci / 2 + 1) * q];
        let scale = scale * data_of(d).norm * tmpl_of(t).norm;
        out.resize(out.len() + si_lo, 0.0);
        // shift si reads lag e = c0 − si − c_lo = ns − 1 − si
        out.extend((si_lo..si_hi).map(|si| {
            let v = y[ns - 1 - si];
            scale * if ci % 2 == 0 { v.re } else { v.im }
        }));
        out.resize(out.len() + ns - si_hi, 0.0);
    }
    out
}

/// Cache key of a unit's segment transforms: (unit, partition, phase).
pub(super) type BlockKey = (usize, Partition, usize);

impl FftCache {
    pub(super) fn unit_blocks(
        &self,
        key: usize,
        unit: &Unit,
        part: Partition,
        phase: usize,
    ) -> Arc<UnitBlocks> {
        let ck = (key, part, phase);
        if let Some(u) = self.blocks.read().unwrap_or_else(|e| e.into_inner()).get(&ck) {
            return u.clone();
        }
        let t: Vec<&[f64]> = unit.t.iter().map(Vec::as_slice).collect();
        let u = Arc::new(UnitBlocks::new(self, &t, part, phase));
        let mut map = self.blocks.write().unwrap_or_else(|e| e.into_inner());
        if map.len() >= super::MAX_CACHED {
            map.clear();
        }
        map.insert(ck, u.clone());
        u
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Uniform numbers in [−0.5, 0.5) from a fixed seed (a 64-bit LCG).
    fn noise(seed: &mut u64, len: usize) -> Vec<f64> {
        (0..len)
            .map(|_| {
                *seed = seed
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                (*seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5
            })
            .collect()
    }

    #[test]
    fn chosen_partitions_hold_the_lags_without_wrap() {
        for (n, lags) in [(4000, 44), (4000, 1), (300, 250), (1, 1), (5000, 600)] {
            let p = Partition::choose(n, lags);
            assert!(p.b >= 1 && p.q + 1 >= p.b + lags, "{n} {lags}: {p:?}");
            assert_eq!(super::super::nice_len(p.q), p.q, "{p:?} not a fast length");
        }
        // a narrow window over a long spectrum: transforms far shorter than it
        let p = Partition::choose(4000, 44);
        assert!(p.q < 1024, "{p:?}");
    }

    /// Partitioned correlations of random arrays equal the direct sums
    /// Σ_i d[i]·t[i + c] and the correlation by one full-length rustfft
    /// inverse (conj(D)·T), to 1e-12 of ‖d‖·‖t‖ (the scale the transforms'
    /// round-off is relative to), at lags on both sides of zero and partly
    /// off the ends, for the chosen partition and forced small ones.
    #[test]
    fn partitioned_correlation_equals_the_full_transform_and_direct_sums() {
        let mut seed = 2024u64;
        let cache = FftCache::default();
        let (n, m) = (500usize, 700usize);
        // two data arrays of each kind, one template: pairs of every shape
        let wp: Vec<Vec<f64>> = (0..3).map(|_| noise(&mut seed, n)).collect();
        let wf: Vec<Vec<f64>> = (0..2).map(|_| noise(&mut seed, n)).collect();
        let t: Vec<Vec<f64>> = vec![noise(&mut seed, m)];
        let tt: Vec<f64> = t[0].iter().map(|v| v * v).collect();
        let (wps, wfs): (Vec<&[f64]>, Vec<&[f64]>) = (
            wp.iter().map(Vec::as_slice).collect(),
            wf.iter().map(Vec::as_slice).collect(),
        );
        let ts: Vec<&[f64]> = t.iter().map(Vec::as_slice).collect();
        // (data, template): data 0..3 are wp, 3..5 wf; template 0 is t, 1 is t·t
        let pairs = [(0, 1), (1, 1), (0, 0), (3, 0), (4, 0)];
        let arrays = |d: usize, tm: usize| -> (&[f64], &[f64]) {
            let d = if d < 3 { &wp[d] } else { &wf[d - 3] };
            (d, if tm == 0 { &t[0] } else { &tt })
        };
        // full-length correlation by one rustfft inverse, L ≥ n + m (no wrap)
        let len = super::super::nice_len(n + m);
        let full = |d: &[f64], tm: &[f64], c: i64| -> f64 {
            let fd = cache.forward_real(d, len);
            let ft = cache.forward_real(tm, len);
            let mut x: Vec<C> = fd.iter().zip(&ft).map(|(a, b)| a.conj() * b).collect();
            cache.plan(len, false).process(&mut x);
            x[c.rem_euclid(len as i64) as usize].re / len as f64
        };
        let direct = |d: &[f64], tm: &[f64], c: i64| -> f64 {
            (0..n as i64)
                .filter(|&i| i + c >= 0 && i + c < m as i64)
                .map(|i| d[i as usize] * tm[(i + c) as usize])
                .sum()
        };
        let norm = |a: &[f64]| a.iter().map(|v| v * v).sum::<f64>().sqrt();
        for (c0, ns) in [(40i64, 30usize), (10, 30), (650, 60), (-480, 25), (300, 1)] {
            let chosen = Partition::choose(n, ns);
            for part in [
                chosen,
                Partition { b: 7, q: 7 + ns + 2 },
                Partition {
                    b: 64,
                    q: 64 + ns - 1,
                },
            ] {
                let phase = (c0 - ns as i64 + 1).rem_euclid(part.b as i64) as usize;
                let data = DataBlocks::new(&cache, &wps, &wfs, n, part);
                let ub = UnitBlocks::new(&cache, &ts, part, phase);
                let out = sums_blocks(&cache, &data, &ub, &pairs, (n, m), c0, ns, part);
                assert_eq!(out.len(), pairs.len() * ns);
                let mut checked = 0;
                for (ci, &(d, tm)) in pairs.iter().enumerate() {
                    let (da, ta) = arrays(d, tm);
                    let scale = norm(da) * norm(ta);
                    for si in 0..ns {
                        let c = c0 - si as i64;
                        let got = out[ci * ns + si];
                        let want = direct(da, ta, c);
                        // the full transform holds the lags with overlap, −n < c < m
                        let overlap = c > -(n as i64) && c < m as i64;
                        let by_fft = if overlap { full(da, ta, c) } else { 0.0 };
                        assert!(
                            (got - want).abs() <= 1e-12 * scale && (got - by_fft).abs() <= 1e-12 * scale,
                            "c0 {c0} {part:?} pair {ci} lag {c}: partitioned {got}, direct {want}, full FFT {by_fft}"
                        );
                        checked += usize::from(want.abs() > 0.0);
                    }
                }
                // the lags were not all off the ends (the comparison had substance)
                assert!(checked > 0, "c0 {c0}: no overlapping lag");
            }
        }
    }
}
