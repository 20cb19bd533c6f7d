/*!
Settings of the redshift engine and its errors.
*/
use crate::ObjectClass;
use serde::{Deserialize, Serialize};

/// How the redshift is measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    /// χ²(z) of templates + Legendre polynomials (the default).
    #[default]
    Chi2,
    /// Classic Fourier cross-correlation with the Tonry & Davis (1979) r statistic.
    XCorr,
}

impl Method {
    /// Lower-case name, as parsed by `FromStr`.
    pub fn as_str(self) -> &'static str {
        match self {
            Method::Chi2 => "chi2",
            Method::XCorr => "xcorr",
        }
    }
}

impl std::str::FromStr for Method {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim().to_ascii_lowercase().as_str() {
            "chi2" => Ok(Method::Chi2),
            "xcorr" => Ok(Method::XCorr),
            o => Err(format!("unknown method '{o}' (expected chi2 or xcorr)")),
        }
    }
}

/// Settings of an [`Engine`](super::Engine).
///
/// Serialised as is into campaign manifests and export provenance; fields
/// missing from an older file take their defaults.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct FitConfig {
    /// Step of the common grid in log10 λ (one trial redshift per step).
    pub dloglam: f64,
    /// Classes to fit.
    pub classes: Vec<ObjectClass>,
    /// Redshift range for galaxies.
    pub z_galaxy: (f64, f64),
    /// Redshift range for quasars.
    pub z_quasar: (f64, f64),
    /// Redshift range for stars.
    pub z_star: (f64, f64),
    /// Number of Legendre polynomial terms added to every model (0 = none).
    pub poly_terms: usize,
    /// Candidates kept per class.
    pub n_candidates: usize,
    /// Minimum velocity separation (km/s) between candidates of one class.
    pub min_separation_kms: f64,
    /// Mask strong night-sky lines and telluric bands before fitting.
    pub mask_sky: bool,
    /// χ² or cross-correlation.
    pub method: Method,
    /// Constrain template amplitudes to be ≥ 0 (physical templates; turn off
    /// for signed bases such as principal components).
    pub nonnegative: bool,
    /// Systematic error floor ε as a fraction of the (smoothed) flux: each
    /// pixel's variance becomes σ² + (ε·|F̄|)², F̄ the flux averaged over
    /// [`SYS_FLOOR_WINDOW`](super::prep::SYS_FLOOR_WINDOW) grid pixels. At
    /// very high S/N the templates' own mismatch (a few per cent of the
    /// continuum) then no longer outweighs every real feature; a fractional
    /// floor of a few per cent for template mismatch is common practice in
    /// spectral fitting. 0 turns it off.
    #[serde(default = "default_sys_floor")]
    pub sys_floor: f64,
    /// Inside the telluric absorption bands (observed frame, the bands of
    /// [`crate::lines::telluric_bands`]) each pixel's variance gains
    /// (d·|F̄|)², d the band's typical depth in a spectrum not corrected for
    /// the atmosphere ([`crate::lines::telluric_depth`]; F̄ as for
    /// [`FitConfig::sys_floor`]). Whether and how well a file was corrected
    /// is unknown to the fit: an uncorrected O₂ A band takes 40 % or more of a
    /// red star's flux at 7600 Å, which no template has, and without the
    /// floor that difference was read as template mismatch (real M dwarfs
    /// fitted at χ²_r ≈ 2.8 at S/N 10 instead of 1.5; README, "Stars"). In a
    /// corrected spectrum the bands merely weigh less. On by default.
    #[serde(default = "yes")]
    pub telluric_floor: bool,
    /// Inside the star window (|cz| ≤
    /// [`STAR_VMAX_KMS`](super::engine::STAR_VMAX_KMS)) a star solution
    /// ranks before a galaxy solution of lower χ² when the difference is
    /// within the galaxy basis's extra freedom (Δk · ln N, the Bayesian
    /// information criterion's price of its extra parameters), and the result
    /// is flagged ambiguous. The galaxy basis holds the light of A stars and
    /// can mimic almost any single star at rest with its extra freedom, while
    /// galaxies slower than the Galaxy's own stars are rare among survey
    /// targets.
    #[serde(default = "yes")]
    pub star_window_prefers_stars: bool,
    /// At any redshift, a star solution ranks before a galaxy or quasar
    /// solution of lower χ² when the difference is within the class basis's
    /// extra freedom (the same Δk · ln N price as
    /// [`FitConfig::star_window_prefers_stars`]), and the result is flagged
    /// ambiguous. A basis of four templates fits any smooth spectrum at least
    /// as well as one star template with its tilt: a featureless white dwarf
    /// came out a quasar or galaxy in 35 of 40 mock observations at S/N 5–10
    /// by Δχ² 1–17 (README, "Stars"). On by default.
    #[serde(default = "yes")]
    pub stars_priced_by_bic: bool,
    /// Add one throughput term per template: the column T_k·x with x the
    /// first Legendre polynomial across the fitted range, so that a linear
    /// tilt of the instrument's throughput multiplies the templates (the
    /// additive polynomials alone cannot scale a line's strength with λ).
    /// Off by default: it doubles the template columns and costs about 1.7×
    /// the time of a full fit, and on the synthetic recovery run (tilts up to
    /// ±40 % across the range) it changes nothing measurable once the
    /// non-negativity constraint is taken where each template's information
    /// lies (see [`solve_constrained`](super::prep::solve_constrained)).
    /// Turn it on for spectra whose relative flux calibration is poor.
    #[serde(default)]
    pub throughput_terms: bool,
    /// The throughput term T·x for every **stellar** template (each fitted
    /// alone), whatever [`FitConfig::throughput_terms`] says. A star is a
    /// single template times the instrument's throughput, so a tilt of that
    /// throughput is the one freedom a star lacks against the galaxy and
    /// quasar bases, whose continuum polynomials and several templates absorb
    /// it: without it a real hot subdwarf or early-M dwarf observed through a
    /// tilted throughput fits better as a galaxy or quasar. The star window
    /// (a few hundred km/s) keeps the extra freedom from making stars of
    /// other objects. On by default.
    #[serde(default = "yes")]
    pub star_throughput_terms: bool,
}

fn yes() -> bool {
    true
}

/// Default of [`FitConfig::sys_floor`].
pub const DEFAULT_SYS_FLOOR: f64 = 0.03;

fn default_sys_floor() -> f64 {
    DEFAULT_SYS_FLOOR
}

impl Default for FitConfig {
    fn default() -> Self {
        FitConfig {
            dloglam: 1e-4,
            classes: ObjectClass::ALL.to_vec(),
            z_galaxy: (-0.005, 1.7),
            z_quasar: (0.05, 7.0),
            z_star: (-0.005, 0.005),
            poly_terms: 3,
            n_candidates: 3,
            min_separation_kms: 1000.0,
            mask_sky: false,
            method: Method::Chi2,
            nonnegative: true,
            sys_floor: DEFAULT_SYS_FLOOR,
            telluric_floor: true,
            star_window_prefers_stars: true,
            stars_priced_by_bic: true,
            throughput_terms: false,
            star_throughput_terms: true,
        }
    }
}

impl FitConfig {
    /// Columns per template for the templates of `class`: 2 (T and its
    /// throughput term T·x) with [`FitConfig::throughput_terms`], or for
    /// stars with [`FitConfig::star_throughput_terms`]; else 1.
    pub fn groups_of(&self, class: ObjectClass) -> usize {
        if self.throughput_terms || (class == ObjectClass::Star && self.star_throughput_terms) {
            2
        } else {
            1
        }
    }

    /// Redshift range configured for `class`.
    pub fn z_range(&self, class: ObjectClass) -> (f64, f64) {
        match class {
            ObjectClass::Galaxy => self.z_galaxy,
            ObjectClass::Quasar => self.z_quasar,
            ObjectClass::Star => self.z_star,
        }
    }
}

/// Why a fit could not be done.
#[derive(Debug, thiserror::Error, PartialEq)]
#[non_exhaustive]
pub enum FitError {
    /// A setting is out of range.
    #[error("invalid fit setting: {0}")]
    InvalidConfig(String),
    /// The template set cannot be used.
    #[error("unusable templates: {0}")]
    BadTemplates(String),
    /// Too few good pixels on the engine grid.
    #[error("only {good} good pixels after resampling; at least {needed} are needed")]
    TooFewPixels {
        /// good pixels found
        good: usize,
        /// pixels needed
        needed: usize,
    },
    /// No class of the configuration can reach this spectrum.
    #[error("no template covers this spectrum at any trial redshift")]
    NoCoverage,
    /// The refinement could not run.
    #[error("refinement failed: {0}")]
    Refine(String),
}

impl FitConfig {
    /// One line for provenance headers and `zvet campaign status`.
    pub fn summary(&self) -> String {
        let classes: Vec<&str> = self.classes.iter().map(|c| c.as_str()).collect();
        format!(
            "method={} dloglam={} classes={} z_galaxy={}..{} z_quasar={}..{} z_star={}..{} \
             poly_terms={} n_candidates={} min_separation_kms={} mask_sky={} nonnegative={} \
             sys_floor={} telluric_floor={} star_window_prefers_stars={} stars_priced_by_bic={} \
             throughput_terms={} star_throughput_terms={}",
            self.method.as_str(),
            self.dloglam,
            classes.join(","),
            self.z_galaxy.0,
            self.z_galaxy.1,
            self.z_quasar.0,
            self.z_quasar.1,
            self.z_star.0,
            self.z_star.1,
            self.poly_terms,
            self.n_candidates,
            self.min_separation_kms,
            self.mask_sky,
            self.nonnegative,
            self.sys_floor,
            self.telluric_floor,
            self.star_window_prefers_stars,
            self.stars_priced_by_bic,
            self.throughput_terms,
            self.star_throughput_terms
        )
    }
}
