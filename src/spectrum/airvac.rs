/*!
Conversion between wavelengths in standard air and in vacuum.

The IAU standard conversion: the refractive index of standard air (dry air
at 15 °C, 101 325 Pa, 450 ppm CO₂) in the form given by Morton (2000, ApJS
130, 403, eq. 8), whose coefficients follow Ciddor (1996, Applied Optics 35,
1566):

  n − 1 = 8.34254e-5 + 2.406147e-2 / (130 − σ²) + 1.5998e-4 / (38.9 − σ²),
  σ = 10⁴ / λ_vac (λ in Å, σ in µm⁻¹), and λ_air = λ_vac / n.

The inverse (air → vacuum) is solved by Newton iteration on the same formula,
so `air_to_vacuum(vacuum_to_air(λ)) == λ` to rounding. By convention
wavelengths below 2000 Å are always quoted in vacuum, so both functions leave
them unchanged (common practice; the formula is not defined for the far UV).
*/

/// Below this wavelength (Å) air and vacuum values coincide by convention.
pub const AIR_VACUUM_LIMIT: f64 = 2000.0;

/// Refractive index of standard air at vacuum wavelength `lam_vac` (Å):
/// Morton (2000) eq. 8, Ciddor (1996) coefficients.
fn refractive_index(lam_vac: f64) -> f64 {
    let s2 = (1.0e4 / lam_vac).powi(2);
    1.0 + 8.34254e-5 + 2.406147e-2 / (130.0 - s2) + 1.5998e-4 / (38.9 - s2)
}

/// Vacuum wavelength (Å) → wavelength in standard air (Å).
pub fn vacuum_to_air(lam_vac: f64) -> f64 {
    if lam_vac.is_nan() || lam_vac < AIR_VACUUM_LIMIT {
        return lam_vac;
    }
    lam_vac / refractive_index(lam_vac)
}

/// Wavelength in standard air (Å) → vacuum wavelength (Å), the exact inverse
/// of [`vacuum_to_air`].
pub fn air_to_vacuum(lam_air: f64) -> f64 {
    if !lam_air.is_finite() || lam_air < AIR_VACUUM_LIMIT {
        return lam_air;
    }
    // Newton on f(v) = v / n(v) − λ_air; n varies slowly, so start from
    // v = λ_air · n(λ_air) and a few steps reach rounding level.
    let mut v = lam_air * refractive_index(lam_air);
    for _ in 0..6 {
        let f = vacuum_to_air(v) - lam_air;
        let h = v * 1e-6;
        let df = (vacuum_to_air(v + h) - vacuum_to_air(v - h)) / (2.0 * h);
        let step = f / df;
        v -= step;
        if step.abs() < 1e-12 * v {
            break;
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    /// Published air/vacuum pairs (Å).
    const PAIRS: &[(f64, f64, &str)] = &[
        // Hα: air 6562.80, vacuum 6564.61 (the pair quoted with the IAU
        // standard conversion; also NIST Atomic Spectra Database, H I).
        (6562.80, 6564.61, "H-alpha"),
        // Hβ: air 4861.33, vacuum 4862.68 (NIST Atomic Spectra Database, H I; from memory).
        (4861.33, 4862.68, "H-beta"),
        // [O III] 5007: air 5006.84, vacuum 5008.24 (NIST ASD, O III; from memory).
        (5006.84, 5008.24, "[O III]"),
        // Na I D2: air 5889.95, vacuum 5891.58 (NIST ASD, Na I; from memory).
        (5889.95, 5891.58, "Na D2"),
        // Ca II K: air 3933.66, vacuum 3934.78 (NIST ASD, Ca II; from memory).
        (3933.66, 3934.78, "Ca K"),
    ];

    #[test]
    fn published_pairs() {
        for &(air, vac, name) in PAIRS {
            let v = air_to_vacuum(air);
            assert!(
                (v - vac).abs() < 0.011,
                "{name}: air {air} -> {v}, published {vac}"
            );
            let a = vacuum_to_air(vac);
            assert!(
                (a - air).abs() < 0.011,
                "{name}: vac {vac} -> {a}, published {air}"
            );
        }
    }

    #[test]
    fn round_trip_and_far_uv() {
        for lam in [2100.0, 3000.0, 6563.0, 10_000.0, 25_000.0] {
            assert_abs_diff_eq!(air_to_vacuum(vacuum_to_air(lam)), lam, epsilon = 1e-9);
        }
        // Below 2000 Å the convention is vacuum throughout (common practice).
        assert_eq!(air_to_vacuum(1215.67).to_bits(), 1215.67f64.to_bits());
        assert_eq!(vacuum_to_air(1549.0).to_bits(), 1549.0f64.to_bits());
    }
}
