/*!
The photometric catalogue: one row per object with position, u g r i z
magnitudes and errors, and a photometric classifier's class, probability and
redshift. Any of these may be missing. (Reading and joining: under construction.)
*/
use crate::ObjectClass;
use serde::{Deserialize, Serialize};

/// The five broad bands, in order.
pub const BANDS: [&str; 5] = ["u", "g", "r", "i", "z"];

/// One catalogue row.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct CatalogRow {
    /// Object id (joins with the spectrum's id).
    pub id: String,
    /// Right ascension, degrees.
    pub ra: Option<f64>,
    /// Declination, degrees.
    pub dec: Option<f64>,
    /// AB magnitudes in [`BANDS`] order.
    pub mag: [Option<f64>; 5],
    /// Magnitude errors in [`BANDS`] order.
    pub mag_err: [Option<f64>; 5],
    /// Class assigned by the photometric classifier.
    pub phot_class: Option<ObjectClass>,
    /// Its probability (0–1).
    pub phot_class_prob: Option<f64>,
    /// Photometric redshift.
    pub phot_z: Option<f64>,
}
