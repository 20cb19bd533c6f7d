/*!
The audit: how often the photometric classifier and the automatic fit are
wrong over the **whole catalogue**, estimated from a stratified random audit
sample with confidence intervals, and which object to vet next.

The objects the review queue puts first are the doubtful ones, so counts over
whatever happens to be vetted say little about the catalogue. A campaign gets
an audit sample instead ([`sample::AuditSample`], drawn by `zvet campaign
sample`, stored as `audit-sample.json`); only its vetted objects feed the
estimates ([`analyse`]), weighted by their inclusion probabilities
([`estimate`] names the estimator and the interval). Objects vetted outside
the sample still go into the training catalogue, but not into the estimates.

What is estimated ([`AuditNumbers`]):
- the photometric classifier's confusion (vetted class × photometric class)
  as fractions of the catalogue, completeness per vetted class, purity per
  photometric class and overall accuracy;
- the automatic fit's class error rate and catastrophic-redshift rate
  (|Δz|/(1+z) > [`crate::report::CATASTROPHIC`]), overall and per magnitude
  and S/N bin;
- probability calibration: per bin of the catalogue's class probability, the
  fraction of objects whose photometric class is right, and the Brier score of
  that probability for the event "the photometric class is right";
- planning lines: how many more vetted objects, in which stratum, would halve
  the widest intervals.
*/
pub mod campaign;
pub mod estimate;
pub mod next;
pub mod sample;

use crate::catalog::BANDS;
use crate::review::merge::CLASSES;
use crate::review::VerdictClass;
use crate::ObjectClass;
use estimate::{grow_one_stratum, ratio, variance_parts, Estimate, IntervalKind, Obs};
use sample::AuditSample;
use serde::Serialize;
use std::collections::BTreeMap;

/// Name of the sample file inside a campaign folder.
pub const SAMPLE_FILE: &str = "audit-sample.json";

/// The method, in one sentence for reports.
pub const METHOD: &str = "stratified combined-ratio (Horvitz–Thompson) estimates; 95 % Wilson score \
intervals at the effective sample size (after Korn & Graubard 1998) from the linearised stratified \
variance, each stratum's variance smoothed with z² pseudo-objects at the pooled rate";

/// What the audit knows about one object.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Observed {
    /// Class of the complete consensus verdict (None: not vetted).
    pub vetted_class: Option<VerdictClass>,
    /// Its redshift.
    pub vetted_z: Option<f64>,
    /// Photometric class.
    pub phot_class: Option<ObjectClass>,
    /// Photometric class probability (0–1).
    pub phot_prob: Option<f64>,
    /// Class of the automatic fit's best solution.
    pub auto_class: Option<ObjectClass>,
    /// Its redshift.
    pub auto_z: Option<f64>,
    /// AB magnitudes in [`BANDS`] order.
    pub mag: [Option<f64>; 5],
    /// Median per-pixel S/N.
    pub snr: Option<f64>,
}

/// Magnitude bin edges for the error-rate-by-magnitude table (r band).
pub const MAG_EDGES: [f64; 4] = [19.0, 20.0, 21.0, 22.0];
/// S/N bin edges (per pixel) for the error-rate-by-S/N table (common practice: 2, 5, 10).
pub const SNR_EDGES: [f64; 3] = [2.0, 5.0, 10.0];
/// Probability bin edges of the reliability diagram. A three-class
/// classifier's chosen class has p ≥ 1/3, so the first bin is wide.
pub const PROB_EDGES: [f64; 7] = [0.0, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0];

/// The photometric classifier against the vetted classes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ConfusionEstimate {
    /// Row labels: vetted classes (galaxy, quasar, star, unclear).
    pub rows: Vec<String>,
    /// Column labels: photometric classes (galaxy, quasar, star).
    pub cols: Vec<String>,
    /// Raw counts among the vetted sample objects.
    pub counts: Vec<Vec<usize>>,
    /// Each cell as a fraction of the catalogue objects that have a photometric class.
    pub cells: Vec<Vec<Estimate>>,
    /// Completeness per vetted class (galaxy, quasar, star): right / vetted as that class.
    pub completeness: Vec<Estimate>,
    /// Purity per photometric class: right / classified as that class.
    pub purity: Vec<Estimate>,
    /// Fraction right among objects with a definite vetted class.
    pub accuracy: Estimate,
}

/// Error rates of the automatic fit in one bin.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BinRates {
    /// Bin label.
    pub bin: String,
    /// Automatic class ≠ vetted class.
    pub class_error: Estimate,
    /// |Δz|/(1+z) above the catastrophic threshold.
    pub catastrophic: Estimate,
}

/// One bin of the reliability diagram.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReliabilityBin {
    /// Lower edge of the probability bin.
    pub lo: f64,
    /// Upper edge.
    pub hi: f64,
    /// Mean stated probability in the bin.
    pub mean_prob: Estimate,
    /// Fraction whose photometric class is right.
    pub right: Estimate,
}

/// A line of the sample-size plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanLine {
    /// The estimate concerned.
    pub estimate: String,
    /// Its present interval width.
    pub width: f64,
    /// The stratum where the fewest extra vetted objects halve it (None: none alone can).
    pub stratum: Option<String>,
    /// How many more vetted objects there.
    pub more_in_stratum: Option<usize>,
    /// How many more vetted objects spread like the present sample (≈ 3 n).
    pub more_spread: usize,
}

/// One stratum as the audit sees it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StratumStatus {
    /// Key.
    pub key: String,
    /// Catalogue objects N_h.
    pub population: usize,
    /// Drawn n_h.
    pub sampled: usize,
    /// Drawn and vetted.
    pub vetted: usize,
    /// Width of the photometric accuracy interval within this stratum (1 when nothing is vetted).
    pub accuracy_width: f64,
}

/// Everything the audit estimates.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AuditNumbers {
    /// The estimator and interval, in words.
    pub method: String,
    /// The stratification as drawn.
    pub strata_spec: String,
    /// Allocation rule.
    pub allocation: String,
    /// Seed of the draw.
    pub seed: u64,
    /// Sample size.
    pub sampled: usize,
    /// Of those, with a complete consensus verdict.
    pub vetted: usize,
    /// Objects vetted outside the sample (training data, not in the estimates).
    pub vetted_outside: usize,
    /// Per stratum.
    pub strata: Vec<StratumStatus>,
    /// Photometric classifier.
    pub photometric: ConfusionEstimate,
    /// Automatic fit, all objects.
    pub automatic: BinRates,
    /// Automatic fit per r magnitude bin.
    pub automatic_by_mag: Vec<BinRates>,
    /// Automatic fit per S/N bin.
    pub automatic_by_snr: Vec<BinRates>,
    /// Reliability diagram of the photometric class probability.
    pub reliability: Vec<ReliabilityBin>,
    /// Brier score of the photometric class probability (event: the class is right).
    pub brier: Estimate,
    /// Sample-size planning.
    pub plan: Vec<PlanLine>,
}

const DEFINITE: [VerdictClass; 3] = [VerdictClass::Galaxy, VerdictClass::Quasar, VerdictClass::Star];

fn bin_index(edges: &[f64], v: Option<f64>) -> Option<usize> {
    let v = v.filter(|v| v.is_finite())?;
    Some(edges.iter().take_while(|&&e| v >= e).count())
}

fn bin_labels(name: &str, edges: &[f64]) -> Vec<String> {
    let mut out = Vec::new();
    for i in 0..=edges.len() {
        out.push(match (i.checked_sub(1).map(|j| edges[j]), edges.get(i)) {
            (None, Some(hi)) => format!("{name} < {hi}"),
            (Some(lo), None) => format!("{name} ≥ {lo}"),
            (Some(lo), Some(hi)) => format!("{lo} ≤ {name} < {hi}"),
            (None, None) => name.to_string(),
        });
    }
    out
}

/// A vetted sample object with its stratum.
struct Vetted<'a> {
    stratum: usize,
    o: &'a Observed,
    class: VerdictClass,
}

fn obs<'a>(v: &'a [Vetted<'a>], f: impl Fn(&Vetted) -> (f64, f64)) -> Vec<Obs> {
    v.iter()
        .map(|x| {
            let (y, xx) = f(x);
            Obs {
                stratum: x.stratum,
                y,
                x: xx,
            }
        })
        .collect()
}

fn b(v: bool) -> f64 {
    f64::from(u8::from(v))
}

fn catastrophic(o: &Observed, class: VerdictClass) -> Option<bool> {
    if class == VerdictClass::Unclear {
        return None;
    }
    let (za, zv) = (o.auto_z?, o.vetted_z?);
    Some((za - zv).abs() / (1.0 + zv) > crate::report::CATASTROPHIC)
}

fn rates(sizes: &[usize], v: &[Vetted], in_bin: impl Fn(&Vetted) -> bool, label: String) -> BinRates {
    let class_error = ratio(
        sizes,
        &obs(v, |x| {
            let dom = in_bin(x) && x.class != VerdictClass::Unclear && x.o.auto_class.is_some();
            let wrong = x.o.auto_class.map(VerdictClass::from) != Some(x.class);
            (b(dom && wrong), b(dom))
        }),
        IntervalKind::Wilson,
    );
    let catastrophic = ratio(
        sizes,
        &obs(v, |x| match catastrophic(x.o, x.class) {
            Some(c) if in_bin(x) => (b(c), 1.0),
            _ => (0.0, 0.0),
        }),
        IntervalKind::Wilson,
    );
    BinRates {
        bin: label,
        class_error,
        catastrophic,
    }
}

/// Estimate everything from the sample and what is known per object.
pub fn analyse(sample: &AuditSample, objects: &BTreeMap<String, Observed>) -> AuditNumbers {
    let sizes: Vec<usize> = sample.strata.iter().map(|s| s.population).collect();
    let vetted: Vec<Vetted> = sample
        .members
        .iter()
        .filter_map(|m| {
            let o = objects.get(&m.id)?;
            Some(Vetted {
                stratum: m.stratum,
                o,
                class: o.vetted_class?,
            })
        })
        .collect();
    let in_sample: std::collections::HashSet<&str> = sample.members.iter().map(|m| m.id.as_str()).collect();
    let vetted_outside = objects
        .iter()
        .filter(|(id, o)| o.vetted_class.is_some() && !in_sample.contains(id.as_str()))
        .count();

    // Photometric confusion.
    let has_phot = |x: &Vetted| x.o.phot_class.is_some();
    let mut counts = vec![vec![0usize; 3]; CLASSES.len()];
    for x in &vetted {
        if let (Some(r), Some(p)) = (CLASSES.iter().position(|c| *c == x.class), x.o.phot_class) {
            counts[r][ObjectClass::ALL.iter().position(|c| *c == p).unwrap_or(0)] += 1;
        }
    }
    let cells = CLASSES
        .iter()
        .map(|&t| {
            ObjectClass::ALL
                .iter()
                .map(|&p| {
                    ratio(
                        &sizes,
                        &obs(&vetted, |x| {
                            (b(x.class == t && x.o.phot_class == Some(p)), b(has_phot(x)))
                        }),
                        IntervalKind::Wilson,
                    )
                })
                .collect()
        })
        .collect();
    let right = |x: &Vetted| x.o.phot_class.map(VerdictClass::from) == Some(x.class);
    let completeness = DEFINITE
        .iter()
        .map(|&t| {
            ratio(
                &sizes,
                &obs(&vetted, |x| {
                    let dom = x.class == t && has_phot(x);
                    (b(dom && right(x)), b(dom))
                }),
                IntervalKind::Wilson,
            )
        })
        .collect();
    let purity = ObjectClass::ALL
        .iter()
        .map(|&p| {
            ratio(
                &sizes,
                &obs(&vetted, |x| {
                    let dom = x.o.phot_class == Some(p) && x.class != VerdictClass::Unclear;
                    (b(dom && right(x)), b(dom))
                }),
                IntervalKind::Wilson,
            )
        })
        .collect();
    let acc_obs = obs(&vetted, |x| {
        let dom = has_phot(x) && x.class != VerdictClass::Unclear;
        (b(dom && right(x)), b(dom))
    });
    let accuracy = ratio(&sizes, &acc_obs, IntervalKind::Wilson);
    let photometric = ConfusionEstimate {
        rows: CLASSES.iter().map(|c| c.as_str().to_string()).collect(),
        cols: ObjectClass::ALL.iter().map(|c| c.as_str().to_string()).collect(),
        counts,
        cells,
        completeness,
        purity,
        accuracy,
    };

    // Automatic fit.
    let automatic = rates(&sizes, &vetted, |_| true, "all".into());
    let r_band = BANDS.iter().position(|b| *b == "r").unwrap_or(2);
    let automatic_by_mag = bin_labels("r", &MAG_EDGES)
        .into_iter()
        .enumerate()
        .map(|(i, label)| {
            rates(
                &sizes,
                &vetted,
                |x| bin_index(&MAG_EDGES, x.o.mag[r_band]) == Some(i),
                label,
            )
        })
        .collect();
    let automatic_by_snr = bin_labels("S/N", &SNR_EDGES)
        .into_iter()
        .enumerate()
        .map(|(i, label)| {
            rates(
                &sizes,
                &vetted,
                |x| bin_index(&SNR_EDGES, x.o.snr) == Some(i),
                label,
            )
        })
        .collect();

    // Calibration of the photometric probability.
    let scored = |x: &Vetted| {
        x.o.phot_prob
            .filter(|p| (0.0..=1.0).contains(p))
            .filter(|_| has_phot(x) && x.class != VerdictClass::Unclear)
    };
    let reliability = PROB_EDGES
        .windows(2)
        .enumerate()
        .map(|(i, w)| {
            let last = i + 2 == PROB_EDGES.len();
            let inside =
                |x: &Vetted| scored(x).is_some_and(|p| p >= w[0] && (p < w[1] || (last && p <= w[1])));
            ReliabilityBin {
                lo: w[0],
                hi: w[1],
                mean_prob: ratio(
                    &sizes,
                    &obs(&vetted, |x| {
                        (
                            if inside(x) { scored(x).unwrap_or(0.0) } else { 0.0 },
                            b(inside(x)),
                        )
                    }),
                    IntervalKind::Normal,
                ),
                right: ratio(
                    &sizes,
                    &obs(&vetted, |x| (b(inside(x) && right(x)), b(inside(x)))),
                    IntervalKind::Wilson,
                ),
            }
        })
        .collect();
    let brier = ratio(
        &sizes,
        &obs(&vetted, |x| match scored(x) {
            Some(p) => ((p - b(right(x))).powi(2), 1.0),
            None => (0.0, 0.0),
        }),
        IntervalKind::Normal,
    );

    // Per-stratum status.
    let strata = sample
        .strata
        .iter()
        .enumerate()
        .map(|(h, s)| {
            let here: Vec<&Vetted> = vetted.iter().filter(|x| x.stratum == h).collect();
            let dom: Vec<&&Vetted> = here
                .iter()
                .filter(|x| has_phot(x) && x.class != VerdictClass::Unclear)
                .collect();
            let k = dom.iter().filter(|x| right(x)).count();
            let width = if dom.is_empty() {
                1.0
            } else {
                let (lo, hi) = estimate::wilson(k as f64 / dom.len() as f64, dom.len() as f64, estimate::Z95);
                hi - lo
            };
            StratumStatus {
                key: s.key.clone(),
                population: s.population,
                sampled: s.sampled,
                vetted: here.len(),
                accuracy_width: width,
            }
        })
        .collect();

    // Planning: the photometric accuracy, each off-diagonal confusion cell
    // estimated above zero, and the two automatic rates.
    let mut plan_targets: Vec<(String, Vec<Obs>, Estimate)> = vec![(
        "photometric accuracy".into(),
        acc_obs.clone(),
        photometric.accuracy.clone(),
    )];
    for (r, t) in CLASSES.iter().enumerate() {
        for (c, p) in ObjectClass::ALL.iter().enumerate() {
            let e = &photometric.cells[r][c];
            if VerdictClass::from(*p) != *t && e.is_defined() && e.value > 0.0 {
                let o = obs(&vetted, |x| {
                    (b(x.class == *t && x.o.phot_class == Some(*p)), b(has_phot(x)))
                });
                plan_targets.push((
                    format!("vetted {} classified {}", t.as_str(), p.as_str()),
                    o,
                    e.clone(),
                ));
            }
        }
    }
    let plan = plan_targets
        .into_iter()
        .filter(|(_, _, e)| e.is_defined())
        .map(|(name, o, e)| plan_line(&sample.strata, &sizes, &o, &e, name))
        .collect();

    AuditNumbers {
        method: METHOD.into(),
        strata_spec: sample.strata_spec.clone(),
        allocation: format!("{:?}", sample.allocation).to_lowercase(),
        seed: sample.seed,
        sampled: sample.members.len(),
        vetted: vetted.len(),
        vetted_outside,
        strata,
        photometric,
        automatic,
        automatic_by_mag,
        automatic_by_snr,
        reliability,
        brier,
        plan,
    }
}

fn plan_line(strata: &[sample::Stratum], sizes: &[usize], o: &[Obs], e: &Estimate, name: String) -> PlanLine {
    let (parts, n) = variance_parts(sizes, o);
    let var: f64 = parts.iter().sum();
    let target = var / 4.0;
    let best = (0..sizes.len())
        .filter_map(|h| {
            let m = grow_one_stratum(&parts, &n, h, target)?;
            let room = strata.get(h).map_or(0, |s| s.population.saturating_sub(n[h]));
            (m <= room).then_some((m, h))
        })
        .min();
    let n_total: usize = n.iter().sum();
    PlanLine {
        estimate: name,
        width: e.width(),
        stratum: best.and_then(|(_, h)| strata.get(h).map(|s| s.key.clone())),
        more_in_stratum: best.map(|(m, _)| m),
        more_spread: 3 * n_total,
    }
}

impl PlanLine {
    /// The line in words.
    pub fn sentence(&self) -> String {
        let spread = format!(
            "{} more vetted objects spread like the present sample",
            self.more_spread
        );
        match (&self.stratum, self.more_in_stratum) {
            (Some(s), Some(m)) => format!(
                "{m} more vetted objects in stratum {s} (or {spread}) halve the interval on {} (now {:.3} wide)",
                self.estimate, self.width
            ),
            _ => format!("{spread} halve the interval on {} (now {:.3} wide)", self.estimate, self.width),
        }
    }
}
