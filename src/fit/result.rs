/*!
What the engine hands on: the χ²(z) curves, the ranked candidates, the class
decision with its warnings, and the emission-line measurements.
*/
use crate::ObjectClass;
use serde::{Deserialize, Serialize};

/// Warning bits of our own naming (see each constant).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub struct Warnings(pub u32);

impl Warnings {
    /// Δχ² to the next distinct solution is small.
    pub const AMBIGUOUS: u32 = 1 << 0;
    /// The best minimum sits at an edge of the redshift grid.
    pub const AT_GRID_EDGE: u32 = 1 << 1;
    /// The leading template coefficient is negative (unphysical).
    pub const NEGATIVE_TEMPLATE: u32 = 1 << 2;
    /// Too few good pixels for a trustworthy fit.
    pub const FEW_PIXELS: u32 = 1 << 3;
    /// The best fit misses the data by far more than their noise and the
    /// template's stated accuracy allow (reduced χ² far above 1 for a
    /// template with none stated; `fit::method::fit_quality`).
    pub const POOR_FIT: u32 = 1 << 4;
    /// The file had no error array; the noise was estimated.
    pub const NOISE_ESTIMATED: u32 = 1 << 5;
    /// The best star and the best non-star solution are close in χ²
    /// (see `CLASS_CLOSE_DCHI2` in the engine; when a star is the answer, a
    /// galaxy or quasar solution inside the star window does not count):
    /// the class is uncertain.
    pub const CLASS_CLOSE: u32 = 1 << 6;
    /// The redshift rests on one emission feature over a continuum with no
    /// signal (see `rests_on_one_line` in the engine): the line could be
    /// another line at another redshift.
    pub const SINGLE_LINE: u32 = 1 << 7;
    /// A quasar answer resting on fewer than two emission features (see
    /// `has_few_lines` in the engine): the class rests on the continuum's
    /// shape, which a featureless star (a DC white dwarf) or a BL Lac object
    /// shares.
    pub const FEW_LINES: u32 = 1 << 8;
    /// A galaxy or quasar answer within the stars' velocity range of rest
    /// (see `STAR_VMAX_KMS` in the engine), where every star is and hardly
    /// any galaxy of a survey sample: a class basis can mimic a star there
    /// (the galaxy basis holds the light of A stars), so the class is in doubt.
    pub const NEAR_REST: u32 = 1 << 9;
    /// Names of the bits, in bit order.
    pub const NAMES: [(u32, &'static str); 10] = [
        (Self::AMBIGUOUS, "ambiguous"),
        (Self::AT_GRID_EDGE, "at_grid_edge"),
        (Self::NEGATIVE_TEMPLATE, "negative_template"),
        (Self::FEW_PIXELS, "few_pixels"),
        (Self::POOR_FIT, "poor_fit"),
        (Self::NOISE_ESTIMATED, "noise_estimated"),
        (Self::CLASS_CLOSE, "class_close"),
        (Self::SINGLE_LINE, "single_line"),
        (Self::FEW_LINES, "few_lines"),
        (Self::NEAR_REST, "near_rest"),
    ];

    /// True when bit `b` is set.
    pub fn has(self, b: u32) -> bool {
        self.0 & b != 0
    }

    /// Set bit `b`.
    pub fn set(&mut self, b: u32) {
        self.0 |= b;
    }

    /// A warning that doubts the answer itself (another redshift or class
    /// may be right): `ambiguous`, `class_close`, `single_line`, `few_lines`
    /// or `near_rest`.
    pub fn doubts_answer(self) -> bool {
        self.has(Self::AMBIGUOUS | Self::CLASS_CLOSE | Self::SINGLE_LINE | Self::FEW_LINES | Self::NEAR_REST)
    }

    /// Names of the set bits joined by `|` (empty string when none).
    pub fn names(self) -> String {
        Self::NAMES
            .iter()
            .filter(|(b, _)| self.has(*b))
            .map(|(_, n)| *n)
            .collect::<Vec<_>>()
            .join("|")
    }
}

/// A local minimum of χ²(z), refined.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Candidate {
    /// Class of the templates that gave it.
    pub class: ObjectClass,
    /// Template name (stars: the stellar type; bases: the class basis name).
    pub template: String,
    /// Refined redshift.
    pub z: f64,
    /// 1σ redshift uncertainty from the χ² curvature (Δχ² = 1).
    pub z_err: f64,
    /// χ² at the refined redshift.
    pub chi2: f64,
    /// Template coefficients followed by the polynomial coefficients.
    pub coeffs: Vec<f64>,
}

/// χ²(z) over the redshift grid for one class (or one stellar template).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Chi2Curve {
    /// Class.
    pub class: ObjectClass,
    /// Template name (or class basis name).
    pub template: String,
    /// Trial redshifts.
    pub z: Vec<f64>,
    /// χ² at each trial z (f64::INFINITY where the fit was impossible).
    pub chi2: Vec<f64>,
}

/// One emission line measured at the chosen redshift.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LineMeasurement {
    /// Line name as in the line list, e.g. `Hα` / `[O III] 5008`.
    pub name: String,
    /// Rest vacuum wavelength (Å).
    pub rest_wave: f64,
    /// Observed centre (Å).
    pub obs_wave: f64,
    /// Integrated Gaussian flux (flux unit × Å).
    pub flux: f64,
    /// 1σ uncertainty of `flux`.
    pub flux_err: f64,
    /// Gaussian σ in km/s.
    pub sigma_kms: f64,
    /// Rest-frame equivalent width (Å, positive for emission).
    pub ew_rest: f64,
    /// flux / flux_err.
    pub snr: f64,
    /// Offset and width were fitted; `false` when no line of its kind was
    /// detected and they were fixed (see [`crate::fit::emission`]).
    #[serde(default = "width_fitted_default")]
    pub width_fitted: bool,
    /// Continuum under the line centre (flux unit; stellar absorption included).
    #[serde(default = "nan_default")]
    pub continuum: f64,
    /// Balmer lines: rest-frame equivalent width (Å, positive for absorption)
    /// of the stellar absorption under the line, where measured.
    #[serde(default)]
    pub abs_ew_rest: Option<f64>,
}

impl LineMeasurement {
    /// Detected: S/N at or above [`crate::fit::emission::DETECT_SNR`].
    pub fn detected(&self) -> bool {
        self.snr >= crate::fit::emission::DETECT_SNR
    }

    /// 3σ upper limit on the flux (3 × `flux_err`, common practice) of a
    /// line that is not detected; `None` for a detected line.
    pub fn upper_limit(&self) -> Option<f64> {
        (!self.detected() && self.flux_err.is_finite()).then_some(3.0 * self.flux_err)
    }
}

fn width_fitted_default() -> bool {
    true
}

fn nan_default() -> f64 {
    f64::NAN
}

/// The best solution of one class for one spectrum: how close that class
/// came, whether or not it won.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ClassSolution {
    /// The class.
    pub class: ObjectClass,
    /// Template that gave it (stars: the stellar type; bases: the basis name).
    pub template: String,
    /// Redshift of the class's best solution.
    pub z: f64,
    /// χ² of the class's best solution (same pixels as every other class).
    pub chi2: f64,
}

impl ClassSolution {
    /// The first (best) candidate of each class, in the candidates' order.
    pub fn from_candidates(candidates: &[Candidate]) -> Vec<ClassSolution> {
        let mut out: Vec<ClassSolution> = Vec::new();
        for c in candidates {
            if out.iter().all(|s| s.class != c.class) {
                out.push(ClassSolution {
                    class: c.class,
                    template: c.template.clone(),
                    z: c.z,
                    chi2: c.chi2,
                });
            }
        }
        out
    }

    /// Compact text form `class:template:z:χ²`, solutions joined by `;`
    /// (the `per_class` column of the result table).
    pub fn join(solutions: &[ClassSolution]) -> String {
        solutions
            .iter()
            .map(|s| format!("{}:{}:{:.6}:{:.2}", s.class, s.template, s.z, s.chi2))
            .collect::<Vec<_>>()
            .join(";")
    }
}

/// Everything the engine found for one spectrum.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitResult {
    /// Object id.
    pub object_id: String,
    /// Candidates over all classes, best (lowest χ²) first.
    pub candidates: Vec<Candidate>,
    /// χ² of the runner-up distinct solution minus the best.
    pub delta_chi2: f64,
    /// Best χ² / degrees of freedom.
    pub chi2_reduced: f64,
    /// Good pixels used.
    pub n_good: usize,
    /// Median per-pixel S/N.
    pub snr_median: f64,
    /// Warning bits.
    pub warnings: Warnings,
    /// χ²(z) curves (one per class; stars: the best template's curve).
    pub curves: Vec<Chi2Curve>,
    /// Emission lines measured at the best redshift.
    pub lines: Vec<LineMeasurement>,
    /// The best solution of every fitted class, best class first (empty in
    /// results read from files written before it existed).
    #[serde(default)]
    pub per_class: Vec<ClassSolution>,
    /// The fit was a poor one with the configured continuum terms and its
    /// refit with more (`POOR_FIT_POLY_TERMS` in the engine) was kept:
    /// `chi2_reduced`, `delta_chi2`, the candidates and the warnings are the
    /// refit's: `poor_fit` is then set only if the refit, too, misses the
    /// spectrum by more than its noise (false in results read from files
    /// written before it existed).
    #[serde(default)]
    pub refit_kept: bool,
}

impl FitResult {
    /// The best candidate, if any.
    pub fn best(&self) -> Option<&Candidate> {
        self.candidates.first()
    }

    /// The best solution of `class`, if that class was fitted.
    pub fn class_best(&self, class: ObjectClass) -> Option<&ClassSolution> {
        self.per_class.iter().find(|s| s.class == class)
    }
}
