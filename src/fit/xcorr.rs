/*!
Classic Fourier cross-correlation (not wired yet).
*/
use super::config::FitError;
use super::engine::Engine;
use super::result::FitResult;
use crate::spectrum::Spectrum;

/// Cross-correlation fit (not wired yet).
pub fn fit(_e: &Engine, _s: &Spectrum) -> Result<FitResult, FitError> {
    Err(FitError::InvalidConfig("the cross-correlation method is not built yet".into()))
}
