/*!
Optional masking of strong night-sky emission lines and telluric absorption
bands before fitting (common practice for ground-based spectra): pixels
within [`SKY_HALF_WIDTH_A`] of a line of [`crate::lines::sky`] or inside a band
of [`crate::lines::telluric_bands`] (observed frame, vacuum) are marked bad.
*/
use crate::spectrum::Spectrum;

/// Half-width (Å) masked around each sky line: a few resolution elements of
/// a typical low-resolution spectrograph (common practice, from memory).
pub const SKY_HALF_WIDTH_A: f64 = 5.0;

/// True when observed vacuum wavelength `lam` is on a sky line or telluric band.
pub fn is_sky(lam: f64) -> bool {
    crate::lines::in_telluric_band(lam)
        || crate::lines::sky()
            .iter()
            .any(|l| (lam - l.wave).abs() <= SKY_HALF_WIDTH_A)
}

/// Mask sky lines and telluric bands in `s`.
pub fn mask(s: &mut Spectrum) {
    s.mask_where(is_sky);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectrum::SpectrumMeta;

    /// A 1-Å grid from 4000 to 9999 Å, masked.
    fn masked_grid() -> Spectrum {
        let wave: Vec<f64> = (0..6000).map(|i| 4000.0 + i as f64).collect();
        let n = wave.len();
        let mut s = Spectrum::new(wave, vec![1.0; n], None, None, SpectrumMeta::default()).unwrap();
        mask(&mut s);
        s
    }

    fn masked_at(s: &Spectrum, lam: f64) -> bool {
        let i = (lam - 4000.0).round() as usize;
        !s.good()[i]
    }

    #[test]
    fn the_brightest_sky_features_are_masked_and_clean_continuum_is_not() {
        let s = masked_grid();
        // [O I] 5577.34 Å in air is 5578.89 Å in vacuum (the auroral line; air value
        // common practice, converted with the IAU formula): masked within ±5 Å only.
        assert!(masked_at(&s, 5579.0));
        assert!(masked_at(&s, 5574.0) && masked_at(&s, 5583.0));
        assert!(!masked_at(&s, 5572.0) && !masked_at(&s, 5586.0));
        // The O₂ A band (head 7594 Å air, 7596 Å vacuum, to about 7700 Å; common
        // practice) is masked across.
        for lam in [7600.0, 7650.0, 7690.0] {
            assert!(masked_at(&s, lam), "{lam} Å in the A band");
        }
        // Continuum windows free of sky lines at low resolution (common practice).
        for lam in [4500.0, 5000.0, 5300.0, 6100.0, 6700.0] {
            assert!(!masked_at(&s, lam), "{lam} Å is clean sky");
        }
    }

    #[test]
    fn masked_pixels_are_the_line_windows_plus_the_bands() {
        // Count, independently of `is_sky`: every pixel within the half-width of a
        // line or inside a band, counted once.
        let s = masked_grid();
        let expect = s
            .wave()
            .iter()
            .filter(|&&l| {
                crate::lines::telluric_bands()
                    .iter()
                    .any(|&(a, b)| (a..=b).contains(&l))
                    || crate::lines::sky()
                        .iter()
                        .any(|x| (x.wave - l).abs() <= SKY_HALF_WIDTH_A)
            })
            .count();
        let got = s.good().iter().filter(|g| !**g).count();
        assert_eq!(got, expect);
        // and that is a real share of the red half, where OH and water dominate
        // (more than 15 % of 7000–10000 Å; common practice).
        let red_masked = s
            .wave()
            .iter()
            .zip(s.good())
            .filter(|(l, g)| **l >= 7000.0 && !**g)
            .count();
        assert!(red_masked > 450, "{red_masked} of 3000 red pixels masked");
    }
}
