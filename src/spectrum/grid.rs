/*!
Grids uniform in log10 λ and flux-conserving resampling onto them.

On such a grid a redshift is a shift by whole pixels: log10(λ_obs) =
log10(λ_rest) + log10(1+z). The resampler averages the input pixels that
overlap each output pixel, weighted by overlap length, using good pixels only,
and propagates the variance: with weights w_i = overlap_i / Σ overlap,
var_out = Σ w_i² var_i (common practice for drizzle-free rebinning). Output
pixels less than half covered by good input are bad.

When the output grid is finer than the input, neighbouring output pixels share
input pixels and their noise is correlated; the propagated ivar then counts the
same information more than once. [`Resampled::correlation`] gives, per output
pixel, the sum of its noise correlation coefficients with every output pixel
(itself included): dividing the ivar by it leaves the information of a model
that is smooth over a few pixels as the input had it (two output pixels per
input pixel: 2; output pixels that each average whole input pixels: 1).
[`Resampled::oversampling`] is the resulting mean factor.
*/
use super::Spectrum;
use serde::{Deserialize, Serialize};

/// A wavelength grid uniform in log10 λ: pixel i is centred at
/// `10^(loglam0 + i·dloglam)` Å.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LogGrid {
    /// log10 of the first pixel centre in Å.
    pub loglam0: f64,
    /// Step in log10 λ (default engine step 1e-4, about 69 km/s).
    pub dloglam: f64,
    /// Number of pixels.
    pub n: usize,
}

impl LogGrid {
    /// A grid on the given step whose pixel centres are multiples of the step
    /// (so that grids for different spectra align pixel for pixel) and which
    /// covers `[lam_min, lam_max]` Å.
    pub fn covering(lam_min: f64, lam_max: f64, dloglam: f64) -> LogGrid {
        let i0 = (lam_min.log10() / dloglam).floor();
        let i1 = (lam_max.log10() / dloglam).ceil();
        LogGrid {
            loglam0: i0 * dloglam,
            dloglam,
            n: (i1 - i0) as usize + 1,
        }
    }

    /// log10 λ of pixel centre `i`.
    pub fn loglam(&self, i: usize) -> f64 {
        self.loglam0 + i as f64 * self.dloglam
    }

    /// Wavelength (Å) of pixel centre `i`.
    pub fn wave(&self, i: usize) -> f64 {
        10f64.powf(self.loglam(i))
    }

    /// All pixel-centre wavelengths.
    pub fn waves(&self) -> Vec<f64> {
        (0..self.n).map(|i| self.wave(i)).collect()
    }

    /// Integer index of this grid's first pixel in units of the step
    /// (`loglam0 / dloglam`, rounded); equal steps make grids comparable.
    pub fn index0(&self) -> i64 {
        (self.loglam0 / self.dloglam).round() as i64
    }
}

/// A spectrum resampled onto a [`LogGrid`].
#[derive(Debug, Clone, PartialEq)]
pub struct Resampled {
    /// The grid.
    pub grid: LogGrid,
    /// Flux per output pixel (0 where bad).
    pub flux: Vec<f64>,
    /// Inverse variance per output pixel (0 where bad).
    pub ivar: Vec<f64>,
    /// Good output pixels per independent pixel: their number over
    /// Σ 1/[`correlation`](Resampled::correlation) (≥ 1; > 1 when upsampling).
    pub oversampling: f64,
    /// Per output pixel, Σ_k ρ(j, k) over the output pixels k whose noise is
    /// correlated with pixel j's (ρ(j, j) = 1 included); 1 where bad.
    pub correlation: Vec<f64>,
}

/// A step more than this many times the smallest step around a pixel is a
/// gap in the wavelength coverage (pixels absent, e.g. a chip gap).
const GAP_FACTOR: f64 = 2.0;

/// Pixel edges (low, high) of a strictly increasing set of centres: halfway
/// to each neighbour, half-steps mirrored at both ends — and mirrored at a
/// gap too, so that a pixel beside absent pixels keeps its own width instead
/// of stretching over half the gap (absent pixels are not interpolated). A
/// regular grid (steps changing slowly) is not affected.
fn edges(centres: &[f64]) -> Vec<(f64, f64)> {
    let n = centres.len();
    let step = |k: usize| centres[k + 1] - centres[k];
    (0..n)
        .map(|i| {
            // the smallest step among the two on each side of the pixel
            let local = [i.checked_sub(2), i.checked_sub(1), Some(i), Some(i + 1)]
                .into_iter()
                .flatten()
                .filter(|&k| k + 1 < n)
                .map(step)
                .fold(f64::INFINITY, f64::min);
            let cap = |x: f64| if x > GAP_FACTOR * local { local } else { x };
            let left = (i > 0).then(|| cap(step(i - 1)));
            let right = (i + 1 < n).then(|| cap(step(i)));
            let (l, r) = match (left, right) {
                (Some(l), Some(r)) => (l, r),
                (Some(l), None) => (l, l),
                (None, Some(r)) => (r, r),
                (None, None) => (0.0, 0.0),
            };
            (centres[i] - 0.5 * l, centres[i] + 0.5 * r)
        })
        .collect()
}

impl Spectrum {
    /// The log-λ grid on step `dloglam` that covers this spectrum.
    pub fn log_grid(&self, dloglam: f64) -> LogGrid {
        let w = self.wave();
        LogGrid::covering(w[0], w[w.len() - 1], dloglam)
    }

    /// Resample onto `grid` (see the module docs for the method).
    pub fn resample(&self, grid: &LogGrid) -> Resampled {
        let lw: Vec<f64> = self.wave().iter().map(|w| w.log10()).collect();
        let ein = edges(&lw);
        let n_out = grid.n;
        let half = 0.5 * grid.dloglam;
        let (flux, ivar, good) = (self.flux(), self.ivar(), self.good());
        // output pixels j overlapping good input pixel i, with the overlap lengths
        let overlaps = |i: usize, out: &mut Vec<(usize, f64)>| {
            out.clear();
            let (a, b) = ein[i];
            // output pixels whose span [c-half, c+half] overlaps [a, b]
            let j_lo = ((a - grid.loglam0 + half) / grid.dloglam).floor().max(0.0) as usize;
            let j_hi_f = ((b - grid.loglam0 + half) / grid.dloglam).floor();
            if j_hi_f < 0.0 {
                return;
            }
            let j_hi = (j_hi_f as usize).min(n_out.saturating_sub(1));
            for j in j_lo..=j_hi {
                let c = grid.loglam(j);
                let ov = (b.min(c + half) - a.max(c - half)).max(0.0);
                if ov > 0.0 {
                    out.push((j, ov));
                }
            }
        };
        let mut wsum = vec![0.0; n_out];
        let mut fsum = vec![0.0; n_out];
        let mut vsum = vec![0.0; n_out];
        let mut ov = Vec::new();
        for i in (0..lw.len()).filter(|&i| good[i]) {
            overlaps(i, &mut ov);
            for &(j, o) in &ov {
                wsum[j] += o;
                fsum[j] += o * flux[i];
                vsum[j] += o * o / ivar[i];
            }
        }
        let mut out_f = vec![0.0; n_out];
        let mut out_iv = vec![0.0; n_out];
        for j in 0..n_out {
            // wsum is also the good coverage of the pixel
            if wsum[j] >= 0.5 * grid.dloglam {
                out_f[j] = fsum[j] / wsum[j];
                let var = vsum[j] / (wsum[j] * wsum[j]);
                if var > 0.0 && var.is_finite() {
                    out_iv[j] = 1.0 / var;
                }
            }
        }
        // Σ_k ρ(j, k): cov(j, k) = Σ_i o_ij o_ik var_i / (W_j W_k) over the
        // inputs i both pixels draw on; ρ = cov / √(var_j var_k)
        let mut corr = vec![0.0; n_out];
        let sd_over_w = |j: usize| (1.0 / out_iv[j]).sqrt() * wsum[j];
        for i in (0..lw.len()).filter(|&i| good[i]) {
            overlaps(i, &mut ov);
            for &(j, oj) in ov.iter().filter(|(j, _)| out_iv[*j] > 0.0) {
                for &(k, ok) in ov.iter().filter(|(k, _)| out_iv[*k] > 0.0) {
                    corr[j] += oj * ok / ivar[i] / (sd_over_w(j) * sd_over_w(k));
                }
            }
        }
        let mut n_used = 0usize;
        let mut independent = 0.0;
        for j in 0..n_out {
            if out_iv[j] > 0.0 && corr[j] > 0.0 && corr[j].is_finite() {
                corr[j] = corr[j].max(1.0);
                n_used += 1;
                independent += 1.0 / corr[j];
            } else {
                corr[j] = 1.0;
            }
        }
        Resampled {
            grid: *grid,
            flux: out_f,
            ivar: out_iv,
            oversampling: if independent > 0.0 {
                (n_used as f64 / independent).max(1.0)
            } else {
                1.0
            },
            correlation: corr,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectrum::SpectrumMeta;
    use approx::assert_relative_eq;

    fn linear_spec(n: usize, lo: f64, hi: f64, f: impl Fn(f64) -> f64) -> Spectrum {
        let wave: Vec<f64> = (0..n)
            .map(|i| lo + (hi - lo) * i as f64 / (n - 1) as f64)
            .collect();
        let flux = wave.iter().map(|w| f(*w)).collect();
        Spectrum::new(wave, flux, Some(vec![4.0; n]), None, SpectrumMeta::default()).unwrap()
    }

    #[test]
    fn grid_is_aligned_to_step_multiples() {
        let g = LogGrid::covering(3800.0, 9200.0, 1e-4);
        assert_relative_eq!(g.loglam0 / 1e-4, (g.loglam0 / 1e-4).round(), epsilon = 1e-6);
        assert!(g.wave(0) <= 3800.0 && g.wave(g.n - 1) >= 9200.0);
    }

    #[test]
    fn constant_flux_is_preserved_and_ivar_propagates() {
        // 1 Å pixels at 5000 Å are ~0.87e-4 in log10; resample onto 2e-4 bins:
        // each output pixel averages about 2.3 inputs of variance 1/4.
        let s = linear_spec(2001, 5000.0, 7000.0, |_| 3.0);
        let g = LogGrid::covering(5100.0, 6900.0, 2e-4);
        let r = s.resample(&g);
        for j in 0..g.n {
            assert_relative_eq!(r.flux[j], 3.0, epsilon = 1e-12);
            let lam = g.wave(j);
            let n_in = lam * (10f64.powf(1e-4) - 10f64.powf(-1e-4)) / 1.0;
            // ivar of a mean of n_in equal-weight pixels of ivar 4 is ≈ 4 n_in
            assert!(
                (r.ivar[j] / (4.0 * n_in) - 1.0).abs() < 0.25,
                "j={j} ivar={} expected≈{}",
                r.ivar[j],
                4.0 * n_in
            );
        }
    }

    /// A spectrum whose pixels are uniform in log10 λ with step `step`,
    /// edges on the edges of `grid`'s pixels, ivar 4.
    fn log_spec(grid: &LogGrid, step: f64, n: usize) -> Spectrum {
        let start = grid.loglam0 - 0.5 * grid.dloglam + 0.5 * step;
        let wave: Vec<f64> = (0..n).map(|i| 10f64.powf(start + i as f64 * step)).collect();
        Spectrum::new(
            wave,
            vec![1.0; n],
            Some(vec![4.0; n]),
            None,
            SpectrumMeta::default(),
        )
        .unwrap()
    }

    #[test]
    fn correlation_counts_output_pixels_that_share_an_input_pixel() {
        // By construction: an input pixel split exactly into two output pixels
        // gives both the same noise (ρ = 1 between them, Σρ = 2, and the pair
        // carries one pixel's information); output pixels that each average two
        // whole input pixels share none (Σρ = 1) and have twice the input ivar.
        let g = LogGrid::covering(5000.0, 5100.0, 1e-4);
        let up = log_spec(&g, 2e-4, g.n / 2).resample(&g);
        for j in 0..2 * (g.n / 2) {
            assert_relative_eq!(up.correlation[j], 2.0, epsilon = 1e-9);
            assert_relative_eq!(up.ivar[j], 4.0, epsilon = 1e-9);
        }
        assert_relative_eq!(up.oversampling, 2.0, epsilon = 1e-9);
        let down = log_spec(&g, 0.5e-4, 2 * g.n).resample(&g);
        for j in 0..g.n {
            assert_relative_eq!(down.correlation[j], 1.0, epsilon = 1e-9);
            assert_relative_eq!(down.ivar[j], 8.0, epsilon = 1e-9);
        }
        // in every case the weights ivar/Σρ keep the information of a constant
        // flux: Σ_j ivar_j/Σρ_j = Σ_i ivar_i (up to a last output pixel that is
        // less than half covered and dropped)
        for (step, n_in) in [
            (2e-4, g.n / 2),
            (0.5e-4, 2 * g.n),
            (1.5e-4, g.n * 2 / 3),
            (1.3e-4, g.n * 10 / 13),
        ] {
            let r = log_spec(&g, step, n_in).resample(&g);
            let info: f64 = r.ivar.iter().zip(&r.correlation).map(|(iv, c)| iv / c).sum();
            let input = 4.0 * n_in as f64;
            assert!(
                (info - input).abs() <= 4.0 + 1e-9 * input,
                "step {step}: {info} vs {input}"
            );
        }
    }

    #[test]
    fn linear_flux_is_reproduced_at_pixel_centres() {
        let s = linear_spec(4001, 4000.0, 8000.0, |w| 1.0 + 1e-3 * w);
        let g = LogGrid::covering(4100.0, 7900.0, 1e-4);
        let r = s.resample(&g);
        for j in 0..g.n {
            let w = g.wave(j);
            assert_relative_eq!(r.flux[j], 1.0 + 1e-3 * w, max_relative = 1e-3);
        }
    }

    #[test]
    fn bad_pixels_and_out_of_range_do_not_leak() {
        let mut s = linear_spec(1001, 5000.0, 6000.0, |_| 1.0);
        s.mask_where(|w| (5400.0..5500.0).contains(&w));
        let g = LogGrid::covering(4900.0, 6100.0, 1e-4);
        let r = s.resample(&g);
        for j in 0..g.n {
            let w = g.wave(j);
            if (5402.0..5498.0).contains(&w) || !(4999.0..=6001.0).contains(&w) {
                assert!(r.ivar[j] <= 0.0, "pixel at {w} should be bad");
            }
            assert!(r.flux[j].is_finite());
        }
    }
}
