/*!
Spectral lines: rest-frame vacuum wavelengths of the emission and absorption
features used to judge a redshift, the strong night-sky lines and the telluric
absorption bands (both in the observed frame).

Every line carries where its wavelength comes from. Values marked "from memory"
are standard laboratory (vacuum) wavelengths as tabulated by the NIST Atomic
Spectra Database, written down without consulting the table; the integration
test `lines_match_published_lists` checks every line we share with a published
galaxy line list to 0.05 Å. Blends and molecular bands have no single
laboratory wavelength; their conventional positions are marked "common
practice". Air wavelengths (sky lines, bands) were converted to vacuum once with
the standard dispersion formula of the IAU convention and stored as vacuum.

The tables live in `data.rs`; this file holds the types and the look-ups.
*/
mod data;

use serde::{Deserialize, Serialize};

/// What a line does in a spectrum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum LineKind {
    /// Emission line (nebular, broad quasar line, …).
    Emission,
    /// Absorption line or band (stellar, interstellar).
    Absorption,
    /// Night-sky emission line (observed frame).
    Sky,
}

/// One spectral line.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Line {
    /// Display name, e.g. `Hα`, `[O III] 5008`, `Ca II K`.
    pub name: &'static str,
    /// Vacuum wavelength in Å (rest frame, or observed frame for sky lines).
    pub wave: f64,
    /// Emission, absorption or sky.
    pub kind: LineKind,
    /// Rough relative strength for markers and labels, 0–1 (1 = always label).
    pub strength: f64,
    /// Where the wavelength comes from.
    pub source: &'static str,
}

/// Source note for laboratory wavelengths recalled from the NIST Atomic Spectra Database.
pub const SRC_NIST: &str = "NIST Atomic Spectra Database, vacuum (from memory)";
/// Source note for conventional positions of blends and bands.
pub const SRC_PRACTICE: &str = "common practice (blend/band position)";
/// Source note for sky lines: air values from memory, converted to vacuum,
/// each checked against a real night-sky spectrum or the NIST Hg I lamp list
/// (test `lines::every_sky_line_is_seen_in_a_real_night_sky_spectrum_or_a_lamp_list`).
pub const SRC_SKY: &str =
    "night-sky line, air value from memory converted to vacuum; checked against a real night-sky spectrum";

/// Rest-frame emission and absorption lines (vacuum Å), sorted by wavelength.
pub fn all() -> &'static [Line] {
    data::ALL
}

/// Strong night-sky emission lines (observed frame, vacuum Å), sorted by wavelength.
pub fn sky() -> &'static [Line] {
    data::SKY
}

/// Telluric absorption bands as (start, end) observed-frame vacuum Å, sorted.
///
/// Common practice, from memory: the O₂ γ, B and A bands and the water bands
/// of the far red (wide enough to cover their strong parts).
pub fn telluric_bands() -> &'static [(f64, f64)] {
    data::TELLURIC
}

/// A short list of the most useful lines for close-up views when judging a
/// redshift (a subset of [`all`], sorted by wavelength).
pub fn diagnostic() -> &'static [Line] {
    static DIAG: std::sync::OnceLock<Vec<Line>> = std::sync::OnceLock::new();
    DIAG.get_or_init(|| data::DIAGNOSTIC.iter().filter_map(|n| find(n).copied()).collect())
}

/// The line named `name` in [`all`] or [`sky`] (exact name), if any.
pub fn find(name: &str) -> Option<&'static Line> {
    all().iter().chain(sky()).find(|l| l.name == name)
}

/// Rest wavelength of the line `name` in [`all`]; panics if the name is not in
/// the table (for use with the crate's own constant names only).
pub fn wave_of(name: &str) -> f64 {
    match all().iter().find(|l| l.name == name) {
        Some(l) => l.wave,
        None => panic!("line '{name}' is not in the line list"),
    }
}

/// Lines of [`all`] whose observed wavelength at redshift `z` falls in `[lo, hi]` Å.
pub fn in_window(z: f64, lo: f64, hi: f64) -> impl Iterator<Item = &'static Line> {
    all().iter().filter(move |l| {
        let w = l.wave * (1.0 + z);
        w >= lo && w <= hi
    })
}

/// Whether an observed vacuum wavelength lies inside a telluric band.
pub fn in_telluric_band(lam: f64) -> bool {
    telluric_bands().iter().any(|&(a, b)| lam >= a && lam <= b)
}

/// The typical fraction of the flux absorbed at observed vacuum wavelength
/// `lam` in a spectrum not corrected for telluric absorption: the band's
/// average depth inside a band of [`telluric_bands`], 0 outside (values from
/// memory; see `data::TELLURIC_DEPTH`).
pub fn telluric_depth(lam: f64) -> f64 {
    telluric_bands()
        .iter()
        .zip(data::TELLURIC_DEPTH)
        .find(|((a, b), _)| lam >= *a && lam <= *b)
        .map_or(0.0, |(_, d)| *d)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tables_are_sorted_and_sane() {
        for table in [all(), sky()] {
            for w in table.windows(2) {
                assert!(w[0].wave <= w[1].wave, "{} before {}", w[0].name, w[1].name);
            }
            for l in table {
                assert!(l.wave > 900.0 && l.wave < 20000.0, "{}", l.name);
                assert!((0.0..=1.0).contains(&l.strength), "{}", l.name);
                assert!(!l.source.is_empty());
            }
        }
        assert!(sky().iter().all(|l| l.kind == LineKind::Sky));
        assert!(all().iter().all(|l| l.kind != LineKind::Sky));
        for w in telluric_bands().windows(2) {
            assert!(w[0].1 < w[1].0);
        }
        assert_eq!(data::TELLURIC_DEPTH.len(), telluric_bands().len());
        assert!(data::TELLURIC_DEPTH.iter().all(|d| *d > 0.0 && *d < 1.0));
    }

    #[test]
    fn names_are_unique() {
        let mut names: Vec<&str> = all().iter().chain(sky()).map(|l| l.name).collect();
        names.sort_unstable();
        let n = names.len();
        names.dedup();
        assert_eq!(names.len(), n);
    }

    #[test]
    fn diagnostic_lines_all_resolve() {
        assert_eq!(diagnostic().len(), data::DIAGNOSTIC.len());
    }

    #[test]
    fn balmer_lines_follow_the_rydberg_formula() {
        // 1/λ = R_H (1/4 − 1/n²) with R_H = R∞/(1 + mₑ/mₚ) = 109677.58 cm⁻¹
        // (CODATA R∞ = 109737.31568 cm⁻¹, mₚ/mₑ = 1836.15267); fine structure
        // moves the NIST centroids by < 0.1 Å.
        let r_h = 109_737.315_68 / (1.0 + 1.0 / 1_836.152_673);
        for (name, n) in [("Hα", 3.0), ("Hβ", 4.0), ("Hγ", 5.0), ("Hδ", 6.0)] {
            let lam = 1e8 / (r_h * (0.25 - 1.0 / (n * n)));
            approx::assert_abs_diff_eq!(wave_of(name), lam, epsilon = 0.12);
        }
        let lya = 1e8 / (r_h * 0.75);
        approx::assert_abs_diff_eq!(wave_of("Lyα"), lya, epsilon = 0.05);
    }

    #[test]
    fn telluric_lookup() {
        assert!(in_telluric_band(7620.0)); // O₂ A band head (common practice)
        assert!(!in_telluric_band(5000.0));
    }
}
