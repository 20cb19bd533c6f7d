/*!
Merging several inspectors' verdicts into one consensus per object, listing
the conflicts for adjudication, and measuring how well the inspectors agree.

Rules (also in the README):
1. Only verdicts with a class count as reviews.
2. If the adjudicator reviewed the object, the adjudicator's verdict is the
   consensus (`adjudicated`), whatever the others said.
3. One review: that verdict (`single`).
4. Two or more: they agree when all classes are equal and, unless the class is
   `unclear`, every pair of redshifts satisfies |Δz|/(1 + z̄) ≤ tolerance
   (z̄ the pair's mean; default tolerance 0.0015, about 450 km/s) — or nobody
   gave a redshift. Then the consensus (`agreed`) takes class, redshift, its
   error and source from the most confident inspector (ties: first by name),
   the *lowest* confidence of all (a consensus is as sure as its least sure
   member), the union of flags, and the notes joined as `name: note; …`.
5. Otherwise the object is a `conflict`: no consensus verdict, listed with the
   reason until an adjudicator decides it.

The adjudicator's verdicts are left out of the agreement statistics (they
mostly cover the conflicts and would bias them).
*/
use super::model::{Verdict, VerdictClass};
use super::stats::{confusion_matrix, kappa_from_matrix, specific_agreement};
use super::{read_log, replay, LogProblem, ReviewError};
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

/// Default redshift tolerance on |Δz|/(1+z).
pub const DEFAULT_TOLERANCE: f64 = 0.0015;

/// The four classes in the order used by all statistics.
pub const CLASSES: [VerdictClass; 4] = [
    VerdictClass::Galaxy,
    VerdictClass::Quasar,
    VerdictClass::Star,
    VerdictClass::Unclear,
];

/// |z₁ − z₂| / (1 + (z₁ + z₂)/2), the scaled redshift difference.
pub fn dz_scaled(z1: f64, z2: f64) -> f64 {
    (z1 - z2).abs() / (1.0 + 0.5 * (z1 + z2))
}

/// One inspector's current verdicts (a replayed log).
#[derive(Debug, Clone, Default)]
pub struct InspectorLog {
    /// Inspector name: the one the log's events name (see [`InspectorLog::read`]).
    pub inspector: String,
    /// Verdict per object id.
    pub verdicts: BTreeMap<String, Verdict>,
    /// Lines of the log that could not be used.
    pub problems: Vec<LogProblem>,
    /// The name the log's file gives (`reviews/NAME.jsonl`).
    pub file_name: String,
    /// A digest of the log's events (0 for an empty log): two files with the
    /// same digest hold the same events, one is a copy of the other.
    pub fingerprint: u64,
}

impl InspectorLog {
    /// Read and replay a log file (without locking it). `inspector` is the
    /// name the file gives; the inspector named inside the events (the most
    /// frequent `inspector` field) wins over it, since a copied or renamed
    /// file keeps its events' author.
    pub fn read(path: &Path, inspector: &str) -> Result<InspectorLog, ReviewError> {
        use std::hash::{Hash, Hasher};
        let (events, problems) = read_log(path)?;
        let mut counts: BTreeMap<&str, usize> = BTreeMap::new();
        for e in &events {
            if !e.inspector.trim().is_empty() {
                *counts.entry(e.inspector.as_str()).or_default() += 1;
            }
        }
        let inside = counts
            .iter()
            .max_by_key(|(_, n)| **n)
            .map(|(name, _)| name.to_string());
        let mut h = std::collections::hash_map::DefaultHasher::new();
        for e in &events {
            serde_json::to_string(e).unwrap_or_default().hash(&mut h);
        }
        Ok(InspectorLog {
            inspector: inside.unwrap_or_else(|| inspector.to_string()),
            verdicts: replay(&events),
            problems,
            file_name: inspector.to_string(),
            fingerprint: if events.is_empty() { 0 } else { h.finish() },
        })
    }
}

/// Keep each inspector once: a log holding the same events as one already
/// kept (a copy saved under another name) is left out with a warning; a log
/// whose events name another inspector than its file counts under the name
/// inside, with a note; when that name is already taken by a different log,
/// the file name is kept and the clash is named. `logs` in file-name order;
/// the warnings name the files as `reviews/NAME.jsonl`.
pub fn dedupe_logs(logs: Vec<InspectorLog>) -> (Vec<InspectorLog>, Vec<String>) {
    let mut kept: Vec<InspectorLog> = Vec::with_capacity(logs.len());
    let mut warnings = Vec::new();
    let file = |l: &InspectorLog| format!("reviews/{}.jsonl", l.file_name);
    for mut l in logs {
        if l.fingerprint != 0 {
            if let Some(k) = kept.iter().find(|k| k.fingerprint == l.fingerprint) {
                warnings.push(format!(
                    "{} holds the same events as {} (a copy?): counted once, as inspector '{}'",
                    file(&l),
                    file(k),
                    k.inspector
                ));
                continue;
            }
        }
        if kept.iter().any(|k| k.inspector == l.inspector) {
            warnings.push(format!(
                "{}: its events name inspector '{}', whose log is already read; counted as '{}' (its file name)",
                file(&l),
                l.inspector,
                l.file_name
            ));
            l.inspector = l.file_name.clone();
        } else if l.inspector != l.file_name {
            warnings.push(format!(
                "{}: its events were recorded by inspector '{}'; counted as '{}' (the name inside the log wins over the file name)",
                file(&l),
                l.inspector,
                l.inspector
            ));
        }
        kept.push(l);
    }
    (kept, warnings)
}

/// Options of the merge.
#[derive(Debug, Clone, PartialEq)]
pub struct MergeOptions {
    /// Largest |Δz|/(1+z) still counted as agreement.
    pub tolerance: f64,
    /// The inspector whose verdicts override the others.
    pub adjudicator: Option<String>,
}

impl Default for MergeOptions {
    fn default() -> Self {
        MergeOptions {
            tolerance: DEFAULT_TOLERANCE,
            adjudicator: None,
        }
    }
}

/// How an object's consensus came about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum ConsensusState {
    /// Reviewed by one inspector.
    Single,
    /// Reviewed by several who agree.
    Agreed,
    /// Decided by the adjudicator.
    Adjudicated,
    /// Reviewed by several who disagree; needs the adjudicator.
    Conflict,
}

impl ConsensusState {
    /// Lower-case name used in files.
    pub fn as_str(self) -> &'static str {
        match self {
            ConsensusState::Single => "single",
            ConsensusState::Agreed => "agreed",
            ConsensusState::Adjudicated => "adjudicated",
            ConsensusState::Conflict => "conflict",
        }
    }
}

/// The outcome for one reviewed object.
#[derive(Debug, Clone, PartialEq)]
pub struct Consensus {
    /// Object id.
    pub object_id: String,
    /// How it came about.
    pub state: ConsensusState,
    /// The consensus verdict (`None` for a conflict).
    pub verdict: Option<Verdict>,
    /// The regular inspectors' verdicts (with a class), by name.
    pub opinions: Vec<(String, Verdict)>,
    /// Why it is a conflict (empty otherwise).
    pub reason: String,
    /// Everyone whose verdict counted, by name (adjudicator included).
    pub inspectors: Vec<String>,
}

/// Agreement of one pair of inspectors.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PairAgreement {
    /// First inspector.
    pub a: String,
    /// Second inspector.
    pub b: String,
    /// Objects both reviewed.
    pub n_common: usize,
    /// Fraction of those with the same class.
    pub class_agreement: Option<f64>,
    /// Cohen's κ on class.
    pub kappa: Option<f64>,
    /// Class confusion matrix (rows a, columns b) in [`CLASSES`] order.
    pub matrix: Vec<Vec<usize>>,
    /// Objects of the same (non-unclear) class where both gave a redshift.
    pub n_z: usize,
    /// Fraction of those within the tolerance.
    pub z_agreement: Option<f64>,
    /// Median |Δz|/(1+z) over those.
    pub median_dz: Option<f64>,
}

/// Per-class agreement over all pairs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ClassAgreement {
    /// The class.
    pub class: VerdictClass,
    /// Times any inspector of a compared pair used the class.
    pub uses: usize,
    /// Proportion of specific agreement.
    pub agreement: Option<f64>,
}

/// Agreement statistics of a merge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AgreementStats {
    /// Every pair of regular inspectors with objects in common.
    pub pairs: Vec<PairAgreement>,
    /// Per class, summed over pairs.
    pub per_class: Vec<ClassAgreement>,
    /// Objects reviewed by two or more regular inspectors.
    pub n_multi: usize,
}

/// Everything a merge produces.
#[derive(Debug, Clone, PartialEq)]
pub struct Merged {
    /// Per reviewed object.
    pub objects: BTreeMap<String, Consensus>,
    /// The statistics.
    pub stats: AgreementStats,
    /// The options used.
    pub tolerance: f64,
}

impl Merged {
    /// The objects that need the adjudicator.
    pub fn conflicts(&self) -> impl Iterator<Item = &Consensus> {
        self.objects
            .values()
            .filter(|c| c.state == ConsensusState::Conflict)
    }

    /// Number of objects in each state.
    pub fn counts(&self) -> BTreeMap<ConsensusState, usize> {
        let mut m = BTreeMap::new();
        for c in self.objects.values() {
            *m.entry(c.state).or_insert(0) += 1;
        }
        m
    }
}

fn disagreement(opinions: &[(String, Verdict)], tol: f64) -> Option<String> {
    let describe = || {
        opinions
            .iter()
            .map(|(who, v)| {
                let class = v.class.map_or("?", |c| c.as_str());
                match v.z {
                    Some(z) => format!("{who} {class} z={z:.5}"),
                    None => format!("{who} {class}"),
                }
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    let classes: BTreeSet<_> = opinions.iter().filter_map(|(_, v)| v.class).collect();
    if classes.len() > 1 {
        return Some(format!("class differs: {}", describe()));
    }
    if classes.contains(&VerdictClass::Unclear) {
        return None;
    }
    let zs: Vec<Option<f64>> = opinions.iter().map(|(_, v)| v.z).collect();
    if zs.iter().all(Option::is_none) {
        return None;
    }
    if zs.iter().any(Option::is_none) {
        return Some(format!("redshift missing for some: {}", describe()));
    }
    let zs: Vec<f64> = zs.into_iter().flatten().collect();
    let mut worst = 0.0f64;
    for (i, &a) in zs.iter().enumerate() {
        for &b in &zs[i + 1..] {
            worst = worst.max(dz_scaled(a, b));
        }
    }
    (worst > tol).then(|| {
        format!(
            "redshift differs by |Δz|/(1+z) = {worst:.5} > {tol}: {}",
            describe()
        )
    })
}

fn combine(opinions: &[(String, Verdict)]) -> Verdict {
    // Most confident first; ties keep name order (opinions are sorted by name).
    let rep = opinions
        .iter()
        .enumerate()
        .max_by_key(|(i, (_, v))| (v.confidence, std::cmp::Reverse(*i)))
        .map(|(_, (_, v))| v.clone())
        .unwrap_or_default();
    let confidence = opinions.iter().map(|(_, v)| v.confidence).min().flatten();
    let flags = opinions
        .iter()
        .flat_map(|(_, v)| v.flags.iter().copied())
        .collect();
    let note = opinions
        .iter()
        .filter(|(_, v)| !v.note.trim().is_empty())
        .map(|(who, v)| format!("{who}: {}", v.note.trim()))
        .collect::<Vec<_>>()
        .join("; ");
    Verdict {
        confidence,
        flags,
        note,
        ..rep
    }
}

/// Merge the logs into a consensus per reviewed object with statistics.
pub fn merge(logs: &[InspectorLog], opts: &MergeOptions) -> Merged {
    let is_adj = |name: &str| opts.adjudicator.as_deref() == Some(name);
    let mut regular: Vec<&InspectorLog> = logs.iter().filter(|l| !is_adj(&l.inspector)).collect();
    regular.sort_by(|a, b| a.inspector.cmp(&b.inspector));
    let adjudicator = logs.iter().find(|l| is_adj(&l.inspector));

    let mut ids: BTreeSet<&String> = BTreeSet::new();
    for l in logs {
        ids.extend(
            l.verdicts
                .iter()
                .filter(|(_, v)| v.class.is_some())
                .map(|(id, _)| id),
        );
    }
    let mut objects = BTreeMap::new();
    for id in ids {
        let opinions: Vec<(String, Verdict)> = regular
            .iter()
            .filter_map(|l| {
                l.verdicts
                    .get(id)
                    .filter(|v| v.class.is_some())
                    .map(|v| (l.inspector.clone(), v.clone()))
            })
            .collect();
        let mut inspectors: Vec<String> = opinions.iter().map(|(w, _)| w.clone()).collect();
        let adj = adjudicator.and_then(|l| {
            l.verdicts
                .get(id)
                .filter(|v| v.class.is_some())
                .map(|v| (l.inspector.clone(), v.clone()))
        });
        let (state, verdict, reason) = if let Some((who, v)) = adj {
            inspectors.push(who);
            (ConsensusState::Adjudicated, Some(v), String::new())
        } else if opinions.len() == 1 {
            (ConsensusState::Single, Some(opinions[0].1.clone()), String::new())
        } else if let Some(reason) = disagreement(&opinions, opts.tolerance) {
            (ConsensusState::Conflict, None, reason)
        } else {
            (ConsensusState::Agreed, Some(combine(&opinions)), String::new())
        };
        objects.insert(
            id.clone(),
            Consensus {
                object_id: id.clone(),
                state,
                verdict,
                opinions,
                reason,
                inspectors,
            },
        );
    }
    let stats = statistics(&regular, &objects, opts.tolerance);
    Merged {
        objects,
        stats,
        tolerance: opts.tolerance,
    }
}

fn statistics(regular: &[&InspectorLog], objects: &BTreeMap<String, Consensus>, tol: f64) -> AgreementStats {
    let n = CLASSES.len();
    let mut sym = vec![vec![0usize; n]; n];
    let mut pairs = Vec::new();
    for (i, a) in regular.iter().enumerate() {
        for b in &regular[i + 1..] {
            let (mut ca, mut cb, mut dzs) = (Vec::new(), Vec::new(), Vec::new());
            for (id, va) in &a.verdicts {
                let (Some(xa), Some(vb)) = (va.class, b.verdicts.get(id)) else {
                    continue;
                };
                let Some(xb) = vb.class else { continue };
                ca.push(xa);
                cb.push(xb);
                if xa == xb && xa != VerdictClass::Unclear {
                    if let (Some(za), Some(zb)) = (va.z, vb.z) {
                        dzs.push(dz_scaled(za, zb));
                    }
                }
            }
            if ca.is_empty() {
                continue;
            }
            let matrix = confusion_matrix(&ca, &cb, &CLASSES);
            for r in 0..n {
                for c in 0..n {
                    sym[r][c] += matrix[r][c];
                    sym[c][r] += matrix[r][c];
                }
            }
            let same = ca.iter().zip(&cb).filter(|(x, y)| x == y).count();
            dzs.sort_by(f64::total_cmp);
            pairs.push(PairAgreement {
                a: a.inspector.clone(),
                b: b.inspector.clone(),
                n_common: ca.len(),
                class_agreement: Some(same as f64 / ca.len() as f64),
                kappa: kappa_from_matrix(&matrix),
                matrix,
                n_z: dzs.len(),
                z_agreement: (!dzs.is_empty())
                    .then(|| dzs.iter().filter(|&&d| d <= tol).count() as f64 / dzs.len() as f64),
                median_dz: median_sorted(&dzs),
            });
        }
    }
    let sa = specific_agreement(&sym);
    let per_class = CLASSES
        .iter()
        .enumerate()
        .map(|(i, &class)| ClassAgreement {
            class,
            // The symmetrised matrix counts each use once per pair member.
            uses: sym[i].iter().sum(),
            agreement: sa[i],
        })
        .collect();
    AgreementStats {
        pairs,
        per_class,
        n_multi: objects.values().filter(|c| c.opinions.len() >= 2).count(),
    }
}

/// Median of a sorted slice.
pub fn median_sorted(x: &[f64]) -> Option<f64> {
    let n = x.len();
    match n {
        0 => None,
        _ if n % 2 == 1 => Some(x[n / 2]),
        _ => Some(0.5 * (x[n / 2 - 1] + x[n / 2])),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::review::model::{Confidence, Flag, ZSource};
    use approx::assert_relative_eq;

    fn v(class: VerdictClass, z: Option<f64>, conf: Confidence) -> Verdict {
        Verdict {
            class: Some(class),
            z,
            z_err: z.map(|_| 1e-4),
            z_source: z.map(|_| ZSource::Automatic),
            confidence: Some(conf),
            ..Verdict::default()
        }
    }

    fn log(name: &str, items: Vec<(&str, Verdict)>) -> InspectorLog {
        InspectorLog {
            inspector: name.into(),
            verdicts: items.into_iter().map(|(i, v)| (i.to_string(), v)).collect(),
            problems: vec![],
            file_name: name.into(),
            fingerprint: 0,
        }
    }

    use Confidence::*;
    use VerdictClass::*;

    #[test]
    fn consensus_rules() {
        let mut a1 = v(Galaxy, Some(0.500), Secure);
        a1.flags.insert(Flag::Blend);
        a1.note = "strong Hα".into();
        let mut b1 = v(Galaxy, Some(0.501), Probable);
        b1.flags.insert(Flag::SkyResidual);
        let a = log(
            "ana",
            vec![
                ("agree", a1),
                ("zdiff", v(Quasar, Some(2.0), Secure)),
                ("cdiff", v(Star, Some(0.0), Secure)),
                ("only_a", v(Unclear, None, Guess)),
                ("adj", v(Galaxy, Some(0.1), Secure)),
                ("unclear2", v(Unclear, None, Guess)),
            ],
        );
        let b = log(
            "ben",
            vec![
                ("agree", b1),
                // |Δz|/(1+z̄) = 0.01/3.005 = 0.0033 > 0.0015
                ("zdiff", v(Quasar, Some(2.01), Secure)),
                ("cdiff", v(Galaxy, Some(0.0), Secure)),
                ("adj", v(Quasar, Some(1.1), Secure)),
                ("unclear2", v(Unclear, Some(0.3), Guess)),
            ],
        );
        let judge = log("judge", vec![("adj", v(Quasar, Some(1.1), Secure))]);
        let m = merge(
            &[b, a, judge],
            &MergeOptions {
                tolerance: DEFAULT_TOLERANCE,
                adjudicator: Some("judge".into()),
            },
        );
        let agree = &m.objects["agree"];
        assert_eq!(agree.state, ConsensusState::Agreed);
        let cv = agree.verdict.as_ref().unwrap();
        assert_relative_eq!(cv.z.unwrap(), 0.5); // ana is more confident
        assert_eq!(cv.confidence, Some(Probable)); // the lower of the two
        assert_eq!(cv.flags.len(), 2);
        assert_eq!(cv.note, "ana: strong Hα");
        assert_eq!(m.objects["zdiff"].state, ConsensusState::Conflict);
        assert!(m.objects["zdiff"].reason.contains("0.00333"));
        assert_eq!(m.objects["cdiff"].state, ConsensusState::Conflict);
        assert!(m.objects["cdiff"].reason.contains("class differs"));
        assert_eq!(m.objects["only_a"].state, ConsensusState::Single);
        assert_eq!(m.objects["adj"].state, ConsensusState::Adjudicated);
        assert_eq!(m.objects["adj"].inspectors, vec!["ana", "ben", "judge"]);
        assert_eq!(m.objects["unclear2"].state, ConsensusState::Agreed);
        assert_eq!(m.conflicts().count(), 2);

        let s = &m.stats;
        assert_eq!(s.pairs.len(), 1);
        let p = &s.pairs[0];
        assert_eq!((p.a.as_str(), p.b.as_str(), p.n_common), ("ana", "ben", 5));
        assert_relative_eq!(p.class_agreement.unwrap(), 3.0 / 5.0);
        assert_eq!(p.n_z, 2);
        assert_relative_eq!(p.z_agreement.unwrap(), 0.5);
        assert_eq!(s.n_multi, 5);
        // Galaxy: ana used it twice (agree, adj), ben twice (agree, cdiff),
        // both on "agree" only: specific agreement 2·1/(2+2).
        let g = &s.per_class[0];
        assert_eq!(g.uses, 2 + 2);
        assert_relative_eq!(g.agreement.unwrap(), 2.0 * 1.0 / 4.0);
    }
}
