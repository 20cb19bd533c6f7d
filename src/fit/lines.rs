/*!
Emission-line measurements at the chosen redshift.
*/
use super::engine::Engine;
use super::prep::Prepared;
use super::result::{Candidate, LineMeasurement};
use crate::spectrum::Spectrum;

/// Measure the emission lines in coverage at the candidate's redshift.
///
/// Not wired yet: waits for the line list; returns no measurements.
pub fn measure(_s: &Spectrum, _p: &Prepared, _e: &Engine, _c: &Candidate) -> Vec<LineMeasurement> {
    Vec::new()
}
