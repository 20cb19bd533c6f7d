/*!
Replaying review events into verdicts, with undo and redo.

A verdict is a pure fold of the changes that are currently in force, in the
order they were recorded. Undo and redo are themselves events, so the log
never has to be rewritten:

- `Undo` on an object takes back this inspector's latest change on that object
  that is still in force, and puts it on the inspector's redo stack for the
  object;
- `Redo` takes the latest undone change off that stack and applies it again
  (at the end, as if it were recorded now);
- any other change clears the inspector's redo stack for the object (the usual
  editor rule: a new edit ends the redo chain).

Because the verdict is recomputed from the changes in force, undoing e.g. a
flag toggle in the middle of other edits gives exactly the state that would
have resulted had the change never been made.
*/
use super::model::{Change, Event, Verdict};
use std::collections::{BTreeMap, HashMap};

/// Apply one ordinary change to a verdict. `Undo`/`Redo` are not changes of
/// the verdict and are ignored here (they are handled by [`ObjectState`]).
pub fn apply_change(v: &mut Verdict, change: &Change) {
    match change {
        Change::Verdict {
            class,
            z,
            z_err,
            source,
            confidence,
        } => {
            v.class = Some(*class);
            v.z = *z;
            v.z_err = if z.is_some() { *z_err } else { None };
            v.z_source = z.map(|_| *source);
            v.confidence = Some(*confidence);
        }
        Change::Class { class } => v.class = Some(*class),
        Change::Redshift { z, z_err, source } => {
            v.z = Some(*z);
            v.z_err = *z_err;
            v.z_source = Some(*source);
        }
        Change::Confidence { confidence } => v.confidence = Some(*confidence),
        Change::Flag { flag, on } => {
            if *on {
                v.flags.insert(*flag);
            } else {
                v.flags.remove(flag);
            }
        }
        Change::Note { text } => v.note = text.clone(),
        Change::Undo | Change::Redo => {}
    }
}

/// Everything replay knows about one object.
#[derive(Debug, Clone, Default)]
pub struct ObjectState {
    /// Every event on the object, in log order (including undo/redo).
    pub events: Vec<Event>,
    /// Changes in force: (inspector, change), in application order.
    applied: Vec<(String, Change)>,
    /// Undone changes per inspector, latest last.
    undone: HashMap<String, Vec<Change>>,
    /// Fold of `applied`.
    pub verdict: Verdict,
}

impl ObjectState {
    /// True when `inspector` has a change in force that `Undo` would take back.
    pub fn can_undo(&self, inspector: &str) -> bool {
        self.applied.iter().any(|(who, _)| who == inspector)
    }

    /// True when `inspector` has an undone change that `Redo` would re-apply.
    pub fn can_redo(&self, inspector: &str) -> bool {
        self.undone.get(inspector).is_some_and(|s| !s.is_empty())
    }

    /// Whether `event` would do anything (false for an undo or redo with
    /// nothing to act on).
    pub fn is_effective(&self, event: &Event) -> bool {
        match event.change {
            Change::Undo => self.can_undo(&event.inspector),
            Change::Redo => self.can_redo(&event.inspector),
            _ => true,
        }
    }

    /// Apply one event. An undo/redo with nothing to act on is recorded in the
    /// history but changes nothing.
    pub fn apply(&mut self, event: &Event) {
        self.events.push(event.clone());
        let who = &event.inspector;
        match &event.change {
            Change::Undo => {
                if let Some(pos) = self.applied.iter().rposition(|(w, _)| w == who) {
                    let (_, change) = self.applied.remove(pos);
                    self.undone.entry(who.clone()).or_default().push(change);
                    self.refold();
                }
            }
            Change::Redo => {
                if let Some(change) = self.undone.get_mut(who).and_then(|s| s.pop()) {
                    apply_change(&mut self.verdict, &change);
                    self.applied.push((who.clone(), change));
                }
            }
            change => {
                self.undone.remove(who);
                apply_change(&mut self.verdict, change);
                self.applied.push((who.clone(), change.clone()));
            }
        }
    }

    fn refold(&mut self) {
        let mut v = Verdict::default();
        for (_, c) in &self.applied {
            apply_change(&mut v, c);
        }
        self.verdict = v;
    }
}

/// Replay state of a whole log: one [`ObjectState`] per object id.
#[derive(Debug, Clone, Default)]
pub struct Replay {
    /// Per object, sorted by id.
    pub objects: BTreeMap<String, ObjectState>,
}

impl Replay {
    /// Replay `events` in order.
    pub fn from_events<'a>(events: impl IntoIterator<Item = &'a Event>) -> Replay {
        let mut r = Replay::default();
        for e in events {
            r.apply(e);
        }
        r
    }

    /// Apply one more event.
    pub fn apply(&mut self, event: &Event) {
        self.objects
            .entry(event.object_id.clone())
            .or_default()
            .apply(event);
    }

    /// The current verdicts (objects with at least one event).
    pub fn verdicts(&self) -> BTreeMap<String, Verdict> {
        self.objects
            .iter()
            .map(|(id, s)| (id.clone(), s.verdict.clone()))
            .collect()
    }
}

/// The current verdict of every object that appears in `events`.
pub fn replay(events: &[Event]) -> BTreeMap<String, Verdict> {
    Replay::from_events(events).verdicts()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::review::model::{Confidence, FitSeen, Flag, VerdictClass, ZSource};
    use approx::assert_relative_eq;

    fn ev(seq: u64, who: &str, id: &str, change: Change) -> Event {
        Event {
            v: 1,
            seq,
            time: chrono::Utc::now(),
            inspector: who.into(),
            object_id: id.into(),
            fit: None,
            change,
        }
    }

    fn accept(z: f64) -> Change {
        Change::Verdict {
            class: VerdictClass::Galaxy,
            z: Some(z),
            z_err: Some(1e-4),
            source: ZSource::Automatic,
            confidence: Confidence::Secure,
        }
    }

    #[test]
    fn fold_sets_every_field() {
        let events = vec![
            ev(1, "a", "o1", accept(0.5)),
            ev(
                2,
                "a",
                "o1",
                Change::Flag {
                    flag: Flag::Blend,
                    on: true,
                },
            ),
            ev(
                3,
                "a",
                "o1",
                Change::Note {
                    text: "two objects".into(),
                },
            ),
            ev(
                4,
                "a",
                "o1",
                Change::Class {
                    class: VerdictClass::Quasar,
                },
            ),
            ev(
                5,
                "a",
                "o1",
                Change::Confidence {
                    confidence: Confidence::Secure,
                },
            ),
        ];
        let v = &replay(&events)["o1"];
        assert_eq!(v.class, Some(VerdictClass::Quasar));
        assert_relative_eq!(v.z.unwrap(), 0.5);
        assert_eq!(v.z_source, Some(ZSource::Automatic));
        assert_eq!(v.confidence, Some(Confidence::Secure));
        assert!(v.flags.contains(&Flag::Blend));
        assert_eq!(v.note, "two objects");
    }

    #[test]
    fn undo_of_a_middle_change_refolds() {
        // Undo takes back the latest change (the note), then the flag: the
        // verdict is as if neither had happened.
        let mut r = Replay::default();
        r.apply(&ev(1, "a", "o", accept(1.0)));
        r.apply(&ev(
            2,
            "a",
            "o",
            Change::Flag {
                flag: Flag::Artefact,
                on: true,
            },
        ));
        r.apply(&ev(3, "a", "o", Change::Note { text: "x".into() }));
        r.apply(&ev(4, "a", "o", Change::Undo));
        r.apply(&ev(5, "a", "o", Change::Undo));
        let v = &r.objects["o"].verdict;
        assert!(v.flags.is_empty());
        assert_eq!(v.note, "");
        assert_eq!(v.class, Some(VerdictClass::Galaxy));
        // Redo brings the flag back first (latest undone), then the note.
        r.apply(&ev(6, "a", "o", Change::Redo));
        assert!(r.objects["o"].verdict.flags.contains(&Flag::Artefact));
        assert_eq!(r.objects["o"].verdict.note, "");
        r.apply(&ev(7, "a", "o", Change::Redo));
        assert_eq!(r.objects["o"].verdict.note, "x");
        assert!(!r.objects["o"].can_redo("a"));
    }

    #[test]
    fn new_change_clears_redo_and_undo_is_per_inspector() {
        let mut r = Replay::default();
        r.apply(&ev(1, "a", "o", accept(1.0)));
        r.apply(&ev(2, "b", "o", Change::Note { text: "b's".into() }));
        // a's undo skips b's note and removes a's verdict.
        r.apply(&ev(3, "a", "o", Change::Undo));
        assert_eq!(r.objects["o"].verdict.class, None);
        assert_eq!(r.objects["o"].verdict.note, "b's");
        assert!(r.objects["o"].can_redo("a"));
        assert!(!r.objects["o"].can_redo("b"));
        r.apply(&ev(
            4,
            "a",
            "o",
            Change::Class {
                class: VerdictClass::Star,
            },
        ));
        assert!(!r.objects["o"].can_redo("a"));
        // A redo with nothing to redo changes nothing.
        r.apply(&ev(5, "a", "o", Change::Redo));
        assert_eq!(r.objects["o"].verdict.class, Some(VerdictClass::Star));
        assert_eq!(r.objects["o"].events.len(), 5);
    }

    #[test]
    fn fit_seen_takes_the_best_finite_candidate() {
        use crate::fit::{Candidate, FitResult};
        let mut f = FitResult {
            object_id: "o".into(),
            candidates: vec![],
            delta_chi2: f64::INFINITY,
            chi2_reduced: 1.0,
            n_good: 10,
            snr_median: 1.0,
            warnings: Default::default(),
            curves: vec![],
            lines: vec![],
            per_class: vec![],
            refit_kept: false,
        };
        assert_eq!(FitSeen::of(&f), None);
        f.candidates.push(Candidate {
            class: crate::ObjectClass::Quasar,
            template: "q".into(),
            z: 2.5,
            z_err: 1e-3,
            chi2: 900.0,
            coeffs: vec![],
        });
        let seen = FitSeen::of(&f).unwrap();
        assert_eq!(seen.class, crate::ObjectClass::Quasar);
        assert_relative_eq!(seen.z, 2.5);
        f.candidates[0].chi2 = f64::NAN;
        assert_eq!(FitSeen::of(&f), None);
    }

    #[test]
    fn unclear_without_z_clears_redshift() {
        let events = vec![
            ev(1, "a", "o", accept(0.3)),
            ev(
                2,
                "a",
                "o",
                Change::Verdict {
                    class: VerdictClass::Unclear,
                    z: None,
                    z_err: Some(0.1),
                    source: ZSource::Typed,
                    confidence: Confidence::Guess,
                },
            ),
        ];
        let v = &replay(&events)["o"];
        assert_eq!(v.z, None);
        assert_eq!(v.z_err, None);
        assert_eq!(v.z_source, None);
    }
}
