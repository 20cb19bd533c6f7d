/*!
Smoothing of a spectrum for display and line finding: boxcar and Gaussian
kernels in pixel space, weighted by the inverse variance, with bad pixels
left out.

Each output pixel is the weighted mean f̂ᵢ = Σ wₖ ivarₖ fₖ / Σ wₖ ivarₖ over the
good pixels k in the kernel (wₖ the kernel value). Its variance is that of a
weighted mean, var(f̂ᵢ) = Σ wₖ² ivarₖ / (Σ wₖ ivarₖ)² (common practice), so the
returned inverse variance is (Σ wₖ ivarₖ)² / Σ wₖ² ivarₖ. Pixels whose kernel
holds no good pixel get flux 0 and ivar 0. Neighbouring smoothed pixels are
correlated; the ivar is per pixel, not for sums over pixels.
*/
use super::Spectrum;

/// Per-pixel S/N the automatic display smoothing aims for: at about 5 the
/// continuum shape and the strong features of a spectrum can be judged by eye
/// (common practice).
pub const AUTO_SMOOTH_TARGET_SNR: f64 = 5.0;

/// Widest automatic boxcar (pixels): wider would wash out a line a few
/// pixels wide, which is what the inspector looks for.
pub const AUTO_SMOOTH_MAX: usize = 15;

/// The display boxcar width for a spectrum of median per-pixel S/N
/// `median_snr` (see [`Spectrum::median_snr`]).
///
/// Rule: a boxcar of w pixels over white noise raises the S/N by √w (the mean
/// of w independent values has variance σ²/w), so w = ⌈(5 / S/N)²⌉ lifts the
/// median pixel to S/N ≈ [`AUTO_SMOOTH_TARGET_SNR`]; w is rounded up to an
/// odd number (a centred kernel) and kept within 1…[`AUTO_SMOOTH_MAX`].
/// A spectrum at S/N ≥ 5 is shown unsmoothed; S/N 2 gives 7 pixels; no
/// usable S/N (0, negative, NaN) gives the widest.
pub fn auto_boxcar_width(median_snr: f64) -> usize {
    if !(median_snr > 0.0 && median_snr.is_finite()) {
        return AUTO_SMOOTH_MAX;
    }
    let w = (AUTO_SMOOTH_TARGET_SNR / median_snr).powi(2).ceil();
    if w >= AUTO_SMOOTH_MAX as f64 {
        return AUTO_SMOOTH_MAX;
    }
    // `| 1` rounds an even width up to the next odd one.
    (w as usize).max(1) | 1
}

/// A smoothed flux with its inverse variance, on the spectrum's own pixels.
#[derive(Debug, Clone, PartialEq)]
pub struct Smoothed {
    /// Smoothed flux (0 where no good pixel was in reach).
    pub flux: Vec<f64>,
    /// Inverse variance of each smoothed pixel (0 = no data).
    pub ivar: Vec<f64>,
}

impl Spectrum {
    /// Boxcar smoothing over `width` pixels (rounded up to an odd number;
    /// `width ≤ 1` returns the spectrum's own flux and ivar).
    pub fn smooth_boxcar(&self, width: usize) -> Smoothed {
        let half = width.saturating_sub(1).div_ceil(2);
        let kernel = vec![1.0; 2 * half + 1];
        self.convolve_weighted(&kernel)
    }

    /// Gaussian smoothing with standard deviation `sigma_pix` pixels; the
    /// kernel is cut at ±4σ. `sigma_pix ≤ 0` (or not finite) returns the
    /// spectrum's own flux and ivar.
    pub fn smooth_gaussian(&self, sigma_pix: f64) -> Smoothed {
        if !(sigma_pix > 0.0 && sigma_pix.is_finite()) {
            return self.convolve_weighted(&[1.0]);
        }
        let half = (4.0 * sigma_pix).ceil().min(1.0e6) as usize;
        let kernel: Vec<f64> = (0..=2 * half)
            .map(|k| {
                let x = (k as f64 - half as f64) / sigma_pix;
                (-0.5 * x * x).exp()
            })
            .collect();
        self.convolve_weighted(&kernel)
    }

    /// `values` given at this spectrum's pixels (a model, an overlaid
    /// template, a sky spectrum) smoothed exactly as [`Spectrum::smooth_boxcar`]
    /// smooths the flux: the same kernel and the same weights (the flux's
    /// inverse variance over its good pixels), so a model that equals the
    /// flux stays equal to the smoothed flux and line depths compare. Pixels
    /// where `values` is not finite are left out, and stay NaN; where the
    /// kernel holds no usable pixel the result is NaN too (nothing to draw).
    /// `width ≤ 1` returns the values as given.
    pub fn smooth_values_boxcar(&self, values: &[f64], width: usize) -> Vec<f64> {
        let n = self.len().min(values.len());
        if width <= 1 {
            return values[..n].to_vec();
        }
        let half = width.saturating_sub(1).div_ceil(2);
        let kernel = vec![1.0; 2 * half + 1];
        let good = self.good();
        let usable: Vec<bool> = (0..n).map(|k| good[k] && values[k].is_finite()).collect();
        let (out, ivar) = convolve_weighted(&values[..n], &self.ivar()[..n], &usable, &kernel);
        out.into_iter()
            .zip(ivar)
            .zip(values)
            .map(|((v, iv), x)| if iv > 0.0 && x.is_finite() { v } else { f64::NAN })
            .collect()
    }

    /// Ivar-weighted convolution with an odd-length kernel centred on each pixel.
    fn convolve_weighted(&self, kernel: &[f64]) -> Smoothed {
        let (flux, ivar) = convolve_weighted(self.flux(), self.ivar(), self.good(), kernel);
        Smoothed { flux, ivar }
    }
}

/// Σ wₖ ivarₖ vₖ / Σ wₖ ivarₖ over the `good` pixels k in reach of an
/// odd-length `kernel` centred on each pixel, and its inverse variance
/// (Σ wₖ ivarₖ)² / Σ wₖ² ivarₖ; (0, 0) where no good pixel is in reach.
fn convolve_weighted(values: &[f64], ivar: &[f64], good: &[bool], kernel: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let n = values.len();
    let half = kernel.len() / 2;
    let mut out_f = vec![0.0; n];
    let mut out_iv = vec![0.0; n];
    for i in 0..n {
        let (mut swi, mut swif, mut sw2i) = (0.0, 0.0, 0.0);
        let lo = i.saturating_sub(half);
        let hi = (i + half).min(n - 1);
        for k in lo..=hi {
            if !good[k] {
                continue;
            }
            let w = kernel[k + half - i];
            swi += w * ivar[k];
            swif += w * ivar[k] * values[k];
            sw2i += w * w * ivar[k];
        }
        if swi > 0.0 && sw2i > 0.0 {
            out_f[i] = swif / swi;
            out_iv[i] = swi * swi / sw2i;
        }
    }
    (out_f, out_iv)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectrum::SpectrumMeta;
    use approx::assert_abs_diff_eq;

    fn spec(flux: Vec<f64>, ivar: Vec<f64>) -> Spectrum {
        let wave = (0..flux.len()).map(|i| 5000.0 + i as f64).collect();
        Spectrum::new(wave, flux, Some(ivar), None, SpectrumMeta::default()).unwrap()
    }

    #[test]
    fn auto_width_follows_the_rule() {
        assert_eq!(auto_boxcar_width(10.0), 1);
        assert_eq!(auto_boxcar_width(5.0), 1);
        assert_eq!(auto_boxcar_width(4.0), 3); // (5/4)² = 1.56 → 2 → odd 3
        assert_eq!(auto_boxcar_width(2.0), 7); // 6.25 → 7
        assert_eq!(auto_boxcar_width(0.5), AUTO_SMOOTH_MAX);
        assert_eq!(auto_boxcar_width(0.0), AUTO_SMOOTH_MAX);
        assert_eq!(auto_boxcar_width(f64::NAN), AUTO_SMOOTH_MAX);
    }

    #[test]
    fn auto_width_brings_white_noise_to_the_target_snr() {
        // A constant under Gaussian white noise: after the chosen boxcar the
        // scatter of the smoothed flux must have dropped by √w (variance of a
        // mean of w independent values, common practice), so the per-pixel
        // S/N, measured from the scatter itself, reaches the target unless
        // the width was capped.
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let n = 20_000;
        for snr in [0.7, 1.5, 2.0, 3.0, 4.5, 8.0] {
            let sigma = 1.0 / snr;
            let noise = Normal::new(0.0, sigma).unwrap();
            let flux: Vec<f64> = (0..n).map(|_| 1.0 + noise.sample(&mut rng)).collect();
            let s = spec(flux, vec![1.0 / (sigma * sigma); n]);
            let w = auto_boxcar_width(s.median_snr());
            let f = s.smooth_boxcar(w).flux;
            // every w-th pixel: independent samples of the smoothed flux
            let take: Vec<f64> = f[w..n - w].iter().step_by(w).copied().collect();
            let mean = take.iter().sum::<f64>() / take.len() as f64;
            let var = take.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (take.len() - 1) as f64;
            let measured = mean / var.sqrt();
            if w < AUTO_SMOOTH_MAX {
                assert!(
                    measured > 0.9 * AUTO_SMOOTH_TARGET_SNR,
                    "S/N {snr}: w {w} gives {measured}"
                );
            } else {
                let expect = snr * (w as f64).sqrt();
                assert!(
                    (measured / expect - 1.0).abs() < 0.1,
                    "S/N {snr}: {measured} vs {expect}"
                );
            }
        }
    }

    #[test]
    fn boxcar_of_equal_weights_is_the_plain_mean() {
        let s = spec(vec![1.0, 2.0, 3.0, 4.0, 5.0], vec![4.0; 5]);
        let b = s.smooth_boxcar(3);
        assert_abs_diff_eq!(b.flux[2], 3.0, epsilon = 1e-12);
        // mean of 3 pixels of σ² = 1/4 has σ² = 1/12 (variance of a mean)
        assert_abs_diff_eq!(b.ivar[2], 12.0, epsilon = 1e-9);
        // edges use what is in reach
        assert_abs_diff_eq!(b.flux[0], 1.5, epsilon = 1e-12);
    }

    #[test]
    fn masked_pixels_are_left_out_and_weights_follow_ivar() {
        // pixel 2 is NaN → masked; pixel 1 has 3× the weight of pixel 3
        let s = spec(vec![0.0, 1.0, f64::NAN, 5.0, 0.0], vec![1.0, 3.0, 1.0, 1.0, 1.0]);
        let b = s.smooth_boxcar(3);
        assert_abs_diff_eq!(b.flux[2], (3.0 * 1.0 + 5.0) / 4.0, epsilon = 1e-12);
    }

    #[test]
    fn other_values_are_smoothed_with_the_flux_weights() {
        // values equal to the flux come out as the smoothed flux
        let flux = vec![1.0, 4.0, f64::NAN, 2.0, 8.0, 0.5, 3.0];
        let ivar = vec![1.0, 2.0, 1.0, 4.0, 1.0, 3.0, 2.0];
        let s = spec(flux.clone(), ivar);
        for w in [3, 5] {
            let f = s.smooth_boxcar(w).flux;
            let m = s.smooth_values_boxcar(&flux, w);
            for i in (0..flux.len()).filter(|&i| i != 2) {
                assert_abs_diff_eq!(f[i], m[i], epsilon = 1e-12);
            }
            assert!(m[2].is_nan(), "no value at the masked pixel");
        }
        // a value missing where the flux is good is left out (and stays
        // missing); nothing usable in reach gives NaN
        let v = [f64::NAN, 7.0, 1.0, 5.0, f64::NAN, 2.0, f64::NAN];
        let m = s.smooth_values_boxcar(&v, 3);
        assert!(m[0].is_nan() && m[4].is_nan() && m[6].is_nan(), "{m:?}");
        assert_abs_diff_eq!(m[1], 7.0, epsilon = 1e-12); // pixel 2 is masked
        assert_abs_diff_eq!(m[3], 5.0, epsilon = 1e-12);
        // pixel 5 alone (4 and 6 have no value): weight ivar 3
        assert_abs_diff_eq!(m[5], 2.0, epsilon = 1e-12);
        assert!(s
            .smooth_values_boxcar(&[f64::NAN; 7], 5)
            .iter()
            .all(|x| x.is_nan()));
    }

    #[test]
    fn gaussian_keeps_a_constant_and_lowers_noise_by_the_kernel_sum() {
        let s = spec(vec![7.0; 101], vec![1.0; 101]);
        let g = s.smooth_gaussian(2.0);
        assert!(g.flux.iter().all(|f| (f - 7.0).abs() < 1e-12));
        // ivar gain = (Σw)²/Σw² ≈ 2√π σ for a sampled Gaussian (common practice)
        let expect = 2.0 * std::f64::consts::PI.sqrt() * 2.0;
        assert!((g.ivar[50] - expect).abs() / expect < 0.01, "{}", g.ivar[50]);
        // a zero width is the identity
        assert_eq!(s.smooth_gaussian(0.0).flux, s.flux());
    }
}
