/*!
What to vet next: a queue order that a person can read and check.

1. **Audit-sample objects not yet vetted, in the sample's random order.**
   Every one of them narrows the intervals, and leaving some unvetted can bias
   the estimates; keeping their random order means an inspector who stops
   early leaves a random remainder, not the hard cases.
2. **Then every other unvetted object, by a score of three reasons:**
   - 4 points: the photometric class and the automatic class disagree (a
     training label and a classifier error are at stake);
   - 2 points: the automatic fit is doubtful — Δχ² to the next solution below
     [`crate::queue::SMALL_DELTA_CHI2`], or a warning that doubts the answer
     ([`crate::fit::Warnings::doubts_answer`]: `ambiguous`, `class_close`,
     `single_line`, `few_lines`, `near_rest`);
   - 1 point: the object lies in a stratum whose accuracy interval is wider
     than the median over the unvetted objects (where one more verdict
     teaches the most).

   Ties go to the stratum with the wider interval, then the smaller Δχ²,
   then the id.

Vetted objects (complete verdicts) are not listed.
*/
use serde::Serialize;

/// What the rule needs per object.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate<'a> {
    /// Object id.
    pub id: &'a str,
    /// Position in the audit sample's review order, if drawn.
    pub sample_order: Option<usize>,
    /// Has a complete verdict.
    pub vetted: bool,
    /// Photometric and automatic classes disagree.
    pub disagrees: bool,
    /// The automatic fit is doubtful (small Δχ², ambiguous, class close).
    pub doubtful: bool,
    /// Δχ² of the fit (for ties).
    pub delta_chi2: Option<f64>,
    /// Width of the accuracy interval of the object's stratum (1 when unknown).
    pub stratum_width: f64,
}

/// One line of the order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Next {
    /// Object id.
    pub id: String,
    /// Its score (audit-sample objects: ∞ is not used; they come first by rule 1).
    pub score: u32,
    /// Why, in words.
    pub reasons: Vec<String>,
}

/// "Among the widest": the rule's point goes to strata wider than the
/// median width over the unvetted objects.
fn median_width(cands: &[Candidate]) -> f64 {
    let mut widths: Vec<f64> = cands
        .iter()
        .filter(|c| !c.vetted)
        .map(|c| c.stratum_width)
        .collect();
    widths.sort_by(f64::total_cmp);
    widths.get(widths.len() / 2).copied().unwrap_or(1.0)
}

/// The rule's score of an object outside the sample and its reasons.
fn score(c: &Candidate, median: f64, with_reasons: bool) -> (u32, Vec<String>) {
    let mut score = 0;
    let mut reasons = Vec::new();
    if c.disagrees {
        score += 4;
        if with_reasons {
            reasons.push("photometric and automatic class disagree".to_string());
        }
    }
    if c.doubtful {
        score += 2;
        if with_reasons {
            reasons.push("automatic fit doubtful".to_string());
        }
    }
    if c.stratum_width > median {
        score += 1;
        if with_reasons {
            reasons.push(format!("stratum interval wide ({:.2})", c.stratum_width));
        }
    }
    (score, reasons)
}

/// Indices into `cands` of the unvetted objects, in the rule's order, with
/// each one's score (0 for audit-sample objects, which come first by rule 1).
pub fn rank(cands: &[Candidate]) -> Vec<(usize, u32)> {
    let median = median_width(cands);
    let mut sample: Vec<usize> = (0..cands.len())
        .filter(|&i| !cands[i].vetted && cands[i].sample_order.is_some())
        .collect();
    sample.sort_by_key(|&i| cands[i].sample_order);
    let mut rest: Vec<(usize, u32)> = (0..cands.len())
        .filter(|&i| !cands[i].vetted && cands[i].sample_order.is_none())
        .map(|i| (i, score(&cands[i], median, false).0))
        .collect();
    rest.sort_by(|&(a, sa), &(b, sb)| {
        let (a, b) = (&cands[a], &cands[b]);
        sb.cmp(&sa)
            .then(b.stratum_width.total_cmp(&a.stratum_width))
            .then(
                a.delta_chi2
                    .unwrap_or(f64::INFINITY)
                    .total_cmp(&b.delta_chi2.unwrap_or(f64::INFINITY)),
            )
            .then(a.id.cmp(b.id))
    });
    sample.into_iter().map(|i| (i, 0)).chain(rest).collect()
}

/// Order the unvetted objects by the rule above, with the reasons in words.
pub fn order(cands: &[Candidate]) -> Vec<Next> {
    let median = median_width(cands);
    rank(cands)
        .into_iter()
        .map(|(i, sc)| {
            let c = &cands[i];
            let reasons = match c.sample_order {
                Some(o) => vec![format!("audit sample, #{} in its random order", o + 1)],
                None => score(c, median, true).1,
            };
            Next {
                id: c.id.to_string(),
                score: sc,
                reasons,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cand(id: &str) -> Candidate<'_> {
        Candidate {
            id,
            sample_order: None,
            vetted: false,
            disagrees: false,
            doubtful: false,
            delta_chi2: Some(100.0),
            stratum_width: 0.2,
        }
    }

    #[test]
    fn the_rule_orders_as_written() {
        let mut c = vec![
            cand("plain"),
            Candidate {
                disagrees: true,
                ..cand("disagree")
            },
            Candidate {
                doubtful: true,
                ..cand("doubt")
            },
            Candidate {
                disagrees: true,
                doubtful: true,
                ..cand("both")
            },
            Candidate {
                sample_order: Some(1),
                ..cand("s1")
            },
            Candidate {
                sample_order: Some(0),
                ..cand("s0")
            },
            Candidate {
                vetted: true,
                disagrees: true,
                ..cand("done")
            },
            Candidate {
                stratum_width: 0.6,
                ..cand("wide")
            },
            Candidate {
                doubtful: true,
                delta_chi2: Some(3.0),
                ..cand("doubt-small")
            },
        ];
        let ids: Vec<String> = order(&c).into_iter().map(|n| n.id).collect();
        assert_eq!(
            ids,
            [
                "s0",
                "s1",
                "both",
                "disagree",
                "doubt-small",
                "doubt",
                "wide",
                "plain"
            ]
        );
        // all strata equally known: no point for width
        for x in &mut c {
            x.stratum_width = 0.3;
        }
        let n = order(&c);
        assert!(n.iter().all(|x| !x.reasons.iter().any(|r| r.contains("stratum"))));
    }
}
