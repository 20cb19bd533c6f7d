/*!
The summary report of a campaign: the numbers ([`ReportNumbers`], also saved
as `report.json`), SVG plots ([`plots`]) and one self-contained `report.html`
with the plots inlined (`html.rs`).

What is counted (also in the README):
- confusion matrices over galaxy/quasar/star/unclear with the *vetted* class
  as the reference (rows) and the photometric (or automatic) class as the
  prediction (columns); per-class accuracy = diagonal / row sum (the fraction
  of the objects vetted as that class that the classifier got right; not
  defined for `unclear`, which no classifier predicts);
- redshifts: every object with a consensus verdict that has a vetted
  redshift, a class other than unclear and an automatic fit;
  |Δz|/(1+z) = |z_auto − z_vetted|/(1 + z_vetted); catastrophic when > 0.01;
  those objects are listed as outliers;
- progress per inspector from each inspector's own log; confidence and flag
  counts over the consensus verdicts; conflicts are listed.
*/
pub mod audit;
mod html;
pub mod plots;

use crate::campaign::{atomic_dir, Campaign, CampaignError};
use crate::catalog::CatalogRow;
use crate::fit::FitResult;
use crate::review::merge::{AgreementStats, InspectorLog, Merged, CLASSES};
use crate::review::stats::{confusion_matrix, row_accuracy};
use crate::review::{Confidence, Flag, VerdictClass};
use chrono::{DateTime, Utc};
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// |Δz|/(1+z) above which an automatic redshift counts as a catastrophic failure.
pub const CATASTROPHIC: f64 = 0.01;

/// What can go wrong while writing a report.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReportError {
    /// A file could not be written.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// A plot could not be drawn.
    #[error("plot {name}: {message}")]
    Plot {
        /// Which plot.
        name: String,
        /// What failed.
        message: String,
    },
    /// The campaign could not be read.
    #[error(transparent)]
    Campaign(#[from] CampaignError),
}

/// Everything the report needs.
#[derive(Debug, Clone, Default)]
pub struct ReportInput {
    /// Campaign name.
    pub campaign: String,
    /// The merge.
    pub merged: Option<Merged>,
    /// Each inspector's replayed log.
    pub logs: Vec<InspectorLog>,
    /// Catalogue rows by id.
    pub catalog: BTreeMap<String, CatalogRow>,
    /// Automatic fits by id.
    pub fits: BTreeMap<String, FitResult>,
    /// Number of objects in the campaign, if known.
    pub n_objects: Option<usize>,
    /// Problems met while reading (shown in the report).
    pub problems: Vec<String>,
    /// The campaign's audit sample, if one was drawn.
    pub audit_sample: Option<crate::audit::sample::AuditSample>,
}

/// An automatic redshift far from the vetted one.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Outlier {
    /// Object id.
    pub id: String,
    /// Automatic class.
    pub auto_class: String,
    /// Automatic redshift.
    pub auto_z: f64,
    /// Vetted class.
    pub vetted_class: String,
    /// Vetted redshift.
    pub vetted_z: f64,
    /// |Δz|/(1+z_vetted).
    pub dz: f64,
}

/// One point of the redshift comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ZPair {
    /// Object id.
    pub id: String,
    /// Automatic.
    pub auto_z: f64,
    /// Vetted.
    pub vetted_z: f64,
}

/// One inspector's progress.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InspectorProgress {
    /// Name.
    pub name: String,
    /// Objects with a complete verdict in this inspector's log.
    pub reviewed: usize,
    /// Of those, per certainty grade (guess, probable, secure), then none.
    pub by_confidence: [usize; 4],
    /// Unusable log lines.
    pub log_problems: usize,
}

/// A class-versus-class comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ClassComparison {
    /// Rows: vetted class; columns: the classifier's class ([`CLASSES`] order).
    pub matrix: Vec<Vec<usize>>,
    /// Per vetted class: diagonal / row sum (`None` for unclear or empty rows).
    pub accuracy: Vec<Option<f64>>,
    /// Objects compared.
    pub n: usize,
    /// Overall fraction on the diagonal.
    pub overall: Option<f64>,
}

/// The numbers of the report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReportNumbers {
    /// Campaign name.
    pub campaign: String,
    /// When generated.
    pub generated: DateTime<Utc>,
    /// Objects in the campaign, if known.
    pub n_objects: Option<usize>,
    /// Objects reviewed by anyone (with a class).
    pub n_reviewed: usize,
    /// Objects per consensus state.
    pub consensus: BTreeMap<String, usize>,
    /// Class names in matrix order.
    pub classes: Vec<String>,
    /// Photometric class vs vetted class.
    pub photometric: ClassComparison,
    /// Automatic class vs vetted class.
    pub automatic: ClassComparison,
    /// Redshift pairs compared.
    pub z_pairs: Vec<ZPair>,
    /// Catastrophic threshold on |Δz|/(1+z).
    pub z_threshold: f64,
    /// Catastrophic failures.
    pub z_catastrophic: usize,
    /// Their fraction of the pairs.
    pub z_catastrophic_rate: Option<f64>,
    /// The catastrophic objects, worst first.
    pub outliers: Vec<Outlier>,
    /// Per inspector.
    pub inspectors: Vec<InspectorProgress>,
    /// Complete consensus verdicts per certainty grade, weakest first, then `none`.
    pub confidence: Vec<(String, usize)>,
    /// Consensus verdicts per flag, in the flags' display order.
    pub flags: Vec<(String, usize)>,
    /// Conflicts: (id, reason).
    pub conflicts: Vec<(String, String)>,
    /// Inspector agreement.
    pub agreement: Option<AgreementStats>,
    /// Problems met while reading.
    pub problems: Vec<String>,
    /// Estimates over the whole catalogue from the audit sample (None without one).
    pub audit: Option<crate::audit::AuditNumbers>,
}

fn compare(pairs: &[(VerdictClass, VerdictClass)]) -> ClassComparison {
    let truth: Vec<_> = pairs.iter().map(|p| p.0).collect();
    let pred: Vec<_> = pairs.iter().map(|p| p.1).collect();
    let matrix = confusion_matrix(&truth, &pred, &CLASSES);
    let mut accuracy = row_accuracy(&matrix);
    if let Some(i) = CLASSES.iter().position(|c| *c == VerdictClass::Unclear) {
        accuracy[i] = None;
    }
    let diag: usize = (0..CLASSES.len()).map(|i| matrix[i][i]).sum();
    ClassComparison {
        matrix,
        accuracy,
        n: pairs.len(),
        overall: (!pairs.is_empty()).then(|| diag as f64 / pairs.len() as f64),
    }
}

/// Compute the report's numbers.
pub fn numbers(input: &ReportInput) -> ReportNumbers {
    let empty = BTreeMap::new();
    let objects = input.merged.as_ref().map_or(&empty, |m| &m.objects);
    let mut consensus = BTreeMap::new();
    let mut phot = Vec::new();
    let mut auto = Vec::new();
    let mut z_pairs = Vec::new();
    let mut outliers = Vec::new();
    // Counted by index: certainty grades 1–3 then "none"; flags in Flag::ALL order.
    let mut confidence = [0usize; 4];
    let mut flags = [0usize; Flag::ALL.len()];
    let mut conflicts = Vec::new();
    for (id, c) in objects {
        *consensus.entry(c.state.as_str().to_string()).or_insert(0) += 1;
        let Some(v) = &c.verdict else {
            conflicts.push((id.clone(), c.reason.clone()));
            continue;
        };
        // The same completeness rule as the queue and the export.
        let Some(class) = v.class.filter(|_| v.is_complete()) else {
            continue;
        };
        confidence[v.confidence.map_or(3, |c| c.level() as usize - 1)] += 1;
        for f in &v.flags {
            if let Some(i) = Flag::ALL.iter().position(|x| x == f) {
                flags[i] += 1;
            }
        }
        if let Some(pc) = input.catalog.get(id).and_then(|r| r.phot_class) {
            phot.push((class, VerdictClass::from(pc)));
        }
        let best = input.fits.get(id).and_then(|f| f.best());
        if let Some(b) = best {
            auto.push((class, VerdictClass::from(b.class)));
        }
        if let (Some(b), Some(zv), true) = (best, v.z, class != VerdictClass::Unclear) {
            if b.z.is_finite() {
                z_pairs.push(ZPair {
                    id: id.clone(),
                    auto_z: b.z,
                    vetted_z: zv,
                });
                let dz = (b.z - zv).abs() / (1.0 + zv);
                if dz > CATASTROPHIC {
                    outliers.push(Outlier {
                        id: id.clone(),
                        auto_class: b.class.as_str().into(),
                        auto_z: b.z,
                        vetted_class: class.as_str().into(),
                        vetted_z: zv,
                        dz,
                    });
                }
            }
        }
    }
    outliers.sort_by(|a, b| b.dz.total_cmp(&a.dz));
    let inspectors = input
        .logs
        .iter()
        .map(|l| {
            let mut by_confidence = [0usize; 4];
            let mut reviewed = 0;
            for v in l.verdicts.values().filter(|v| v.is_complete()) {
                reviewed += 1;
                by_confidence[v.confidence.map_or(3, |c| c.level() as usize - 1)] += 1;
            }
            InspectorProgress {
                name: l.inspector.clone(),
                reviewed,
                by_confidence,
                log_problems: l.problems.len(),
            }
        })
        .collect();
    let ids: BTreeSet<&String> = objects.keys().collect();
    let audit = input.audit_sample.as_ref().map(|s| {
        let view =
            crate::audit::campaign::view_of(&input.fits, &input.catalog, input.merged.as_ref(), Vec::new());
        crate::audit::analyse(s, &view.observed)
    });
    ReportNumbers {
        campaign: input.campaign.clone(),
        generated: Utc::now(),
        n_objects: input.n_objects,
        n_reviewed: ids.len(),
        consensus,
        classes: CLASSES.iter().map(|c| c.as_str().to_string()).collect(),
        photometric: compare(&phot),
        automatic: compare(&auto),
        z_threshold: CATASTROPHIC,
        z_catastrophic: outliers.len(),
        z_catastrophic_rate: (!z_pairs.is_empty()).then(|| outliers.len() as f64 / z_pairs.len() as f64),
        z_pairs,
        outliers,
        inspectors,
        confidence: Confidence::ALL
            .iter()
            .map(|c| c.as_str().to_string())
            .chain(["none".to_string()])
            .zip(confidence)
            .collect(),
        flags: Flag::ALL
            .iter()
            .map(|f| f.as_str().to_string())
            .zip(flags)
            .collect(),
        conflicts,
        agreement: input.merged.as_ref().map(|m| m.stats.clone()),
        problems: input.problems.clone(),
        audit,
    }
}

/// Files of a report.
pub const REPORT_FILES: [&str; 8] = [
    "report.html",
    "report.json",
    "confusion_photometric.svg",
    "confusion_automatic.svg",
    "redshift_comparison.svg",
    "progress.svg",
    "confidence.svg",
    "flags.svg",
];

/// Write the report into `out_dir` as a set: the SVG plots, the numbers as
/// `report.json` and `report.html` with the plots inlined are written into
/// a temporary folder beside it that then replaces `out_dir` whole
/// ([`atomic_dir`]); on any failure (a full disk) `out_dir` keeps the old
/// report, whole. Returns the paths written.
pub fn write_report(out_dir: &Path, n: &ReportNumbers) -> Result<Vec<PathBuf>, ReportError> {
    let svgs = plots::all(n)?;
    let json = serde_json::to_string_pretty(n).map_err(|e| ReportError::Plot {
        name: "report.json".into(),
        message: e.to_string(),
    })?;
    let html = html::render(n, &svgs);
    let mut files: Vec<(&str, &[u8])> = svgs
        .iter()
        .map(|(name, svg)| (name.as_ref(), svg.as_bytes()))
        .collect();
    files.push(("report.json", json.as_bytes()));
    files.push(("report.html", html.as_bytes()));
    let mut failed_at = out_dir.to_path_buf();
    atomic_dir(out_dir, |tmp: &Path| -> std::io::Result<()> {
        for (name, bytes) in &files {
            failed_at = out_dir.join(name);
            let mut f = std::fs::File::create(tmp.join(name))?;
            std::io::Write::write_all(&mut f, bytes)?;
            f.sync_all()?;
        }
        failed_at = out_dir.to_path_buf();
        Ok(())
    })
    .map_err(|source| ReportError::Io {
        path: failed_at.clone(),
        source,
    })?;
    Ok(files.iter().map(|(name, _)| out_dir.join(name)).collect())
}

/// Read a campaign's logs, fits and catalogue into a report input.
pub fn input_from_campaign(campaign: &Campaign) -> Result<ReportInput, ReportError> {
    // each log read once; fits read line by line, their summaries kept
    let (logs, mut problems) = campaign.read_logs()?;
    let merged = campaign.merge_logs(&logs, None);
    let (fits, fit_problems) = campaign.load_fit_summaries()?;
    problems.extend(fit_problems);
    let (catalog, cat_problems) = campaign.load_catalog()?;
    problems.extend(cat_problems);
    // The fit cache lists the campaign's spectra; the catalogue may hold
    // many objects without one, so it does not count.
    let mut known: BTreeSet<&String> = fits.keys().collect();
    known.extend(merged.objects.keys());
    let n_objects = (!fits.is_empty()).then_some(known.len());
    if campaign.catalog_path().is_some() {
        let ids: Vec<&String> = known.iter().copied().collect();
        let cat_ids: Vec<&String> = catalog.keys().collect();
        problems.extend(crate::catalog::match_summary(&ids, &cat_ids));
    }
    // a damaged sample file loses the audit section, not the report
    let audit_sample = match crate::audit::campaign::load_sample(campaign) {
        Ok(s) => s,
        Err(e) => {
            problems.push(format!("audit sample left out: {e}"));
            None
        }
    };
    Ok(ReportInput {
        audit_sample,
        campaign: campaign.manifest().name.clone(),
        n_objects,
        merged: Some(merged),
        logs,
        catalog,
        fits,
        problems,
    })
}
