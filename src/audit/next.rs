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
     [`crate::queue::SMALL_DELTA_CHI2`], or an `ambiguous` or `class_close`
     warning;
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
pub struct Candidate {
    /// Object id.
    pub id: String,
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

/// Order the unvetted objects by the rule above.
pub fn order(cands: &[Candidate]) -> Vec<Next> {
    let mut widths: Vec<f64> = cands
        .iter()
        .filter(|c| !c.vetted)
        .map(|c| c.stratum_width)
        .collect();
    widths.sort_by(f64::total_cmp);
    // "among the widest": above the median width of the unvetted objects
    let median = widths.get(widths.len() / 2).copied().unwrap_or(1.0);
    let mut sample: Vec<&Candidate> = cands
        .iter()
        .filter(|c| !c.vetted && c.sample_order.is_some())
        .collect();
    sample.sort_by_key(|c| c.sample_order);
    let mut out: Vec<Next> = sample
        .into_iter()
        .map(|c| Next {
            id: c.id.clone(),
            score: 0,
            reasons: vec![format!(
                "audit sample, #{} in its random order",
                c.sample_order.map_or(0, |o| o + 1)
            )],
        })
        .collect();
    let mut rest: Vec<(u32, &Candidate, Vec<String>)> = cands
        .iter()
        .filter(|c| !c.vetted && c.sample_order.is_none())
        .map(|c| {
            let mut score = 0;
            let mut reasons = Vec::new();
            if c.disagrees {
                score += 4;
                reasons.push("photometric and automatic class disagree".to_string());
            }
            if c.doubtful {
                score += 2;
                reasons.push("automatic fit doubtful".to_string());
            }
            if c.stratum_width > median {
                score += 1;
                reasons.push(format!("stratum interval wide ({:.2})", c.stratum_width));
            }
            (score, c, reasons)
        })
        .collect();
    rest.sort_by(|a, b| {
        b.0.cmp(&a.0)
            .then(b.1.stratum_width.total_cmp(&a.1.stratum_width))
            .then(
                a.1.delta_chi2
                    .unwrap_or(f64::INFINITY)
                    .total_cmp(&b.1.delta_chi2.unwrap_or(f64::INFINITY)),
            )
            .then(a.1.id.cmp(&b.1.id))
    });
    out.extend(rest.into_iter().map(|(score, c, reasons)| Next {
        id: c.id.clone(),
        score,
        reasons,
    }));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cand(id: &str) -> Candidate {
        Candidate {
            id: id.into(),
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
