/*!
The redshift engine: χ²(z) of every class's templates over a grid uniform in
log(1+z), candidate minima, refinement, class decision and line measurement.
*/
mod result;

pub use result::{Candidate, Chi2Curve, FitResult, LineMeasurement, Warnings};
