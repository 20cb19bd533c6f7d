/*!
Catalogue photometry against a spectrum: AB magnitudes turned into flux
densities at each band's pivot wavelength, in the spectrum's own f_λ unit, so
that the review window can plot them over the spectrum (a wrong target, a bad
flux calibration or a blend shows as points off the curve).

AB magnitudes (Oke & Gunn 1983, ApJ 266, 713): f_ν = 10^(−0.4 (m + 48.6))
erg s⁻¹ cm⁻² Hz⁻¹, and f_λ = f_ν c / λ². At the band's pivot wavelength
λ_p (λ_p² = ∫R λ dλ / ∫R/λ dλ for a photon-counting response R; Tokunaga &
Vacca 2005, PASP 117, 421) this conversion holds exactly for band-averaged
fluxes, which is why the pivot wavelength is used here.

Checked against astropy.units (`u.ABmag` → f_λ with `spectral_density`) by
the fixture of `tests/scripts/record_photometry.py`.
*/
use crate::catalog::{CatalogRow, BANDS};

/// Speed of light in Å/s (CODATA exact value, 299 792 458 m/s).
pub const C_ANGSTROM_PER_S: f64 = 2.997_924_58e18;

/// The AB zero point: m = −2.5 log10 f_ν − 48.6 with f_ν in erg s⁻¹ cm⁻² Hz⁻¹
/// (Oke & Gunn 1983).
pub const AB_ZERO_POINT: f64 = 48.6;

/// One photometric band of the catalogue.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Band {
    /// Name as in [`crate::catalog::BANDS`].
    pub name: &'static str,
    /// Pivot wavelength in Å (vacuum).
    pub pivot: f64,
}

/// The catalogue's u g r i z bands, in [`BANDS`] order. Pivot wavelengths
/// (to 0.1 Å) of the response curves of Doi et al. 2010 (AJ 139, 1628,
/// Table 4: filter × detector × optics through airmass 1.3), computed from
/// the curves that the speclite 1.0.0 package ships by
/// `tests/scripts/record_photometry.py` (recorded in
/// `tests/data/photometry/ab_reference.json`, which a test holds this table to).
pub const CATALOG_BANDS: [Band; 5] = [
    Band {
        name: "u",
        pivot: 3589.3,
    },
    Band {
        name: "g",
        pivot: 4701.4,
    },
    Band {
        name: "r",
        pivot: 6177.2,
    },
    Band {
        name: "i",
        pivot: 7496.5,
    },
    Band {
        name: "z",
        pivot: 8904.2,
    },
];

/// f_ν in erg s⁻¹ cm⁻² Hz⁻¹ of AB magnitude `m`.
pub fn ab_to_fnu(m: f64) -> f64 {
    10f64.powf(-0.4 * (m + AB_ZERO_POINT))
}

/// f_λ in erg s⁻¹ cm⁻² Å⁻¹ at `wave` Å of AB magnitude `m`.
pub fn ab_to_flambda(m: f64, wave: f64) -> f64 {
    ab_to_fnu(m) * C_ANGSTROM_PER_S / (wave * wave)
}

/// What one f_λ unit of a spectrum is worth in erg s⁻¹ cm⁻² Å⁻¹, read from
/// its unit string: a scale (`1e-17`, `10^-17`, `10**-17`, `1E-17`; none
/// means 1) then erg/s/cm²/Å written in any of the usual ways
/// (`erg/s/cm2/Angstrom`, `erg s-1 cm-2 A-1`, `erg/(s cm^2 Å)`, …), or
/// W m⁻² nm⁻¹, W m⁻² µm⁻¹, W m⁻² m⁻¹ (SI). `None` for anything else (f_ν units, counts, no unit):
/// then photometry cannot be put on the spectrum's scale.
pub fn flambda_unit_scale(unit: &str) -> Option<f64> {
    let t = unit.trim();
    if t.is_empty() {
        return None;
    }
    // Split a leading number (possibly "10^-17" or "10**-17") from the unit.
    let (scale, rest) = leading_scale(t)?;
    let mut u = rest.to_lowercase();
    for (from, to) in [
        ("å", "a"),
        ("\u{212b}", "a"),
        ("angstroms", "a"),
        ("angstrom", "a"),
        ("aa", "a"),
        ("μm", "um"),
        ("µm", "um"),
        ("micron", "um"),
        ("**", ""),
        ("^", ""),
        ("²", "2"),
        ("⁻¹", "-1"),
        ("⁻²", "-2"),
        ("·", " "),
        ("*", " "),
        ("(", ""),
        (")", ""),
        ("[", ""),
        ("]", ""),
        ("sec", "s"),
    ] {
        u = u.replace(from, to);
    }
    let u: String = u.split_whitespace().collect::<Vec<_>>().join(" ");
    // Normalise to a list of (unit, power) factors.
    let mut factors: Vec<(String, i32)> = Vec::new();
    let mut sign = 1;
    let mut word = String::new();
    let push = |w: &mut String, sign: i32, f: &mut Vec<(String, i32)>| {
        if w.is_empty() {
            return;
        }
        let (name, pow) = split_power(w);
        f.push((name, sign * pow));
        w.clear();
    };
    for c in u.chars() {
        match c {
            '/' => {
                push(&mut word, sign, &mut factors);
                sign = -1;
            }
            ' ' => push(&mut word, sign, &mut factors),
            _ => word.push(c),
        }
    }
    push(&mut word, sign, &mut factors);
    factors.sort();
    let is = |want: &[(&str, i32)]| {
        let mut w: Vec<(String, i32)> = want.iter().map(|(n, p)| (n.to_string(), *p)).collect();
        w.sort();
        w == factors
    };
    if is(&[("erg", 1), ("s", -1), ("cm", -2), ("a", -1)]) {
        return Some(scale);
    }
    // SI: 1 W m⁻² = 1e3 erg s⁻¹ cm⁻²; per nm = per 10 Å, per µm = 1e4 Å, per m = 1e10 Å.
    for (len, aa) in [("nm", 10.0), ("um", 1e4), ("m", 1e10)] {
        if is(&[("w", 1), ("m", -2), (len, -1)]) || (len == "m" && is(&[("w", 1), ("m", -3)])) {
            return Some(scale * 1e3 / aa);
        }
    }
    None
}

/// "cm2" → ("cm", 2), "s-1" → ("s", −1), "a" → ("a", 1).
fn split_power(w: &str) -> (String, i32) {
    let at = w
        .find(|c: char| c.is_ascii_digit() || c == '-' || c == '+')
        .unwrap_or(w.len());
    let (name, pow) = w.split_at(at);
    (name.to_string(), pow.parse().unwrap_or(1))
}

/// A leading scale factor and the rest of the unit string.
fn leading_scale(t: &str) -> Option<(f64, &str)> {
    let end = t
        .char_indices()
        .find(|(_, c)| !(c.is_ascii_digit() || matches!(c, '.' | 'e' | 'E' | '-' | '+' | '^' | '*')))
        .map_or(t.len(), |(i, _)| i);
    // "erg" starts with 'e': only a number if it starts with a digit or '.'.
    if end == 0 || !t.starts_with(|c: char| c.is_ascii_digit() || c == '.') {
        return Some((1.0, t));
    }
    let num = &t[..end];
    let rest = &t[end..];
    let value = if let Some((base, exp)) = num.split_once("**").or_else(|| num.split_once('^')) {
        let b: f64 = base.parse().ok()?;
        let e: f64 = exp.parse().ok()?;
        b.powf(e)
    } else {
        num.parse().ok()?
    };
    (value.is_finite() && value > 0.0).then_some((value, rest))
}

/// One catalogue magnitude as a point over the spectrum.
#[derive(Debug, Clone, PartialEq)]
pub struct PhotPoint {
    /// Band name.
    pub band: &'static str,
    /// Pivot wavelength, Å.
    pub wave: f64,
    /// Flux density in the spectrum's unit.
    pub flux: f64,
    /// 1σ of the flux density from the magnitude error (None when no error).
    pub flux_err: Option<f64>,
}

/// The catalogue row's magnitudes as points in the f_λ unit worth `unit_scale`
/// erg s⁻¹ cm⁻² Å⁻¹ (see [`flambda_unit_scale`]). Bands without a finite
/// magnitude are left out. The error is the first-order one,
/// σ_f = f · 0.4 ln 10 · σ_m.
pub fn points(row: &CatalogRow, unit_scale: f64) -> Vec<PhotPoint> {
    CATALOG_BANDS
        .iter()
        .enumerate()
        .filter_map(|(k, band)| {
            debug_assert_eq!(band.name, BANDS[k]);
            let m = row.mag[k].filter(|m| m.is_finite())?;
            let flux = ab_to_flambda(m, band.pivot) / unit_scale;
            let flux_err = row.mag[k]
                .and(row.mag_err[k])
                .filter(|e| e.is_finite() && *e >= 0.0)
                .map(|e| flux * 0.4 * std::f64::consts::LN_10 * e);
            Some(PhotPoint {
                band: band.name,
                wave: band.pivot,
                flux,
                flux_err,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn zero_point_is_3631_jansky() {
        // AB magnitude 0 is 3631 Jy = 3.631e-20 erg s⁻¹ cm⁻² Hz⁻¹ (Oke & Gunn 1983).
        assert_relative_eq!(ab_to_fnu(0.0), 3.631e-20, max_relative = 1e-3);
    }

    #[test]
    fn unit_strings() {
        for (s, want) in [
            ("1e-17 erg/s/cm2/Angstrom", 1e-17),
            ("10^-17 erg/s/cm^2/Å", 1e-17),
            ("10**-17 erg s-1 cm-2 A-1", 1e-17),
            ("erg/(s cm2 Angstrom)", 1.0),
            ("1E-16 erg/cm2/s/AA", 1e-16),
            ("W/m2/nm", 100.0),
            ("W m-2 um-1", 0.1),
        ] {
            let got = flambda_unit_scale(s).unwrap_or_else(|| panic!("{s} not understood"));
            assert_relative_eq!(got, want, max_relative = 1e-12);
        }
        for s in ["", "counts", "Jy", "erg/s/cm2/Hz", "1e-17", "nonsense 1e-17"] {
            assert!(flambda_unit_scale(s).is_none(), "{s} should not be an f_λ unit");
        }
    }

    #[test]
    fn points_skip_missing_bands_and_carry_errors() {
        let row = CatalogRow {
            mag: [None, Some(20.0), Some(f64::NAN), Some(19.0), Some(18.5)],
            mag_err: [None, Some(0.1), None, None, Some(0.05)],
            ..Default::default()
        };
        let p = points(&row, 1e-17);
        let bands: Vec<&str> = p.iter().map(|x| x.band).collect();
        assert_eq!(bands, ["g", "i", "z"]);
        assert_relative_eq!(p[0].flux, ab_to_flambda(20.0, 4701.4) / 1e-17);
        assert_relative_eq!(p[0].flux_err.unwrap(), p[0].flux * 0.4 * 10f64.ln() * 0.1);
        assert!(p[1].flux_err.is_none());
    }
}
