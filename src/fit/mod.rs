/*!
The redshift engine: χ² of every class's templates over a grid uniform in
log(1+z), candidate minima, refinement, class decision and line measurement.

- [`Engine`] prepares the templates once ([`FitConfig`] gives the grid step,
  classes, redshift ranges and polynomial terms) and fits spectra from any
  number of threads.
- The fast path computes χ²(z) from FFT cross-correlations; [`reference`]
  holds the direct oracle with the same definition of χ².
*/
mod config;
pub mod emission;
mod engine;
mod fast;
mod lines;
mod method;
mod overlay;
mod prep;
pub(crate) use prep::{running_mean, SYS_FLOOR_WINDOW};
pub mod reference;
mod refine;
mod result;
mod sky;
pub mod sums;
pub mod synth;
mod units;
pub mod xcorr;

pub use crate::constants::C_KMS;
pub use config::{FitConfig, FitError, Method};
pub use engine::{Engine, POOR_FIT_POLY_TERMS};
pub use fast::CorrPlan;
pub use lines::measure_at as measure_emission_lines;
pub use method::{
    mismatch_scale, velocity_sep_kms, AMBIGUOUS_DCHI2, CLASS_CLOSE_DCHI2, FEW_PIXELS, LINE_EVIDENCE_SNR,
    POOR_FIT_CHI2R, STAR_VMAX_KMS,
};
pub use overlay::{Overlay, OverlayTemplate};
pub use prep::Prepared;
pub use result::{Candidate, Chi2Curve, ClassSolution, FitResult, LineMeasurement, Warnings};
pub use units::Unit;
