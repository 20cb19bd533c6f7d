/*!
Emission lines at the chosen redshift: the entry point the engine calls. The
method (stellar continuum, Gaussians, shared kinematics, tied doublets, upper
limits) is in [`super::emission`].
*/
use super::result::{Candidate, LineMeasurement};
use crate::spectrum::Spectrum;
use crate::ObjectClass;

/// Measure the emission lines of `class`'s line list in `s` at redshift `z`
/// (see [`super::emission`]).
pub fn measure_at(s: &Spectrum, z: f64, class: ObjectClass) -> Vec<LineMeasurement> {
    super::emission::measure(s, z, class)
}

/// Measure the emission lines at the candidate's redshift and class.
pub fn measure(s: &Spectrum, c: &Candidate) -> Vec<LineMeasurement> {
    measure_at(s, c.z, c.class)
}
