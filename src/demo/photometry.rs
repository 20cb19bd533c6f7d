/*!
The demo's photometric catalogue: AB magnitudes of each object's noise-free
model through five Gaussian bands (an invented approximation of broad u g r i
z filters — demo data only), their errors from an invented depth, and an
invented photometric classifier that is wrong on about one object in ten,
mostly confusing stars with quasars and galaxies with quasars (a fact of the
trade: their colours overlap).
*/
use crate::catalog::CatalogRow;
use crate::ObjectClass;
use rand::Rng;
use rand_distr::{Distribution, Normal};

/// Speed of light in Å/s (common practice value).
const C_ANGSTROM_PER_S: f64 = 2.997_924_58e18;

/// The demo's flux unit in erg/s/cm²/Å.
pub const FLUX_UNIT: f64 = 1e-17;

/// (centre Å, Gaussian σ Å, 5σ depth AB) of the invented bands u g r i z.
pub const BANDS: [(f64, f64, f64); 5] = [
    (3560.0, 230.0, 22.6),
    (4700.0, 450.0, 23.6),
    (6200.0, 420.0, 23.3),
    (7500.0, 420.0, 22.8),
    (8900.0, 450.0, 21.9),
];

/// Wavelengths (Å) on which magnitudes are integrated: 2900–11000 Å in 5 Å steps.
pub fn band_grid() -> Vec<f64> {
    (0..=1620).map(|i| 2900.0 + 5.0 * i as f64).collect()
}

/// AB magnitude of `flux` (demo flux unit, on `wave`) through band `b`;
/// None when the band has no positive flux.
///
/// m = −2.5 log10( ∫ f_ν T dλ/λ / ∫ T dλ/λ ) − 48.6 (the AB definition,
/// common practice), f_ν = f_λ λ² / c.
pub fn ab_mag(wave: &[f64], flux: &[f64], b: usize) -> Option<f64> {
    let (c, s, _) = BANDS[b];
    let (mut num, mut den) = (0.0, 0.0);
    for (l, f) in wave.iter().zip(flux) {
        let t = (-0.5 * ((l - c) / s).powi(2)).exp() / l;
        num += f * FLUX_UNIT * l * l / C_ANGSTROM_PER_S * t;
        den += t;
    }
    let fnu = num / den;
    (fnu > 0.0).then(|| -2.5 * fnu.log10() - 48.6)
}

/// Observed magnitudes and errors from true ones and the band depths.
pub fn observe(true_mag: [Option<f64>; 5], rng: &mut impl Rng) -> ([Option<f64>; 5], [Option<f64>; 5]) {
    let mut mag = [None; 5];
    let mut err = [None; 5];
    for b in 0..5 {
        let Some(m) = true_mag[b] else { continue };
        // S/N = 5 at the depth, scaling with flux; a 0.01 mag floor.
        let snr = 5.0 * 10f64.powf(-0.4 * (m - BANDS[b].2));
        let e = (1.0857 / snr).hypot(0.01);
        if e > 1.0 {
            continue; // not detected
        }
        let n = Normal::new(0.0, e).map(|d| d.sample(rng)).unwrap_or(0.0);
        mag[b] = Some(m + n);
        err[b] = Some(e);
    }
    (mag, err)
}

/// The invented classifier's answer for an object of true class `truth` at `z`:
/// (class, probability, photometric z, whether it is wrong).
pub fn classify(truth: Option<ObjectClass>, z: f64, rng: &mut impl Rng) -> (ObjectClass, f64, f64, bool) {
    use ObjectClass::*;
    let truth = truth.unwrap_or(Galaxy);
    let wrong = rng.random::<f64>() < 0.1;
    let class = if !wrong {
        truth
    } else {
        let r: f64 = rng.random();
        match truth {
            Star => {
                if r < 0.8 {
                    Quasar
                } else {
                    Galaxy
                }
            }
            Quasar => {
                if r < 0.6 {
                    Star
                } else {
                    Galaxy
                }
            }
            Galaxy => {
                if r < 0.75 {
                    Quasar
                } else {
                    Star
                }
            }
        }
    };
    let prob = if wrong {
        rng.random_range(0.40..0.80)
    } else {
        rng.random_range(0.60..0.995)
    };
    let gauss =
        |s: f64, rng: &mut dyn rand::RngCore| Normal::new(0.0, s).map(|d| d.sample(rng)).unwrap_or(0.0);
    let phot_z = match (class, class == truth) {
        (Star, _) => 0.0,
        (Galaxy, true) if rng.random::<f64>() < 0.05 => rng.random_range(0.0..1.5),
        (Galaxy, true) => z + gauss(0.04 * (1.0 + z), rng),
        (Quasar, true) => z + gauss(0.15 * (1.0 + z), rng),
        (Galaxy, false) => rng.random_range(0.05..0.9),
        (Quasar, false) => rng.random_range(0.5..3.0),
    };
    (class, prob, phot_z.max(0.0), class != truth)
}

/// A catalogue row from its parts.
pub fn row(
    id: &str,
    (ra, dec): (f64, f64),
    (mag, err): ([Option<f64>; 5], [Option<f64>; 5]),
    (class, prob, phot_z): (ObjectClass, f64, f64),
) -> CatalogRow {
    CatalogRow {
        id: id.to_string(),
        ra: Some(ra),
        dec: Some(dec),
        mag,
        mag_err: err,
        phot_class: Some(class),
        phot_class_prob: Some((prob * 1000.0).round() / 1000.0),
        phot_z: (class != ObjectClass::Star).then_some((phot_z * 1000.0).round() / 1000.0),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn flat_fnu_source_has_the_same_ab_mag_in_every_band() {
        // f_ν = 3631 Jy ⇔ AB 0 (definition of the AB system). Pick AB 20:
        // f_ν = 10^(−0.4·(20+48.6)) erg/s/cm²/Hz, f_λ = f_ν c / λ².
        let fnu = 10f64.powf(-0.4 * (20.0 + 48.6));
        let wave = band_grid();
        let flux: Vec<f64> = wave
            .iter()
            .map(|l| fnu * C_ANGSTROM_PER_S / (l * l) / FLUX_UNIT)
            .collect();
        for b in 0..5 {
            assert_relative_eq!(ab_mag(&wave, &flux, b).unwrap(), 20.0, epsilon = 1e-6);
        }
    }

    #[test]
    fn classifier_is_wrong_about_one_in_ten() {
        use rand::SeedableRng;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1);
        let n = 20_000;
        let wrong = (0..n)
            .filter(|_| classify(Some(ObjectClass::Star), 0.0, &mut rng).3)
            .count();
        let frac = wrong as f64 / n as f64;
        assert!((frac - 0.1).abs() < 0.01, "{frac}");
    }
}
