/*!
`fits.jsonl`, the cache of automatic fits: one JSON object per line and
object, written as a whole through the atomic rewrite.

The lines are our own flat record ([`FitRecord`]) rather than the engine's
result type: JSON has no ∞ or NaN (Δχ² is ∞ when there is no runner-up), so
such numbers are written as `null` and read back as ∞ (Δχ²) or NaN (the
rest). The χ²(z) curves are not cached — they are large (one value per grid
step and class) and the engine recomputes them in well under a second when an
object is opened.
*/
use crate::fit::{Candidate, FitResult, LineMeasurement, Warnings};
use crate::ObjectClass;
use serde::{Deserialize, Serialize};

/// Format version of a `fits.jsonl` line.
pub const FIT_CACHE_FORMAT: u32 = 1;

fn fin(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

fn nan(x: Option<f64>) -> f64 {
    x.unwrap_or(f64::NAN)
}

/// One candidate in the cache.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CandidateRecord {
    /// Class.
    pub class: ObjectClass,
    /// Template name.
    pub template: String,
    /// Redshift.
    pub z: Option<f64>,
    /// Its error.
    pub z_err: Option<f64>,
    /// χ².
    pub chi2: Option<f64>,
    /// Coefficients.
    pub coeffs: Vec<Option<f64>>,
}

/// One measured line in the cache.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LineRecord {
    /// Name.
    pub name: String,
    /// Rest wavelength (Å).
    pub rest_wave: Option<f64>,
    /// Observed centre (Å).
    pub obs_wave: Option<f64>,
    /// Flux.
    pub flux: Option<f64>,
    /// Its error.
    pub flux_err: Option<f64>,
    /// Gaussian σ (km/s).
    pub sigma_kms: Option<f64>,
    /// Rest equivalent width (Å).
    pub ew_rest: Option<f64>,
    /// S/N.
    pub snr: Option<f64>,
    /// Offset and width were fitted (absent in older caches: fitted).
    #[serde(default = "fitted_default")]
    pub width_fitted: bool,
    /// Continuum under the line (absent in older caches).
    #[serde(default)]
    pub continuum: Option<f64>,
    /// Balmer lines: stellar absorption rest equivalent width (Å).
    #[serde(default)]
    pub abs_ew_rest: Option<f64>,
}

/// One line of `fits.jsonl`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitRecord {
    /// Format version.
    pub v: u32,
    /// Object id.
    pub id: String,
    /// Candidates, best first.
    pub candidates: Vec<CandidateRecord>,
    /// Δχ² to the runner-up (`null`: none).
    pub delta_chi2: Option<f64>,
    /// Reduced χ².
    pub chi2_reduced: Option<f64>,
    /// Good pixels.
    pub n_good: usize,
    /// Median S/N.
    pub snr_median: Option<f64>,
    /// Warning bits (see the engine's `Warnings`).
    pub warnings: u32,
    /// Warning names, for people reading the file.
    #[serde(default)]
    pub warning_names: String,
    /// Lines measured.
    #[serde(default)]
    pub lines: Vec<LineRecord>,
}

impl From<&FitResult> for FitRecord {
    fn from(f: &FitResult) -> Self {
        FitRecord {
            v: FIT_CACHE_FORMAT,
            id: f.object_id.clone(),
            candidates: f
                .candidates
                .iter()
                .map(|c| CandidateRecord {
                    class: c.class,
                    template: c.template.clone(),
                    z: fin(c.z),
                    z_err: fin(c.z_err),
                    chi2: fin(c.chi2),
                    coeffs: c.coeffs.iter().map(|&x| fin(x)).collect(),
                })
                .collect(),
            delta_chi2: fin(f.delta_chi2),
            chi2_reduced: fin(f.chi2_reduced),
            n_good: f.n_good,
            snr_median: fin(f.snr_median),
            warnings: f.warnings.0,
            warning_names: f.warnings.names(),
            lines: f
                .lines
                .iter()
                .map(|l| LineRecord {
                    name: l.name.clone(),
                    rest_wave: fin(l.rest_wave),
                    obs_wave: fin(l.obs_wave),
                    flux: fin(l.flux),
                    flux_err: fin(l.flux_err),
                    sigma_kms: fin(l.sigma_kms),
                    ew_rest: fin(l.ew_rest),
                    snr: fin(l.snr),
                    width_fitted: l.width_fitted,
                    continuum: fin(l.continuum),
                    abs_ew_rest: l.abs_ew_rest.and_then(fin),
                })
                .collect(),
        }
    }
}

impl From<FitRecord> for FitResult {
    fn from(r: FitRecord) -> Self {
        FitResult {
            object_id: r.id,
            candidates: r
                .candidates
                .into_iter()
                .map(|c| Candidate {
                    class: c.class,
                    template: c.template,
                    z: nan(c.z),
                    z_err: nan(c.z_err),
                    chi2: nan(c.chi2),
                    coeffs: c.coeffs.into_iter().map(nan).collect(),
                })
                .collect(),
            delta_chi2: r.delta_chi2.unwrap_or(f64::INFINITY),
            chi2_reduced: nan(r.chi2_reduced),
            n_good: r.n_good,
            snr_median: nan(r.snr_median),
            warnings: Warnings(r.warnings),
            curves: Vec::new(),
            lines: r
                .lines
                .into_iter()
                .map(|l| LineMeasurement {
                    name: l.name,
                    rest_wave: nan(l.rest_wave),
                    obs_wave: nan(l.obs_wave),
                    flux: nan(l.flux),
                    flux_err: nan(l.flux_err),
                    sigma_kms: nan(l.sigma_kms),
                    ew_rest: nan(l.ew_rest),
                    snr: nan(l.snr),
                    width_fitted: l.width_fitted,
                    continuum: nan(l.continuum),
                    abs_ew_rest: l.abs_ew_rest,
                })
                .collect(),
        }
    }
}

fn fitted_default() -> bool {
    true
}

/// Parse the text of a `fits.jsonl`; bad lines come back as
/// `line N: message` problems.
pub fn parse(text: &str) -> (Vec<FitResult>, Vec<String>) {
    let mut out = Vec::new();
    let mut problems = Vec::new();
    for (i, line) in text.lines().enumerate() {
        if line.trim().is_empty() {
            continue;
        }
        match serde_json::from_str::<FitRecord>(line) {
            Ok(r) if r.v <= FIT_CACHE_FORMAT => out.push(r.into()),
            Ok(r) => problems.push(format!(
                "fits.jsonl line {}: format version {} is newer than this zvet",
                i + 1,
                r.v
            )),
            Err(e) => problems.push(format!("fits.jsonl line {}: {e}", i + 1)),
        }
    }
    (out, problems)
}

/// The text of a `fits.jsonl` holding `fits` in the given order.
pub fn to_text(fits: &[&FitResult]) -> Result<String, serde_json::Error> {
    let mut s = String::new();
    for f in fits {
        s.push_str(&serde_json::to_string(&FitRecord::from(*f))?);
        s.push('\n');
    }
    Ok(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_keeps_infinities_as_documented() {
        let f = FitResult {
            object_id: "o".into(),
            candidates: vec![Candidate {
                class: ObjectClass::Quasar,
                template: "qso".into(),
                z: 2.345678901234,
                z_err: 1e-4,
                chi2: 1000.5,
                coeffs: vec![1.0, f64::NAN],
            }],
            delta_chi2: f64::INFINITY,
            chi2_reduced: 1.1,
            n_good: 4000,
            snr_median: 5.5,
            warnings: Warnings(Warnings::AMBIGUOUS | Warnings::POOR_FIT),
            curves: vec![],
            lines: vec![],
        };
        let text = to_text(&[&f]).unwrap();
        assert!(text.contains("\"warning_names\":\"ambiguous|poor_fit\""));
        let (back, problems) = parse(&format!("{text}garbage\n"));
        assert_eq!(problems.len(), 1);
        assert!(problems[0].contains("line 2"));
        let b = &back[0];
        assert!(b.delta_chi2.is_infinite());
        assert!(b.candidates[0].coeffs[1].is_nan());
        assert_eq!(b.candidates[0].z.to_bits(), f.candidates[0].z.to_bits());
        assert_eq!(b.warnings, f.warnings);
    }
}
