/*!
Optional masking of strong night-sky emission lines and telluric absorption
bands before fitting (common practice for ground-based spectra).
*/
use crate::spectrum::Spectrum;

/// Mask sky lines and telluric bands in `s`.
///
/// Not wired yet: the sky line list arrives with the line module; until
/// then this leaves the spectrum unchanged.
pub fn mask(_s: &mut Spectrum) {}
