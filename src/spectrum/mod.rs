/*!
The one-dimensional spectrum every other module works on.

A [`Spectrum`] always holds **vacuum** wavelengths in Ångström (readers convert
air wavelengths and other units on the way in), flux in the file's own unit,
inverse variance, and a good-pixel mask. Invariants are checked once, in
[`Spectrum::new`]: equal lengths, finite strictly increasing wavelengths, and
every pixel whose flux or inverse variance is not finite or whose inverse
variance is not positive marked bad (kept, never dropped).
*/
mod airvac;
mod grid;
mod smooth;

pub use airvac::{air_to_vacuum, vacuum_to_air};
pub use grid::{LogGrid, Resampled};
pub use smooth::{auto_boxcar_width, Smoothed, AUTO_SMOOTH_MAX, AUTO_SMOOTH_TARGET_SNR};

use serde::{Deserialize, Serialize};
use std::path::PathBuf;

/// The wavelength medium the values were given in by the file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Medium {
    /// Wavelengths in vacuum (stored as read).
    #[default]
    Vacuum,
    /// Wavelengths in standard air (converted to vacuum when read).
    Air,
}

/// Where a spectrum came from and what is known about it.
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
pub struct SpectrumMeta {
    /// Object identifier (from the file, or else the file stem).
    pub id: String,
    /// File the spectrum was read from, if any.
    pub source: Option<PathBuf>,
    /// HDU index (0 = primary) for FITS input.
    pub hdu: Option<usize>,
    /// Row index inside a multi-object table.
    pub row: Option<usize>,
    /// Right ascension in degrees, if the file gives it.
    pub ra: Option<f64>,
    /// Declination in degrees, if the file gives it.
    pub dec: Option<f64>,
    /// Flux unit string as read (e.g. `1e-17 erg/s/cm2/Angstrom`).
    pub flux_unit: Option<String>,
    /// The medium the wavelengths were given in.
    pub medium_as_read: Medium,
    /// True when the file carried no uncertainty and the inverse variance was
    /// estimated from the local scatter of the flux.
    pub noise_estimated: bool,
    /// Things the reader noticed and the user should know.
    pub warnings: Vec<String>,
    /// The sky spectrum subtracted from the flux, per pixel in the flux unit,
    /// when the file carries one (display only; see [`Spectrum::sky`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sky: Option<Vec<f64>>,
}

/// A violated spectrum invariant.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum SpectrumError {
    /// Arrays of different lengths.
    #[error("array lengths differ: wavelength {wave}, flux {flux}, {other_name} {other}")]
    LengthMismatch {
        /// wavelength length
        wave: usize,
        /// flux length
        flux: usize,
        /// name of the third array
        other_name: &'static str,
        /// its length
        other: usize,
    },
    /// Fewer than two pixels.
    #[error("spectrum has {0} pixels; at least 2 are needed")]
    TooShort(usize),
    /// A wavelength is NaN, infinite or not positive.
    #[error("wavelength at pixel {0} is not a finite positive number")]
    BadWavelength(usize),
    /// Wavelengths neither strictly increase nor strictly decrease.
    #[error("wavelengths are not strictly monotonic near pixel {0}")]
    NotMonotonic(usize),
    /// Every pixel is bad.
    #[error("no good pixels: every flux or inverse variance is missing, non-finite or zero")]
    NoGoodPixels,
}

/// A 1-D spectrum on vacuum wavelengths (Å).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct Spectrum {
    wave: Vec<f64>,
    flux: Vec<f64>,
    ivar: Vec<f64>,
    good: Vec<bool>,
    /// Provenance and facts about the spectrum.
    pub meta: SpectrumMeta,
}

impl Spectrum {
    /// Build a spectrum, checking the invariants.
    ///
    /// `wave` must be in vacuum Å (convert first). A strictly decreasing
    /// wavelength array is reversed together with the other arrays.
    /// `ivar`: `None` means unknown uncertainty (every pixel gets ivar 1 and
    /// `meta.noise_estimated` stays as the caller set it; readers use
    /// [`Spectrum::estimate_noise`]). `good`: optional extra mask (false = bad).
    /// Non-finite flux or ivar, and ivar ≤ 0, mark a pixel bad; its stored flux
    /// and ivar become 0 so no sum can pick up a NaN.
    pub fn new(
        wave: Vec<f64>,
        flux: Vec<f64>,
        ivar: Option<Vec<f64>>,
        good: Option<Vec<bool>>,
        meta: SpectrumMeta,
    ) -> Result<Self, SpectrumError> {
        let n = wave.len();
        if flux.len() != n {
            return Err(SpectrumError::LengthMismatch {
                wave: n,
                flux: flux.len(),
                other_name: "flux",
                other: flux.len(),
            });
        }
        let ivar = ivar.unwrap_or_else(|| vec![1.0; n]);
        if ivar.len() != n {
            return Err(SpectrumError::LengthMismatch {
                wave: n,
                flux: flux.len(),
                other_name: "inverse variance",
                other: ivar.len(),
            });
        }
        let good = good.unwrap_or_else(|| vec![true; n]);
        if good.len() != n {
            return Err(SpectrumError::LengthMismatch {
                wave: n,
                flux: flux.len(),
                other_name: "mask",
                other: good.len(),
            });
        }
        if n < 2 {
            return Err(SpectrumError::TooShort(n));
        }
        if let Some(i) = wave.iter().position(|w| !(w.is_finite() && *w > 0.0)) {
            return Err(SpectrumError::BadWavelength(i));
        }
        let mut s = Spectrum {
            wave,
            flux,
            ivar,
            good,
            meta,
        };
        let increasing = s.wave[1] > s.wave[0];
        for i in 1..n {
            let ok = if increasing {
                s.wave[i] > s.wave[i - 1]
            } else {
                s.wave[i] < s.wave[i - 1]
            };
            if !ok {
                return Err(SpectrumError::NotMonotonic(i));
            }
        }
        if !increasing {
            s.wave.reverse();
            s.flux.reverse();
            s.ivar.reverse();
            s.good.reverse();
        }
        if s.meta.sky.as_ref().is_some_and(|k| k.len() != n) {
            s.meta.sky = None;
        } else if let (false, Some(k)) = (increasing, s.meta.sky.as_mut()) {
            k.reverse();
        }
        for i in 0..n {
            let ok = s.good[i] && s.flux[i].is_finite() && s.ivar[i].is_finite() && s.ivar[i] > 0.0;
            if !ok {
                s.good[i] = false;
                s.flux[i] = if s.flux[i].is_finite() { s.flux[i] } else { 0.0 };
                s.ivar[i] = 0.0;
            }
        }
        if !s.good.iter().any(|g| *g) {
            return Err(SpectrumError::NoGoodPixels);
        }
        Ok(s)
    }

    /// Number of pixels (good and bad).
    pub fn len(&self) -> usize {
        self.wave.len()
    }

    /// Always false: a spectrum has at least two pixels.
    pub fn is_empty(&self) -> bool {
        self.wave.is_empty()
    }

    /// Vacuum wavelengths in Å, strictly increasing.
    pub fn wave(&self) -> &[f64] {
        &self.wave
    }

    /// Flux (0 at bad pixels whose flux was not finite).
    pub fn flux(&self) -> &[f64] {
        &self.flux
    }

    /// Inverse variance (0 at bad pixels).
    pub fn ivar(&self) -> &[f64] {
        &self.ivar
    }

    /// Good-pixel mask (true = usable).
    pub fn good(&self) -> &[bool] {
        &self.good
    }

    /// Number of good pixels.
    pub fn n_good(&self) -> usize {
        self.good.iter().filter(|g| **g).count()
    }

    /// Fraction of pixels that are bad.
    pub fn masked_fraction(&self) -> f64 {
        1.0 - self.n_good() as f64 / self.len() as f64
    }

    /// The sky spectrum on this spectrum's pixels, when the file carried one
    /// (`None` also when the metadata's array does not match the pixels, e.g.
    /// after resampling).
    pub fn sky(&self) -> Option<&[f64]> {
        self.meta.sky.as_deref().filter(|k| k.len() == self.len())
    }

    /// Median over good pixels of |flux|·sqrt(ivar), the per-pixel S/N.
    pub fn median_snr(&self) -> f64 {
        let mut v: Vec<f64> = (0..self.len())
            .filter(|&i| self.good[i])
            .map(|i| self.flux[i] * self.ivar[i].sqrt())
            .collect();
        median_in_place(&mut v).unwrap_or(0.0)
    }

    /// Mark extra pixels bad (e.g. sky-line masks); `bad[i] == true` masks pixel i.
    pub fn mask_where(&mut self, bad: impl Fn(f64) -> bool) {
        for i in 0..self.len() {
            if bad(self.wave[i]) {
                self.good[i] = false;
                self.ivar[i] = 0.0;
            }
        }
    }

    /// Replace the inverse variance by an estimate from the local scatter of
    /// the flux, for files that carry no uncertainty, and flag it in the
    /// metadata. The estimate is 1/σ² with σ = 1.4826 · MAD of the first
    /// differences / √2 in a running window of `half_width` pixels each side
    /// (common practice: differences remove the smooth continuum, the MAD
    /// ignores lines and spikes).
    pub fn estimate_noise(&mut self, half_width: usize) {
        let n = self.len();
        let diffs: Vec<Option<f64>> = (0..n)
            .map(|i| {
                if i + 1 < n && self.good[i] && self.good[i + 1] {
                    Some(self.flux[i + 1] - self.flux[i])
                } else {
                    None
                }
            })
            .collect();
        let mut ivar = vec![0.0; n];
        let mut buf = Vec::with_capacity(2 * half_width + 1);
        for (i, iv) in ivar.iter_mut().enumerate() {
            if !self.good[i] {
                continue;
            }
            buf.clear();
            let lo = i.saturating_sub(half_width);
            let hi = (i + half_width + 1).min(n);
            buf.extend(diffs[lo..hi].iter().flatten().copied());
            let Some(med) = median_in_place(&mut buf) else {
                continue;
            };
            for d in buf.iter_mut() {
                *d = (*d - med).abs();
            }
            let Some(mad) = median_in_place(&mut buf) else {
                continue;
            };
            let sigma = 1.4826 * mad / std::f64::consts::SQRT_2;
            if sigma > 0.0 && sigma.is_finite() {
                *iv = 1.0 / (sigma * sigma);
            }
        }
        for (g, iv) in self.good.iter_mut().zip(&ivar) {
            if *iv <= 0.0 {
                *g = false;
            }
        }
        self.ivar = ivar;
        self.meta.noise_estimated = true;
    }
}

/// Median of finite values (sorts the slice in place); `None` when empty.
pub fn median_in_place(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(|a, b| a.total_cmp(b));
    let m = v.len() / 2;
    Some(if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn meta() -> SpectrumMeta {
        SpectrumMeta {
            id: "t".into(),
            ..Default::default()
        }
    }

    #[test]
    fn nonfinite_pixels_are_masked_not_dropped() {
        let s = Spectrum::new(
            vec![1.0, 2.0, 3.0, 4.0],
            vec![1.0, f64::NAN, 3.0, 4.0],
            Some(vec![1.0, 1.0, f64::INFINITY, 0.0]),
            None,
            meta(),
        )
        .unwrap();
        assert_eq!(s.len(), 4);
        assert_eq!(s.good(), &[true, false, false, false]);
        assert!(s.flux().iter().all(|f| f.is_finite()));
        assert!(s.ivar()[1] <= 0.0);
    }

    #[test]
    fn decreasing_wavelengths_are_reversed() {
        let s = Spectrum::new(vec![3.0, 2.0, 1.0], vec![30.0, 20.0, 10.0], None, None, meta()).unwrap();
        assert_eq!(s.wave(), &[1.0, 2.0, 3.0]);
        assert_eq!(s.flux(), &[10.0, 20.0, 30.0]);
    }

    #[test]
    fn invariants_are_enforced() {
        assert!(matches!(
            Spectrum::new(vec![1.0, 2.0], vec![1.0], None, None, meta()),
            Err(SpectrumError::LengthMismatch { .. })
        ));
        assert_eq!(
            Spectrum::new(vec![1.0, 2.0, 2.0], vec![1.0; 3], None, None, meta()),
            Err(SpectrumError::NotMonotonic(2))
        );
        assert_eq!(
            Spectrum::new(vec![1.0, 2.0], vec![f64::NAN; 2], None, None, meta()),
            Err(SpectrumError::NoGoodPixels)
        );
        assert_eq!(
            Spectrum::new(vec![1.0, f64::NAN], vec![1.0; 2], None, None, meta()),
            Err(SpectrumError::BadWavelength(1))
        );
    }

    #[test]
    fn noise_estimate_recovers_white_noise_sigma() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, Normal};
        let normal = Normal::new(0.0, 0.5).unwrap();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let n = 4000;
        let wave: Vec<f64> = (0..n).map(|i| 4000.0 + i as f64).collect();
        let flux: Vec<f64> = (0..n)
            .map(|i| 10.0 + 0.001 * i as f64 + normal.sample(&mut rng))
            .collect();
        let mut s = Spectrum::new(wave, flux, None, None, meta()).unwrap();
        s.estimate_noise(50);
        let mut sig: Vec<f64> = s
            .ivar()
            .iter()
            .filter(|v| **v > 0.0)
            .map(|v| 1.0 / v.sqrt())
            .collect();
        let med = median_in_place(&mut sig).unwrap();
        assert!((med - 0.5).abs() < 0.05, "estimated sigma {med}");
        assert!(s.meta.noise_estimated);
    }
}
