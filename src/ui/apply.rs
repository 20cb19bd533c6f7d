/*!
Applying the frame's actions. Every change of a verdict goes through
[`ReviewLog::record`] with the matching [`Change`]; the window only decides
which change the inspector's key or click means.
*/
use crate::fit::Candidate;
use crate::review::{Change, Confidence, FitSeen, ReviewLog, ZSource};

use super::action::Action;
use super::app::ZvetApp;
use super::settings;
use super::state::Shown;

/// Confidence given when the inspector accepts without choosing one.
pub const DEFAULT_CONFIDENCE: Confidence = Confidence::Solid;

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
        match action {
            Action::Select(i) => self.select(i),
            Action::Step(d) => {
                if let Some(i) = self.state.step_target(d) {
                    self.select(i);
                }
            }
            Action::AcceptShown => self.accept_shown(),
            Action::SetClass(class) => self.record(Change::Class { class }),
            Action::SetConfidence(confidence) => self.record(Change::Confidence { confidence }),
            Action::ToggleFlag(flag) => {
                self.state.flag_chord = false;
                let on = !self.current_verdict().is_some_and(|v| v.flags.contains(&flag));
                self.record(Change::Flag { flag, on });
            }
            Action::SetNote(text) => self.record(Change::Note { text }),
            Action::TypeZ(text) => match parse_z(&text) {
                Ok(z) => {
                    self.show_z(z, ZSource::Typed);
                    self.record(Change::Redshift {
                        z,
                        z_err: None,
                        source: ZSource::Typed,
                    });
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
                self.preview(k);
                self.accept_shown();
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
                self.rebuild_queue();
            }
            Action::SetSort(k) => {
                self.state.sort = k;
                self.rebuild_queue();
            }
            Action::Resort => self.rebuild_queue(),
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
                if self.log.is_some() {
                    self.state.name_prompt = None;
                }
            }
            Action::Focus(f) => self.state.focus = Some(f),
            Action::FlagChord => self.state.flag_chord = true,
            Action::SetInspector(name) => self.set_inspector(&name),
            Action::AskInspector => self.state.name_prompt = Some(self.inspector.clone().unwrap_or_default()),
            Action::Open(kind, paths) => self.loads.open(kind, paths),
            Action::Browse(kind) => self.loads.browse(kind),
            Action::Tool(t) => self.apply_tool(t),
        }
    }

    /// Record `change` on the selected object; errors go to the message strip.
    pub(crate) fn record(&mut self, change: Change) {
        let Some(index) = self.state.selected else {
            self.state.say("select an object first", true);
            return;
        };
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
            }
            Err(e) => self.state.say(format!("could not record: {e}"), true),
        }
        self.after_record();
    }

    /// What the engine showed: the automatic best solution.
    fn fit_seen(&self) -> Option<FitSeen> {
        self.state.current_fit().and_then(FitSeen::of)
    }

    /// Accept the shown class and z with the verdict's confidence (or the default).
    fn accept_shown(&mut self) {
        let Some(shown) = self.state.shown.clone() else {
            self.state
                .say("no fit to accept yet: wait for it, or type a z and a class", true);
            return;
        };
        let confidence = self
            .current_verdict()
            .and_then(|v| v.confidence)
            .unwrap_or(DEFAULT_CONFIDENCE);
        let z_err = match shown.source {
            ZSource::Typed => None,
            _ => Some(shown.candidate.z_err).filter(|e| e.is_finite()),
        };
        self.record(Change::Verdict {
            class: shown.class().into(),
            z: Some(shown.z()),
            z_err,
            source: shown.source,
            confidence,
        });
        let v = self.current_verdict().cloned();
        self.state.sync_texts(v.as_ref());
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

    /// Show redshift `z` with the shown class's template (or the best's).
    fn show_z(&mut self, z: f64, source: ZSource) {
        let base: Option<Candidate> = self
            .state
            .shown
            .as_ref()
            .map(|s| s.candidate.clone())
            .or_else(|| self.state.current_fit().and_then(|f| f.best()).cloned());
        if let Some(mut c) = base {
            c.z = z;
            self.state.shown = Some(Shown {
                candidate: c,
                rank: None,
                source,
            });
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
        self.state.sync_texts(v.as_ref());
    }

    /// Use `name` as the inspector: open that inspector's log and remember the name.
    pub(crate) fn set_inspector(&mut self, name: &str) {
        let name = name.trim();
        if name.is_empty() {
            self.state.say("the inspector name may not be empty", true);
            self.state.name_prompt = Some(String::new());
            return;
        }
        let path = self.log_place.path_for(name);
        if let Some(dir) = path.parent() {
            let _ = std::fs::create_dir_all(dir);
        }
        // Close the old log first so its lock is released.
        self.log = None;
        match ReviewLog::open(&path, name) {
            Ok((log, problems)) => {
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
                    if let Err(e) = settings::write_name(f, name) {
                        self.state.say(format!("could not remember the name: {e}"), true);
                    }
                }
                self.rebuild_queue();
                let v = self.current_verdict().cloned();
                self.state.sync_texts(v.as_ref());
            }
            Err(e) => {
                self.state.say(
                    format!("could not open the review log {}: {e}", path.display()),
                    true,
                );
                self.state.name_prompt = Some(name.to_string());
            }
        }
    }
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
