/*!
The review queue: which objects a person should look at first, and the filters
that narrow the list.

The order is: unreviewed objects before reviewed ones, and within each group
the objects that need a human most — the photometric class disagrees with the
automatic fit, the Δχ² between the best and next solution is small, the engine
raised warnings, the spectrum is faint — before the clean ones. Ties keep the
input order, so the queue is stable from frame to frame.

The functions work on [`QueueItem`]s, a small summary of an object, its fit and
its verdict, so the GUI and the tests build the queue the same way.
*/
use crate::campaign::SurveyObject;
use crate::fit::{FitResult, Warnings};
use crate::review::{Flag, Verdict, VerdictClass};
use crate::ObjectClass;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Below this Δχ² the best solution is not clearly better than the next one
/// (common practice in template redshift fitting: a few tens of χ² units).
pub const SMALL_DELTA_CHI2: f64 = 25.0;

/// Below this median per-pixel S/N features are hard to judge (common practice).
pub const LOW_SNR: f64 = 2.0;

/// Anything that knows the current verdict per object id (the review log, or
/// a replayed map of verdicts).
pub trait Verdicts {
    /// The current verdict on `object_id`, if any event touched it.
    fn verdict_of(&self, object_id: &str) -> Option<&Verdict>;
}

impl Verdicts for BTreeMap<String, Verdict> {
    fn verdict_of(&self, object_id: &str) -> Option<&Verdict> {
        self.get(object_id)
    }
}

/// What the queue needs to know about one object.
#[derive(Debug, Clone, PartialEq)]
pub struct QueueItem {
    /// Object id.
    pub id: String,
    /// Class of the automatic fit's best solution (None before the fit).
    pub fit_class: Option<ObjectClass>,
    /// Redshift of the automatic best solution.
    pub fit_z: Option<f64>,
    /// Δχ² between the best and the next distinct solution.
    pub delta_chi2: Option<f64>,
    /// Warning bits of the fit.
    pub warnings: Warnings,
    /// Median per-pixel S/N of the spectrum.
    pub snr: f64,
    /// The photometric classifier's class.
    pub phot_class: Option<ObjectClass>,
    /// Class of the current verdict (None = no class recorded).
    pub verdict_class: Option<VerdictClass>,
    /// Redshift of the current verdict.
    pub verdict_z: Option<f64>,
    /// The verdict is complete ([`Verdict::is_complete`]): the object counts as reviewed.
    pub complete: bool,
    /// Something is recorded on the object (a flag, a note, a class…).
    pub started: bool,
    /// Flags of the current verdict.
    pub flags: Vec<Flag>,
    /// Position in the audit sample's random review order (None: not drawn).
    pub audit_order: Option<usize>,
    /// Width of the photometric accuracy interval of the object's audit
    /// stratum (1 when unknown).
    pub stratum_width: f64,
}

impl QueueItem {
    /// Summarise an object with its fit (pass `obj.fit.as_ref()` or a fit kept
    /// elsewhere) and its verdict.
    pub fn new(obj: &SurveyObject, fit: Option<&FitResult>, verdict: Option<&Verdict>) -> Self {
        let snr = match fit {
            Some(f) => f.snr_median,
            None => obj.spectrum.median_snr(),
        };
        QueueItem::from_parts(obj.id(), obj.catalog.as_ref(), snr, fit, verdict)
    }

    /// Summarise an object from its id, catalogue row and spectrum S/N (the
    /// fit's S/N is used when there is a fit), with its fit (a summary is
    /// enough) and verdict.
    pub fn from_parts(
        id: &str,
        catalog: Option<&crate::catalog::CatalogRow>,
        snr: f64,
        fit: Option<&FitResult>,
        verdict: Option<&Verdict>,
    ) -> Self {
        let best = fit.and_then(|f| f.best());
        QueueItem {
            id: id.to_string(),
            fit_class: best.map(|c| c.class),
            fit_z: best.map(|c| c.z),
            delta_chi2: fit.map(|f| f.delta_chi2),
            warnings: fit.map(|f| f.warnings).unwrap_or_default(),
            snr: fit.map(|f| f.snr_median).unwrap_or(snr),
            phot_class: catalog.and_then(|c| c.phot_class),
            verdict_class: verdict.and_then(|v| v.class),
            verdict_z: verdict.and_then(|v| v.z),
            complete: verdict.is_some_and(Verdict::is_complete),
            started: verdict.is_some_and(|v| *v != Verdict::default()),
            flags: verdict
                .map(|v| v.flags.iter().copied().collect())
                .unwrap_or_default(),
            audit_order: None,
            stratum_width: 1.0,
        }
    }

    /// True once the verdict is complete (class, grade and, unless
    /// unclear, redshift): the same rule the export and the report use.
    pub fn is_reviewed(&self) -> bool {
        self.complete
    }

    /// True when the photometric class and the fit's class both exist and differ.
    pub fn disagrees(&self) -> bool {
        matches!((self.phot_class, self.fit_class), (Some(p), Some(f)) if p != f)
    }

    /// The class the object currently has: the verdict's, else the fit's.
    pub fn current_class(&self) -> Option<VerdictClass> {
        self.verdict_class.or(self.fit_class.map(VerdictClass::from))
    }

    /// The redshift the object currently has: the verdict's once a class is
    /// recorded (None for unclear or a class without z), else the fit's.
    pub fn current_z(&self) -> Option<f64> {
        if self.verdict_class.is_some() {
            self.verdict_z
        } else {
            self.fit_z
        }
    }

    /// How much the object needs a human, higher first. Each reason adds a
    /// fixed weight so that a disagreement outranks a small Δχ², which outranks
    /// warnings, which outrank faintness; objects without a fit yet rank last
    /// among the unreviewed ones (nothing to judge yet).
    pub fn attention(&self) -> f64 {
        if self.fit_class.is_none() {
            return -1.0;
        }
        let mut score = 0.0;
        if self.disagrees() {
            score += 8.0;
        }
        if self.delta_chi2.is_some_and(|d| d < SMALL_DELTA_CHI2) {
            score += 4.0;
        }
        if self.warnings.0 != 0 {
            score += 2.0;
        }
        if self.snr < LOW_SNR {
            score += 1.0;
        }
        score
    }
}

/// Summarise every object, looking up verdicts in `verdicts`.
pub fn items(objects: &[SurveyObject], verdicts: &impl Verdicts) -> Vec<QueueItem> {
    objects
        .iter()
        .map(|o| QueueItem::new(o, o.fit.as_ref(), verdicts.verdict_of(o.id())))
        .collect()
}

/// How the list is sorted.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
pub enum SortKey {
    /// Unreviewed first, then by need of attention (the default).
    #[default]
    Attention,
    /// By object id.
    Id,
    /// By automatic redshift, low first.
    Redshift,
    /// By Δχ², smallest first.
    DeltaChi2,
    /// By S/N, faintest first.
    Snr,
    /// The audit sample in its random review order, then the other objects by id.
    AuditSample,
    /// The rule of [`crate::audit::next`]: unvetted audit-sample objects in
    /// their random order, then the other unvetted objects by disagreement,
    /// doubtful fit and stratum interval width; vetted objects last.
    VetNext,
}

impl SortKey {
    /// All keys in menu order.
    pub const ALL: [SortKey; 7] = [
        SortKey::Attention,
        SortKey::Id,
        SortKey::Redshift,
        SortKey::DeltaChi2,
        SortKey::Snr,
        SortKey::AuditSample,
        SortKey::VetNext,
    ];

    /// Label for menus.
    pub fn label(self) -> &'static str {
        match self {
            SortKey::Attention => "needs a look",
            SortKey::Id => "id",
            SortKey::Redshift => "z",
            SortKey::DeltaChi2 => "Δχ²",
            SortKey::Snr => "S/N",
            SortKey::AuditSample => "audit sample",
            SortKey::VetNext => "vet next",
        }
    }
}

/// Review status filter.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
pub enum StatusFilter {
    /// Everything.
    #[default]
    Any,
    /// Only objects without a complete verdict.
    Unreviewed,
    /// Only objects with a complete verdict.
    Reviewed,
}

/// A filter on the queue; the default lets everything through.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Filter {
    /// Only this current class (verdict class, else fit class).
    pub class: Option<VerdictClass>,
    /// Review status.
    pub status: StatusFilter,
    /// Only objects whose verdict carries this flag.
    pub flag: Option<Flag>,
    /// Only objects whose photometric class disagrees with the fit.
    pub disagreement: bool,
    /// Only objects with Δχ² at most this.
    pub max_delta_chi2: Option<f64>,
    /// Only objects with S/N at least this.
    pub min_snr: Option<f64>,
    /// Only objects with S/N at most this.
    pub max_snr: Option<f64>,
}

impl Filter {
    /// True when `item` passes every condition.
    pub fn accepts(&self, item: &QueueItem) -> bool {
        if let Some(c) = self.class {
            if item.current_class() != Some(c) {
                return false;
            }
        }
        match self.status {
            StatusFilter::Any => {}
            StatusFilter::Unreviewed if item.is_reviewed() => return false,
            StatusFilter::Reviewed if !item.is_reviewed() => return false,
            _ => {}
        }
        if let Some(f) = self.flag {
            if !item.flags.contains(&f) {
                return false;
            }
        }
        if self.disagreement && !item.disagrees() {
            return false;
        }
        if let Some(m) = self.max_delta_chi2 {
            if !item.delta_chi2.is_some_and(|d| d <= m) {
                return false;
            }
        }
        if self.min_snr.is_some_and(|m| item.snr < m) {
            return false;
        }
        if self.max_snr.is_some_and(|m| item.snr > m) {
            return false;
        }
        true
    }

    /// True when no condition is set.
    pub fn is_empty(&self) -> bool {
        *self == Filter::default()
    }
}

/// Indices of the items that pass `filter`, sorted by `key` (stable).
pub fn arrange(items: &[QueueItem], filter: &Filter, key: SortKey) -> Vec<usize> {
    let mut idx: Vec<usize> = (0..items.len()).filter(|&i| filter.accepts(&items[i])).collect();
    let nan_last = |v: Option<f64>| v.filter(|x| x.is_finite()).unwrap_or(f64::INFINITY);
    match key {
        SortKey::Attention => idx.sort_by(|&a, &b| {
            let (ia, ib) = (&items[a], &items[b]);
            ia.is_reviewed()
                .cmp(&ib.is_reviewed())
                .then(ib.attention().total_cmp(&ia.attention()))
        }),
        SortKey::Id => idx.sort_by(|&a, &b| items[a].id.cmp(&items[b].id)),
        SortKey::Redshift => {
            idx.sort_by(|&a, &b| nan_last(items[a].fit_z).total_cmp(&nan_last(items[b].fit_z)))
        }
        SortKey::DeltaChi2 => {
            idx.sort_by(|&a, &b| nan_last(items[a].delta_chi2).total_cmp(&nan_last(items[b].delta_chi2)))
        }
        SortKey::Snr => idx.sort_by(|&a, &b| items[a].snr.total_cmp(&items[b].snr)),
        SortKey::AuditSample => idx.sort_by(|&a, &b| {
            let key = |i: usize| (items[i].audit_order.unwrap_or(usize::MAX), &items[i].id);
            key(a).cmp(&key(b))
        }),
        SortKey::VetNext => {
            let cands: Vec<crate::audit::next::Candidate> =
                idx.iter().map(|&i| items[i].vet_next_candidate()).collect();
            let mut pos = vec![usize::MAX; idx.len()];
            for (k, (c, _)) in crate::audit::next::rank(&cands).into_iter().enumerate() {
                pos[c] = k;
            }
            // vetted objects (not ranked by the rule) keep their input order after the rest
            let mut by: Vec<(usize, usize)> = pos.into_iter().zip(idx.iter().copied()).collect();
            by.sort_by_key(|&(p, _)| p);
            idx = by.into_iter().map(|(_, i)| i).collect();
        }
    }
    idx
}

impl QueueItem {
    /// What the vet-next rule needs to know about this object.
    pub fn vet_next_candidate(&self) -> crate::audit::next::Candidate<'_> {
        crate::audit::next::Candidate {
            id: &self.id,
            sample_order: self.audit_order,
            vetted: self.is_reviewed(),
            disagrees: self.disagrees(),
            doubtful: self.delta_chi2.is_some_and(|d| d < SMALL_DELTA_CHI2) || self.warnings.doubts_answer(),
            delta_chi2: self.delta_chi2,
            stratum_width: self.stratum_width,
        }
    }
}

/// Mark the items of an audit sample: each member's position in the random
/// review order and the accuracy-interval width of every object's stratum.
pub fn apply_audit(
    items: &mut [QueueItem],
    order: &BTreeMap<String, usize>,
    width_of: impl Fn(&str) -> Option<f64>,
) {
    for it in items {
        it.audit_order = order.get(&it.id).copied();
        it.stratum_width = width_of(&it.id).unwrap_or(1.0);
    }
}

/// The default queue: every object, unreviewed first, then by need of attention.
pub fn order(objects: &[SurveyObject], verdicts: &impl Verdicts) -> Vec<usize> {
    arrange(&items(objects, verdicts), &Filter::default(), SortKey::Attention)
}

/// The objects passing `filter`, in the default order.
pub fn filtered(objects: &[SurveyObject], verdicts: &impl Verdicts, filter: &Filter) -> Vec<usize> {
    arrange(&items(objects, verdicts), filter, SortKey::Attention)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn item(id: &str) -> QueueItem {
        QueueItem {
            id: id.into(),
            fit_class: Some(ObjectClass::Galaxy),
            fit_z: Some(0.3),
            delta_chi2: Some(500.0),
            warnings: Warnings::default(),
            snr: 10.0,
            phot_class: Some(ObjectClass::Galaxy),
            verdict_class: None,
            verdict_z: None,
            complete: false,
            started: false,
            flags: vec![],
            audit_order: None,
            stratum_width: 1.0,
        }
    }

    fn reviewed(mut i: QueueItem, class: VerdictClass, z: Option<f64>) -> QueueItem {
        i.verdict_class = Some(class);
        i.verdict_z = z;
        i.complete = true;
        i.started = true;
        i
    }

    #[test]
    fn a_reviewed_row_carries_the_vetted_class_and_z() {
        let obj = crate::demo::generate_n(crate::demo::DEFAULT_SEED, 1)
            .objects
            .remove(0);
        let typed = Verdict {
            class: Some(VerdictClass::Quasar),
            z: Some(5.424),
            confidence: Some(crate::review::Confidence::Secure),
            ..Default::default()
        };
        let it = QueueItem::new(&obj, None, Some(&typed));
        assert!(it.is_reviewed());
        assert_eq!(it.current_class(), Some(VerdictClass::Quasar));
        assert_eq!(it.current_z(), Some(5.424));
        // A class with no redshift is not a review, and shows no z.
        let half = Verdict {
            class: Some(VerdictClass::Star),
            ..Default::default()
        };
        let it = QueueItem::new(&obj, None, Some(&half));
        assert!(!it.is_reviewed() && it.started);
        assert_eq!(it.current_z(), None);
    }

    #[test]
    fn unreviewed_come_first_then_by_attention() {
        let clean = item("clean");
        let mut reviewed_bad = reviewed(item("reviewed_bad"), VerdictClass::Galaxy, Some(0.3));
        reviewed_bad.phot_class = Some(ObjectClass::Quasar);
        let mut faint = item("faint");
        faint.snr = 1.0;
        let mut warned = item("warned");
        warned.warnings.set(Warnings::POOR_FIT);
        let mut close = item("close");
        close.delta_chi2 = Some(3.0);
        let mut disagree = item("disagree");
        disagree.phot_class = Some(ObjectClass::Star);
        let mut unfitted = item("unfitted");
        unfitted.fit_class = None;
        unfitted.fit_z = None;
        let items = vec![clean, reviewed_bad, faint, warned, close, disagree, unfitted];
        let ids: Vec<&str> = arrange(&items, &Filter::default(), SortKey::Attention)
            .into_iter()
            .map(|i| items[i].id.as_str())
            .collect();
        assert_eq!(
            ids,
            [
                "disagree",
                "close",
                "warned",
                "faint",
                "clean",
                "unfitted",
                "reviewed_bad"
            ]
        );
    }

    #[test]
    fn ties_keep_input_order() {
        let items: Vec<QueueItem> = (0..5).map(|i| item(&format!("o{i}"))).collect();
        assert_eq!(
            arrange(&items, &Filter::default(), SortKey::Attention),
            vec![0, 1, 2, 3, 4]
        );
    }

    #[test]
    fn filters_select_what_they_say() {
        let mut a = item("a");
        a.phot_class = Some(ObjectClass::Quasar);
        let mut b = reviewed(item("b"), VerdictClass::Star, Some(0.0));
        b.flags = vec![Flag::Blend];
        let mut c = item("c");
        c.delta_chi2 = Some(4.0);
        c.snr = 0.5;
        let mut d = item("d");
        d.phot_class = None; // no catalogue match: cannot disagree
        let items = vec![a, b, c, d];
        let pick = |f: Filter| arrange(&items, &f, SortKey::Id);
        assert_eq!(
            pick(Filter {
                disagreement: true,
                ..Default::default()
            }),
            vec![0]
        );
        assert_eq!(
            pick(Filter {
                class: Some(VerdictClass::Star),
                ..Default::default()
            }),
            vec![1]
        );
        assert_eq!(
            pick(Filter {
                status: StatusFilter::Unreviewed,
                ..Default::default()
            }),
            vec![0, 2, 3]
        );
        assert_eq!(
            pick(Filter {
                status: StatusFilter::Reviewed,
                flag: Some(Flag::Blend),
                ..Default::default()
            }),
            vec![1]
        );
        assert_eq!(
            pick(Filter {
                max_delta_chi2: Some(10.0),
                ..Default::default()
            }),
            vec![2]
        );
        assert_eq!(
            pick(Filter {
                min_snr: Some(1.0),
                max_snr: Some(20.0),
                ..Default::default()
            }),
            vec![0, 1, 3]
        );
        assert!(Filter::default().is_empty());
    }

    #[test]
    fn other_sort_keys() {
        let mut items: Vec<QueueItem> = ["b", "a", "c"].iter().map(|s| item(s)).collect();
        items[0].fit_z = Some(2.0);
        items[1].fit_z = None;
        items[2].fit_z = Some(0.1);
        items[0].snr = 3.0;
        items[1].snr = 30.0;
        items[2].snr = 1.0;
        let all = Filter::default();
        assert_eq!(arrange(&items, &all, SortKey::Id), vec![1, 0, 2]);
        assert_eq!(arrange(&items, &all, SortKey::Redshift), vec![2, 0, 1]);
        assert_eq!(arrange(&items, &all, SortKey::Snr), vec![2, 0, 1]);
    }

    #[test]
    fn audit_sample_and_vet_next_orders() {
        let mut items: Vec<QueueItem> = ["a", "b", "c", "d", "e"].iter().map(|s| item(s)).collect();
        let order: BTreeMap<String, usize> = [("d".to_string(), 0), ("b".to_string(), 1)].into();
        apply_audit(&mut items, &order, |_| None);
        let all = Filter::default();
        // members in their random order, then the rest by id
        assert_eq!(arrange(&items, &all, SortKey::AuditSample), vec![3, 1, 0, 2, 4]);
        // vet next: unvetted members first; then disagreement; vetted last
        items[4].phot_class = Some(ObjectClass::Star);
        items[3] = reviewed(items[3].clone(), VerdictClass::Galaxy, Some(0.3));
        assert_eq!(arrange(&items, &all, SortKey::VetNext), vec![1, 4, 0, 2, 3]);
    }
}
