/*!
The audit of a campaign folder: its stored sample (`audit-sample.json`,
written through the one atomic path), the sampling units built from the fit
cache and the catalogue, and what is known per object for the estimates.
*/
use super::next::Candidate;
use super::sample::{stratum_of, AuditSample, Unit};
use super::{Observed, SAMPLE_FILE};
use crate::campaign::{atomic_write, Campaign, CampaignError};
use crate::fit::{FitResult, Warnings};
use crate::review::merge::Merged;
use std::collections::BTreeMap;

/// The campaign's audit sample, if one was drawn.
pub fn load_sample(campaign: &Campaign) -> Result<Option<AuditSample>, CampaignError> {
    let path = campaign.dir().join(SAMPLE_FILE);
    let text = match std::fs::read_to_string(&path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(CampaignError::Other(format!("{}: {e}", path.display()))),
    };
    let s: AuditSample =
        serde_json::from_str(&text).map_err(|e| CampaignError::Other(format!("{}: {e}", path.display())))?;
    s.validate()
        .map_err(|e| CampaignError::Other(format!("{}: {e}", path.display())))?;
    Ok(Some(s))
}

/// Store a drawn sample in the campaign.
pub fn save_sample(campaign: &Campaign, sample: &AuditSample) -> Result<(), CampaignError> {
    let path = campaign.dir().join(SAMPLE_FILE);
    let text = serde_json::to_string_pretty(sample).map_err(|e| CampaignError::Other(e.to_string()))?;
    atomic_write(&path, |w| w.write_all(text.as_bytes()))
        .map_err(|e| CampaignError::Other(format!("{}: {e}", path.display())))
}

/// What one pass over the campaign yields for the audit.
pub struct CampaignView {
    /// Sampling units: every object of the fit cache, with its catalogue row.
    pub units: Vec<Unit>,
    /// Per object: vetted, photometric and automatic facts.
    pub observed: BTreeMap<String, Observed>,
    /// Per object: the fit's Δχ² and warnings (for the vet-next rule).
    pub fit_doubt: BTreeMap<String, (f64, Warnings, bool)>,
    /// Problems met while reading.
    pub problems: Vec<String>,
}

/// Read the campaign's fits, catalogue and merged verdicts.
pub fn view(campaign: &Campaign) -> Result<CampaignView, CampaignError> {
    // read line by line, each fit's summary kept (best solution, Δχ², warnings, S/N)
    let (fits, mut problems) = campaign.load_fit_summaries()?;
    let (catalog, cat_problems) = campaign.load_catalog()?;
    problems.extend(cat_problems);
    let (merged, merge_problems) = campaign.merge(None)?;
    problems.extend(merge_problems);
    Ok(view_of(&fits, &catalog, Some(&merged), problems))
}

/// The same from parts already read.
pub fn view_of(
    fits: &BTreeMap<String, FitResult>,
    catalog: &BTreeMap<String, crate::catalog::CatalogRow>,
    merged: Option<&Merged>,
    problems: Vec<String>,
) -> CampaignView {
    let mut units = Vec::with_capacity(fits.len());
    let mut observed = BTreeMap::new();
    let mut fit_doubt = BTreeMap::new();
    for (id, f) in fits {
        let row = catalog.get(id);
        let best = f.best();
        let verdict = merged
            .and_then(|m| m.objects.get(id))
            .and_then(|c| c.verdict.as_ref())
            .filter(|v| v.is_complete());
        let mag = row.map(|r| r.mag).unwrap_or_default();
        let snr = f.snr_median.is_finite().then_some(f.snr_median);
        units.push(Unit {
            id: id.clone(),
            phot_class: row.and_then(|r| r.phot_class),
            mag,
            snr,
        });
        observed.insert(
            id.clone(),
            Observed {
                vetted_class: verdict.and_then(|v| v.class),
                vetted_z: verdict.and_then(|v| v.z),
                phot_class: row.and_then(|r| r.phot_class),
                phot_prob: row.and_then(|r| r.phot_class_prob),
                auto_class: best.map(|b| b.class),
                auto_z: best.map(|b| b.z).filter(|z| z.is_finite()),
                mag,
                snr,
            },
        );
        let doubtful = f.delta_chi2 < crate::queue::SMALL_DELTA_CHI2 || f.warnings.doubts_answer();
        fit_doubt.insert(id.clone(), (f.delta_chi2, f.warnings, doubtful));
    }
    CampaignView {
        units,
        observed,
        fit_doubt,
        problems,
    }
}

/// The candidates of the vet-next rule for every object of the view.
pub fn candidates<'a>(
    view: &'a CampaignView,
    sample: Option<&AuditSample>,
    numbers: Option<&super::AuditNumbers>,
) -> Vec<Candidate<'a>> {
    let index = sample.map(AuditSample::index).unwrap_or_default();
    let vars = sample.map(AuditSample::vars).unwrap_or_default();
    let widths: BTreeMap<&str, f64> = numbers
        .map(|n| {
            n.strata
                .iter()
                .map(|s| (s.key.as_str(), s.accuracy_width))
                .collect()
        })
        .unwrap_or_default();
    view.units
        .iter()
        .map(|u| {
            let o = view.observed.get(&u.id);
            let (dchi2, _, doubtful) =
                view.fit_doubt
                    .get(&u.id)
                    .copied()
                    .unwrap_or((f64::NAN, Warnings::default(), false));
            let key = stratum_of(&vars, u);
            Candidate {
                id: &u.id,
                sample_order: index.get(u.id.as_str()).map(|&(_, i)| i),
                vetted: o.is_some_and(|o| o.vetted_class.is_some()),
                disagrees: o
                    .is_some_and(|o| matches!((o.phot_class, o.auto_class), (Some(p), Some(a)) if p != a)),
                doubtful,
                delta_chi2: dchi2.is_finite().then_some(dchi2),
                stratum_width: widths.get(key.as_str()).copied().unwrap_or(1.0),
            }
        })
        .collect()
}
