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

    #[test]
    fn masks_listed_sky_lines_and_bands_only() {
        let sky = crate::lines::sky();
        let bands = crate::lines::telluric_bands();
        assert!(!sky.is_empty() && !bands.is_empty());
        let wave: Vec<f64> = (0..6000).map(|i| 4000.0 + i as f64).collect();
        let n = wave.len();
        let mut s = Spectrum::new(wave, vec![1.0; n], None, None, SpectrumMeta::default()).unwrap();
        mask(&mut s);
        for (i, &l) in s.wave().iter().enumerate() {
            let expected = is_sky(l);
            assert_eq!(!s.good()[i], expected, "pixel at {l} Å");
        }
        // a listed sky line inside the range is masked
        let l = sky.iter().find(|l| l.wave > 4001.0 && l.wave < 9998.0).unwrap();
        let i = (l.wave.round() - 4000.0) as usize;
        assert!(!s.good()[i]);
    }
}
