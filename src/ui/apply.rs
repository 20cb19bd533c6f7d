/*!
Applying the frame's actions. Every change of a verdict goes through
[`ReviewLog::record`] with the matching [`Change`]; the window only decides
which change the inspector's key or click means.

The verdict rules (also in the README):
- Space records the shown class and z. On an object whose verdict is
  complete it never replaces that verdict quietly: when the shown solution
  *is* the recorded one, Space keeps it and records nothing; when it differs
  (another candidate, a nudge), the window asks, and only a second Space (or
  Enter) replaces it — Esc keeps the old one.
- A class key records a complete verdict of that class: at a typed z when the
  shown z was typed, else at the z shown when it already is of that class,
  else at that class's best solution in the fit. `U` records unclear, no z.
- A typed z records the shown class at that z.
- A grade key (Shift+S/P/G) changes the grade of a complete verdict, and on
  any other object accepts the shown solution with that grade.
- The grade of a verdict is kept by later accepts; a plain accept of a new
  object is secure.
*/
use crate::review::{Change, Confidence, FitSeen, Verdict, VerdictClass, ZSource};

use super::action::Action;
use super::app::ZvetApp;
use super::settings;
use super::state::{Pending, Shown};

/// Grade given when the inspector accepts without choosing one.
pub const DEFAULT_CONFIDENCE: Confidence = Confidence::Secure;

/// One nudge step, as a fraction of (1+z) (≈ 300 km/s).
pub const NUDGE_STEP: f64 = 0.001;

/// Read a typed redshift: a finite number above −0.01 and below 12.
pub fn parse_z(text: &str) -> Result<f64, String> {
    let t = text.trim();
    let z: f64 = t
        .parse()
        .map_err(|_| format!("'{t}' is not a number; type a redshift such as 0.523"))?;
    if !z.is_finite() || !(-0.01..12.0).contains(&z) {
        return Err(format!("z = {t} is outside −0.01 … 12"));
    }
    Ok(z)
}

impl ZvetApp {
    /// Apply one action.
    pub fn apply(&mut self, action: Action) {
        // A replacement waiting for confirmation lasts only until the next
        // request: Space (or Enter) confirms, anything else keeps the verdict.
        let pending = self.state.pending.take();
        match (&action, pending) {
            (Action::AcceptShown | Action::Confirm, Some(p)) => return self.confirm(p),
            (Action::Escape, Some(_)) => {
                self.state.say("the recorded verdict was kept", false);
                let v = self.current_verdict().cloned();
                self.state.show_recorded(v.as_ref());
                return;
            }
            _ => {}
        }
        match action {
            Action::Select(i) => self.select(i),
            Action::Step(d) => {
                if let Some(i) = self.state.step_target(d) {
                    self.select(i);
                }
            }
            Action::AcceptShown => self.accept_shown(),
            Action::Confirm => {}
            Action::SetClass(class) => self.set_class(class),
            Action::SetConfidence(confidence) => self.set_grade(confidence),
            Action::ToggleFlag(flag) => {
                self.state.flag_chord = false;
                let on = !self.current_verdict().is_some_and(|v| v.flags.contains(&flag));
                self.record(Change::Flag { flag, on });
            }
            Action::SetNote(text) => self.record(Change::Note { text }),
            Action::TypeZ(text) => match parse_z(&text) {
                Ok(z) => {
                    self.show_z(z, ZSource::Typed);
                    let Some(class) = self.state.shown.as_ref().map(|s| s.class()) else {
                        // No fit on screen yet: keep the typed z (nothing typed is
                        // lost); the verdict is complete once a class goes with it.
                        self.record(Change::Redshift {
                            z,
                            z_err: None,
                            source: ZSource::Typed,
                        });
                        self.state.say(
                            format!("z = {z} recorded; press G, Q or S (or Space once the fit is in) for the class"),
                            false,
                        );
                        return;
                    };
                    self.record_verdict(class.into(), Some(z), None, ZSource::Typed, None);
                }
                Err(e) => self.state.say(e, true),
            },
            Action::Preview(k) => self.preview(k),
            Action::CycleCandidate(d) => {
                let n = self.state.listed_fit().map_or(0, |f| f.candidates.len());
                if n > 0 {
                    let cur = self.state.shown.as_ref().and_then(|s| s.rank).unwrap_or(0);
                    let k = (cur as isize + d).rem_euclid(n as isize) as usize;
                    self.preview(k);
                }
            }
            Action::AcceptCandidate(k) => {
                // A click on "accept #k" says which verdict it means: recorded at once.
                self.preview(k);
                if let Some(s) = self.state.shown.clone() {
                    let err = Some(s.candidate.z_err).filter(|e| e.is_finite());
                    self.record_verdict(s.class().into(), Some(s.z()), err, s.source, None);
                }
            }
            Action::Nudge(steps) => {
                if let Some(z) = self.state.shown.as_ref().map(|s| s.z()) {
                    self.show_z(z + steps * NUDGE_STEP * (1.0 + z), ZSource::Typed);
                    self.state.z_text = self
                        .state
                        .shown
                        .as_ref()
                        .map(|s| format!("{:.5}", s.z()))
                        .unwrap_or_default();
                }
            }
            Action::RefitNear { z, class } => {
                if let Some(i) = self.state.selected {
                    self.jobs.refit(i, z, class);
                    self.state.refit_running = true;
                }
            }
            Action::RefitShown => {
                if let Some(s) = &self.state.shown {
                    let (z, class) = (s.z(), Some(s.class()));
                    self.apply(Action::RefitNear { z, class });
                }
            }
            Action::Undo => self.undo_redo(true),
            Action::Redo => self.undo_redo(false),
            Action::SetFilter(f) => {
                self.state.filter = f;
                self.timed_rebuild();
            }
            Action::SetSort(k) => {
                self.state.sort = k;
                self.timed_rebuild();
            }
            Action::Resort => self.timed_rebuild(),
            Action::Move(m) => self.state.plot_move = Some(m),
            Action::ToggleRestFrame => self.state.view.rest_frame = !self.state.view.rest_frame,
            Action::Smooth(d) => {
                self.state.tools.auto_smoothing = false;
                let w = self.state.view.smoothing as isize + 2 * d;
                self.state.view.smoothing = w.clamp(1, 51) as usize;
            }
            Action::ToggleHelp => self.state.help_open = !self.state.help_open,
            Action::Escape => {
                self.state.help_open = false;
                self.state.flag_chord = false;
                self.state.tools.jump = None;
                if self.state.name_prompt.take().is_some() && self.log.is_none() {
                    self.state.say(
                        "no inspector name: you can look, but recording asks for a name first",
                        false,
                    );
                }
            }
            Action::Quit => self.state.quit_asked = true,
            Action::Focus(f) => self.state.focus = Some(f),
            Action::FlagChord => self.state.flag_chord = true,
            Action::SetInspector(name) => self.set_inspector(&name, true),
            Action::AskInspector => self.state.name_prompt = Some(self.inspector.clone().unwrap_or_default()),
            Action::Open(kind, paths) => self.loads.open(kind, paths),
            Action::Browse(kind) => self.loads.browse(kind),
            Action::CancelFits => {
                let n = self.jobs.cancel_fits();
                self.state.say(
                    format!(
                        "background fits stopped: {n} objects left unfitted (they are fitted when shown)"
                    ),
                    false,
                );
            }
            Action::Tool(t) => self.apply_tool(t),
        }
    }

    /// Re-filter and re-sort the queue (timed when the window is measured).
    fn timed_rebuild(&mut self) {
        let t0 = std::time::Instant::now();
        self.rebuild_queue();
        if let Some(t) = &mut self.timing {
            let sort = format!("{:?}", self.state.sort);
            t.queue(t0.elapsed(), &sort, self.state.order.len());
        }
    }

    /// Record `change` on the selected object; errors go to the message strip.
    pub(crate) fn record(&mut self, change: Change) {
        let Some(index) = self.state.selected else {
            self.state.say("select an object first", true);
            return;
        };
        if let Some(e) = &self.state.load_error {
            let e = format!("nothing recorded: {e}");
            self.state.say(e, true);
            return;
        }
        let seen = self.fit_seen();
        let id = self.state.objects[index].id().to_string();
        let Some(log) = self.log.as_mut() else {
            self.state
                .say("enter your name first (the review log is per inspector)", true);
            self.state.name_prompt.get_or_insert_with(String::new);
            return;
        };
        match log.record(&id, seen, change) {
            Ok(()) => {
                let v = log.verdict(&id).cloned();
                self.state.refresh_item(index, v.as_ref());
                self.state.order_stale = true;
            }
            Err(e) => self.state.say(format!("could not record: {e}"), true),
        }
        self.after_record();
    }

    /// What the engine showed: the automatic best solution.
    fn fit_seen(&self) -> Option<FitSeen> {
        self.state.current_fit().and_then(FitSeen::of)
    }

    /// The certainty an accept records: the verdict's, else secure.
    fn grade_now(&self) -> Confidence {
        self.current_verdict()
            .and_then(|v| v.confidence)
            .unwrap_or(DEFAULT_CONFIDENCE)
    }

    /// The complete verdict change for `class` at `z` (grade as given, or kept, or secure).
    fn verdict_change(
        &self,
        class: VerdictClass,
        z: Option<f64>,
        z_err: Option<f64>,
        source: ZSource,
        grade: Option<Confidence>,
    ) -> Change {
        Change::Verdict {
            class,
            z,
            z_err: z_err.filter(|e| e.is_finite() && z.is_some()),
            source,
            confidence: grade.unwrap_or_else(|| self.grade_now()),
        }
    }

    /// Record a complete verdict unless it is exactly the recorded one.
    fn record_verdict(
        &mut self,
        class: VerdictClass,
        z: Option<f64>,
        z_err: Option<f64>,
        source: ZSource,
        grade: Option<Confidence>,
    ) {
        let change = self.verdict_change(class, z, z_err, source, grade);
        if self.current_verdict().is_some_and(|v| same_verdict(v, &change)) {
            return;
        }
        self.record(change);
    }

    /// Space: accept the shown class and z — never quietly replacing a
    /// complete verdict (see the module notes).
    fn accept_shown(&mut self) {
        let Some(shown) = self.state.shown.clone() else {
            self.state
                .say("no fit to accept yet: wait for it, or type a z and a class", true);
            return;
        };
        let z_err = match shown.source {
            ZSource::Typed => None,
            _ => Some(shown.candidate.z_err),
        };
        let change = self.verdict_change(shown.class().into(), Some(shown.z()), z_err, shown.source, None);
        match (self.current_verdict().cloned(), self.state.selected) {
            (Some(v), Some(index)) if v.is_complete() => {
                if shown.is_recorded_in(&v) || same_verdict(&v, &change) {
                    self.state
                        .say(format!("kept the recorded verdict: {}", verdict_words(&v)), false);
                } else {
                    self.state.pending = Some(Pending {
                        index,
                        text: format!(
                            "Replace the recorded verdict ({}) with {} z = {:.5}?",
                            verdict_words(&v),
                            shown.class(),
                            shown.z()
                        ),
                        change,
                    });
                }
            }
            _ => self.record(change),
        }
    }

    /// Record a confirmed replacement (if it is still for the selected object).
    fn confirm(&mut self, p: Pending) {
        if self.state.selected == Some(p.index) {
            self.record(p.change);
            let v = self.current_verdict().cloned();
            self.state.sync_texts(v.as_ref());
        }
    }

    /// A class key: record a complete verdict of `class` (module notes).
    fn set_class(&mut self, class: VerdictClass) {
        let Some(oc) = class.object_class() else {
            let grade = self.grade_now();
            self.record(Change::Verdict {
                class,
                z: None,
                z_err: None,
                source: ZSource::Typed,
                confidence: grade,
            });
            return;
        };
        let fit = self.state.listed_fit();
        let shown = match self.state.shown.as_ref() {
            Some(s) if s.source == ZSource::Typed => Some(Shown::class_at(fit, oc, s.z(), ZSource::Typed)),
            Some(s) if s.class() == oc => Some(s.clone()),
            _ => fit.and_then(|f| Shown::best_of_class(f, oc)),
        };
        let Some(shown) = shown else {
            self.state.say(
                format!("the fit has no {oc} solution yet: type a z (Z) to record {oc}"),
                true,
            );
            return;
        };
        self.state.z_text = format!("{:.5}", shown.z());
        let z_err = Some(shown.candidate.z_err).filter(|_| shown.source != ZSource::Typed);
        self.state.shown = Some(shown.clone());
        self.record_verdict(class, Some(shown.z()), z_err, shown.source, None);
    }

    /// A grade key: regrade a complete verdict, else accept the shown
    /// solution with this grade.
    fn set_grade(&mut self, grade: Confidence) {
        if self.current_verdict().is_some_and(Verdict::is_complete) {
            if self.current_verdict().and_then(|v| v.confidence) != Some(grade) {
                self.record(Change::Confidence { confidence: grade });
            }
            return;
        }
        let Some(s) = self.state.shown.clone() else {
            self.state
                .say("no fit to grade yet: wait for it, or type a z and a class", true);
            return;
        };
        let z_err = Some(s.candidate.z_err).filter(|_| s.source != ZSource::Typed);
        self.record_verdict(s.class().into(), Some(s.z()), z_err, s.source, Some(grade));
    }

    /// Show candidate `k` of the listed fit.
    fn preview(&mut self, k: usize) {
        let from_refit = self.state.refit.is_some();
        let Some(c) = self.state.listed_fit().and_then(|f| f.candidates.get(k)).cloned() else {
            return;
        };
        let source = match (from_refit, k) {
            (true, _) => ZSource::Refit,
            (false, 0) => ZSource::Automatic,
            (false, _) => ZSource::Candidate,
        };
        self.state.z_text = format!("{:.5}", c.z);
        self.state.shown = Some(Shown {
            candidate: c,
            rank: Some(k),
            source,
        });
    }

    /// Show redshift `z` in the shown class (that class's template moved to `z`).
    fn show_z(&mut self, z: f64, source: ZSource) {
        let fit = self.state.listed_fit();
        let class = self
            .state
            .shown
            .as_ref()
            .map(|s| s.class())
            .or_else(|| fit.and_then(|f| f.best()).map(|c| c.class));
        if let Some(class) = class {
            let mut shown = Shown::class_at(fit, class, z, source);
            // Keep the template the inspector was looking at, when it is of that class.
            if let Some(old) = self.state.shown.as_ref().filter(|s| s.class() == class) {
                if shown.rank.is_none() {
                    shown.candidate = old.candidate.clone();
                    shown.candidate.z = z;
                    shown.candidate.z_err = f64::NAN;
                }
            }
            self.state.shown = Some(shown);
        }
    }

    fn undo_redo(&mut self, undo: bool) {
        let Some(o) = self.state.current() else {
            return;
        };
        let id = o.id().to_string();
        let possible = self
            .log
            .as_ref()
            .is_some_and(|l| if undo { l.can_undo(&id) } else { l.can_redo(&id) });
        if !possible {
            let what = if undo { "undo" } else { "redo" };
            self.state.say(format!("nothing to {what} on {id}"), false);
            return;
        }
        self.record(if undo { Change::Undo } else { Change::Redo });
        let v = self.current_verdict().cloned();
        self.state.show_recorded(v.as_ref());
    }

    /// Use `name` as the inspector: open that inspector's log, go back to
    /// where they left off, and — when the name was typed in the dialog
    /// (`remember`) — remember it. A name from the command line is used for
    /// this session only.
    pub(crate) fn set_inspector(&mut self, name: &str, remember: bool) {
        let name = name.trim();
        if name.is_empty() {
            self.state.say("the inspector name may not be empty", true);
            self.state.name_prompt = Some(String::new());
            return;
        }
        // Close the old log first so its lock is released.
        self.log = None;
        self.resume = None;
        let opened = match self.log_place.open(name) {
            Ok(Some(o)) => o,
            Ok(None) => {
                // The files are still being read: the log opens once they are in.
                self.inspector = Some(name.to_string());
                self.state.name_prompt = None;
                return;
            }
            Err(e) => {
                self.state
                    .say(format!("could not open the review log of {name}: {e}"), true);
                self.state.name_prompt = Some(name.to_string());
                return;
            }
        };
        let super::app::OpenedLog { log, problems, path } = opened;
        for p in problems {
            self.state.say(
                format!("{}: line {} skipped: {}", path.display(), p.line, p.message),
                true,
            );
        }
        self.state
            .say(format!("{name} reviews into {}", path.display()), false);
        self.log = Some(log);
        self.inspector = Some(name.to_string());
        self.state.name_prompt = None;
        if let Some(f) = &self.name_file {
            let remembered = settings::read_name(f);
            if remember {
                if let Err(e) = settings::write_name(f, name) {
                    self.state.say(format!("could not remember the name: {e}"), true);
                }
            } else if remembered.as_deref().is_some_and(|r| r != name) {
                self.state.say(
                    format!(
                        "{name} for this session only; the remembered name stays {}",
                        remembered.unwrap_or_default()
                    ),
                    false,
                );
            }
        }
        let here = self.state.current().map(|o| o.id().to_string());
        self.load_resume(&path);
        if self.resume_target.is_none() {
            self.resume_target = here;
        }
        self.rebuild_queue();
        self.select_start();
    }
}

/// True when recording `change` would leave `v` as it is.
fn same_verdict(v: &Verdict, change: &Change) -> bool {
    let mut after = v.clone();
    crate::review::apply_change(&mut after, change);
    after == *v
}

/// A verdict in words for the window: class, z and its source, grade.
pub fn verdict_words(v: &Verdict) -> String {
    let class = v.class.map_or("no class", |c| c.as_str());
    let z = match (v.z, v.z_source) {
        (Some(z), Some(s)) => format!(" z = {z:.5} ({})", s.as_str()),
        (Some(z), None) => format!(" z = {z:.5}"),
        _ => String::new(),
    };
    let grade = v
        .confidence
        .map_or(String::new(), |c| format!(", {}", c.as_str()));
    format!("{class}{z}{grade}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn typed_redshifts_are_checked() {
        assert!((parse_z(" 0.523 ").unwrap() - 0.523).abs() < 1e-12);
        assert!(parse_z("abc").is_err());
        assert!(parse_z("NaN").is_err());
        assert!(parse_z("40").is_err());
    }
}
