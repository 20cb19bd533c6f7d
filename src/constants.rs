/*!
Constants of physics, defined once for the whole crate.
*/

/// Speed of light in vacuum in km/s (exact by the SI definition of the metre;
/// CODATA 2018).
pub const C_KMS: f64 = 299_792.458;
