/*!
The inspector's tools beside the verdict loop: adjudication (every
inspector's verdict on the object side by side, a conflicts-only queue),
jumping to an object by id, a template overlay, catalogue photometry and the
sky spectrum over the flux, and automatic smoothing from the median S/N.

State lives in [`ToolsState`] (a field of the window's state); requests are
[`ToolAction`]s applied after the frame like every other action. Verdicts
are recorded only through the review log, as everywhere else: adopting
another inspector's verdict is an ordinary verdict in one's own log.
*/
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use egui::{Key, Modifiers};

use crate::fit::OverlayTemplate;
use crate::photometry::{self, PhotPoint};
use crate::queue::QueueItem;
use crate::review::merge::{merge, InspectorLog, MergeOptions, Merged, DEFAULT_TOLERANCE};
use crate::review::{Change, Verdict, ZSource};

use super::action::Action;
use super::app::{LogPlace, ZvetApp};
use super::state::{AppState, Shown};

/// Every inspector's verdicts, merged by the library's merge rules.
#[derive(Debug, Clone)]
pub struct Adjudication {
    /// Each inspector's replayed log (name = the log file's stem).
    pub logs: Vec<InspectorLog>,
    /// The merge of all logs with the campaign's adjudicator.
    pub merged: Merged,
    /// Objects on which the regular inspectors disagree (decided or not).
    pub conflicts: BTreeSet<String>,
    /// The adjudicator's name, if the campaign has one.
    pub adjudicator: Option<String>,
    /// Tolerance on |Δz|/(1+z) used.
    pub tolerance: f64,
    /// Lines of logs that could not be used.
    pub problems: Vec<String>,
    /// Folder the logs were read from.
    pub folder: PathBuf,
}

impl Adjudication {
    /// Read every log next to the window's own and merge them. A log folder
    /// inside a campaign (`<campaign>/reviews`) takes the campaign's
    /// tolerance and adjudicator (as `zvet campaign merge` does).
    pub fn load(place: &LogPlace) -> Result<Adjudication, String> {
        let Some(folder) = place.folder() else {
            return Err("the spectra are still loading: no review log yet".into());
        };
        let campaign_dir = folder
            .parent()
            .filter(|p| crate::pipeline::kind::kind_of(p) == crate::pipeline::kind::PathKind::Campaign);
        let (logs, problems, adjudicator, tolerance) = match campaign_dir {
            Some(dir) => {
                let c = crate::campaign::Campaign::open(dir).map_err(|e| e.to_string())?;
                let (logs, problems) = c.read_logs().map_err(|e| e.to_string())?;
                // The campaign's rule: the manifest's adjudicator, else a log named so.
                let adjudicator = c.manifest().adjudicator.clone().or_else(|| {
                    logs.iter()
                        .any(|l| l.inspector == "adjudicator")
                        .then(|| "adjudicator".to_string())
                });
                (logs, problems, adjudicator, c.manifest().tolerance)
            }
            None => {
                let (logs, problems) = read_folder(&folder)?;
                (logs, problems, None, DEFAULT_TOLERANCE)
            }
        };
        let mut a = Adjudication {
            merged: merge(&[], &MergeOptions::default()),
            logs,
            conflicts: BTreeSet::new(),
            adjudicator,
            tolerance,
            problems,
            folder,
        };
        a.remerge();
        Ok(a)
    }

    /// Merge again after a log changed.
    pub fn remerge(&mut self) {
        let opts = MergeOptions {
            tolerance: self.tolerance,
            adjudicator: self.adjudicator.clone(),
        };
        self.merged = merge(&self.logs, &opts);
        // Conflicts among the regular inspectors, whether or not decided yet.
        let regular: Vec<InspectorLog> = self
            .logs
            .iter()
            .filter(|l| Some(&l.inspector) != self.adjudicator.as_ref())
            .cloned()
            .collect();
        let plain = merge(
            &regular,
            &MergeOptions {
                tolerance: self.tolerance,
                adjudicator: None,
            },
        );
        self.conflicts = plain.conflicts().map(|c| c.object_id.clone()).collect();
    }

    /// Replace the verdicts of the log stored at `path` (the window's own
    /// log, after a change) and merge again.
    pub fn update_log(
        &mut self,
        path: &Path,
        inspector: &str,
        verdicts: impl Iterator<Item = (String, Verdict)>,
    ) {
        let stem = stem(path);
        let verdicts = verdicts.collect();
        match self.logs.iter_mut().find(|l| l.inspector == stem) {
            Some(l) => l.verdicts = verdicts,
            None => {
                let name = if stem.is_empty() {
                    inspector.to_string()
                } else {
                    stem
                };
                self.logs.push(InspectorLog {
                    file_name: name.clone(),
                    inspector: name,
                    verdicts,
                    problems: Vec::new(),
                    // Not read from a file: no digest to compare with copies.
                    fingerprint: 0,
                });
                self.logs.sort_by(|a, b| a.inspector.cmp(&b.inspector));
            }
        }
        self.remerge();
    }

    /// Every inspector's verdict on `id` (with a class or not), by name.
    pub fn opinions(&self, id: &str) -> Vec<(&str, &Verdict)> {
        self.logs
            .iter()
            .filter_map(|l| l.verdicts.get(id).map(|v| (l.inspector.as_str(), v)))
            .collect()
    }
}

fn stem(path: &Path) -> String {
    path.file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or_default()
        .to_string()
}

/// Every `*.jsonl` log in `folder`, read without locking and replayed.
fn read_folder(folder: &Path) -> Result<(Vec<InspectorLog>, Vec<String>), String> {
    let rd = match std::fs::read_dir(folder) {
        Ok(rd) => rd,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok((Vec::new(), Vec::new())),
        Err(e) => return Err(format!("{}: {e}", folder.display())),
    };
    let mut paths: Vec<PathBuf> = rd
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|e| e == "jsonl"))
        .collect();
    paths.sort();
    let mut logs = Vec::new();
    let mut problems = Vec::new();
    for p in paths {
        let name = stem(&p);
        let log = InspectorLog::read(&p, &name).map_err(|e| e.to_string())?;
        problems.extend(log.problems.iter().map(|q| format!("{}: {q}", p.display())));
        logs.push(log);
    }
    Ok((logs, problems))
}

/// Plot data of the tools for the shown object (computed when it changes).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ToolsPrepared {
    /// The overlay template's model (x, flux), smoothed like the flux.
    pub overlay: Vec<[f64; 2]>,
    /// Why there is no overlay although one was chosen.
    pub overlay_error: Option<String>,
    /// Catalogue photometry as points (x already on the plot's axis).
    pub phot: Vec<PhotPoint>,
    /// Why no photometry is drawn although it was asked for.
    pub phot_note: Option<String>,
    /// The sky spectrum (x, flux in the spectrum's unit), smoothed like the flux.
    pub sky: Vec<[f64; 2]>,
}

#[derive(Debug, Clone, PartialEq)]
struct PrepKey {
    serial: u64,
    selected: Option<usize>,
    z: Option<u64>,
    overlay: Option<OverlayTemplate>,
    smoothing: usize,
    rest: bool,
    phot: bool,
    sky: bool,
}

/// What the tools know and show.
#[derive(Debug, Clone)]
pub struct ToolsState {
    /// The merged logs, once loaded.
    pub adjudication: Option<Adjudication>,
    /// The side-by-side verdicts are shown.
    pub adjudicate_open: bool,
    /// The queue lists only objects the inspectors disagree on.
    pub conflicts_only: bool,
    /// The jump field is open, with its text.
    pub jump: Option<String>,
    /// Give the jump field the keyboard on the next frame.
    pub jump_focus: bool,
    /// Templates that can be laid over the spectrum.
    pub templates: Vec<OverlayTemplate>,
    /// The template laid over the spectrum.
    pub overlay: Option<OverlayTemplate>,
    /// Draw the catalogue photometry.
    pub show_photometry: bool,
    /// Draw the sky spectrum under the flux.
    pub show_sky: bool,
    /// Choose the smoothing from each object's median S/N.
    pub auto_smoothing: bool,
    /// Plot data for the shown object.
    pub prepared: ToolsPrepared,
    key: Option<PrepKey>,
    /// The engine the template list came from (its address).
    templates_of: usize,
}

impl Default for ToolsState {
    fn default() -> Self {
        ToolsState {
            adjudication: None,
            adjudicate_open: false,
            conflicts_only: false,
            jump: None,
            jump_focus: false,
            templates: Vec::new(),
            overlay: None,
            show_photometry: true,
            show_sky: false,
            auto_smoothing: true,
            prepared: ToolsPrepared::default(),
            key: None,
            templates_of: 0,
        }
    }
}

impl ToolsState {
    /// Keep only conflicts in the displayed list when that filter is on.
    pub fn restrict(&self, items: &[QueueItem], order: &mut Vec<usize>) {
        if !self.conflicts_only {
            return;
        }
        match &self.adjudication {
            Some(a) => order.retain(|&i| items.get(i).is_some_and(|it| a.conflicts.contains(&it.id))),
            None => order.clear(),
        }
    }
}

/// A request for one of the tools.
#[derive(Debug, Clone, PartialEq)]
pub enum ToolAction {
    /// Show or hide every inspector's verdict on the object.
    ToggleAdjudicate,
    /// List only the objects the inspectors disagree on (or everything).
    ConflictsOnly(bool),
    /// Read every log again (other inspectors may have worked since).
    ReloadAdjudication,
    /// Show this inspector's class and z on the spectrum (nothing recorded).
    ShowOpinion(String),
    /// Record this inspector's class and z as one's own verdict.
    AdoptOpinion(String),
    /// Open the jump field.
    OpenJump,
    /// Close the jump field.
    CloseJump,
    /// Select object `index` (from the jump field).
    JumpTo(usize),
    /// Lay this template over the spectrum (None: no overlay).
    SetOverlay(Option<OverlayTemplate>),
    /// Next (+1) or previous (−1) template; the cycle passes through "none".
    CycleOverlay(isize),
    /// Catalogue photometry on or off.
    TogglePhotometry,
    /// Sky spectrum on or off.
    ToggleSky,
    /// Automatic smoothing on or off.
    AutoSmoothing(bool),
}

/// The tools' keys, read after the main scheme (same conditions: nothing
/// fires while a text field has the keyboard or a flag chord is open).
pub fn read_keys(ctx: &egui::Context, state: &AppState, out: &mut Vec<Action>) {
    if ctx.egui_wants_keyboard_input()
        || state.name_prompt.is_some()
        || state.focus.is_some()
        || state.flag_chord
        || state.tools.jump.is_some()
    {
        return;
    }
    ctx.input_mut(|i| {
        let none = Modifiers::NONE;
        let mut jump = false;
        for key in [Key::J, Key::Slash] {
            if i.consume_key(none, key) {
                jump = true;
            }
        }
        if jump {
            // The key's own character must not land in the field.
            i.events
                .retain(|e| !matches!(e, egui::Event::Text(t) if t == "j" || t == "J" || t == "/"));
            out.push(Action::Tool(ToolAction::OpenJump));
        }
        if i.consume_key(Modifiers::SHIFT, Key::A) {
            out.push(Action::Tool(ToolAction::ConflictsOnly(
                !state.tools.conflicts_only,
            )));
        } else if i.consume_key(none, Key::A) {
            out.push(Action::Tool(ToolAction::ToggleAdjudicate));
        }
        if i.consume_key(Modifiers::SHIFT, Key::M) {
            out.push(Action::Tool(ToolAction::CycleOverlay(-1)));
        } else if i.consume_key(none, Key::M) {
            out.push(Action::Tool(ToolAction::CycleOverlay(1)));
        }
        if i.consume_key(none, Key::I) {
            out.push(Action::Tool(ToolAction::TogglePhotometry));
        }
        if i.consume_key(none, Key::K) {
            out.push(Action::Tool(ToolAction::ToggleSky));
        }
        if i.consume_key(none, Key::Backslash) {
            out.push(Action::Tool(ToolAction::AutoSmoothing(true)));
        }
    });
}

impl ZvetApp {
    /// Apply one tool request.
    pub(crate) fn apply_tool(&mut self, a: ToolAction) {
        match a {
            ToolAction::ToggleAdjudicate => {
                self.state.tools.adjudicate_open = !self.state.tools.adjudicate_open;
                if self.state.tools.adjudicate_open {
                    self.load_adjudication();
                }
            }
            ToolAction::ConflictsOnly(on) => {
                self.state.tools.conflicts_only = on;
                if on {
                    self.load_adjudication();
                }
                self.rebuild_queue();
                if on && self.state.order.is_empty() {
                    self.state
                        .say("no object has verdicts that disagree (yet)", false);
                }
            }
            ToolAction::ReloadAdjudication => {
                self.load_adjudication();
                self.rebuild_queue();
            }
            ToolAction::ShowOpinion(who) => {
                if let Some(v) = self.opinion(&who) {
                    self.show_opinion(&v);
                }
            }
            ToolAction::AdoptOpinion(who) => self.adopt(&who),
            ToolAction::OpenJump => {
                self.state.tools.jump = Some(String::new());
                self.state.tools.jump_focus = true;
            }
            ToolAction::CloseJump => self.state.tools.jump = None,
            ToolAction::JumpTo(i) => {
                self.state.tools.jump = None;
                if i < self.state.objects.len() {
                    self.select(i);
                    if self.state.position().is_none() {
                        let id = self.state.objects[i].id().to_string();
                        self.state.say(
                            format!("{id} is not in the list as filtered; shown anyway"),
                            false,
                        );
                    }
                }
            }
            ToolAction::SetOverlay(t) => self.state.tools.overlay = t,
            ToolAction::CycleOverlay(d) => {
                let list = &self.state.tools.templates;
                if list.is_empty() {
                    self.state.say("this engine offers no templates to overlay", true);
                    return;
                }
                // Positions 0..n are templates, n is "none".
                let n = list.len() as isize;
                let cur = self
                    .state
                    .tools
                    .overlay
                    .as_ref()
                    .and_then(|o| list.iter().position(|t| t == o))
                    .map_or(n, |p| p as isize);
                let next = (cur + d).rem_euclid(n + 1);
                self.state.tools.overlay = list.get(next as usize).cloned();
            }
            ToolAction::TogglePhotometry => {
                self.state.tools.show_photometry = !self.state.tools.show_photometry
            }
            ToolAction::ToggleSky => self.state.tools.show_sky = !self.state.tools.show_sky,
            ToolAction::AutoSmoothing(on) => {
                self.state.tools.auto_smoothing = on;
                self.auto_smooth();
            }
        }
    }

    /// (Re)read every log and merge.
    pub(crate) fn load_adjudication(&mut self) {
        match Adjudication::load(&self.log_place) {
            Ok(a) => {
                for p in &a.problems {
                    self.state.say(p.clone(), true);
                }
                self.state.tools.adjudication = Some(a);
                self.sync_own_log();
            }
            Err(e) => self
                .state
                .say(format!("could not read the review logs: {e}"), true),
        }
    }

    /// Put the window's own log (as in memory) into the merge.
    pub(crate) fn sync_own_log(&mut self) {
        let (Some(log), Some(a)) = (self.log.as_ref(), self.state.tools.adjudication.as_mut()) else {
            return;
        };
        let verdicts = log.verdicts().map(|(id, v)| (id.to_string(), v.clone()));
        a.update_log(log.path(), log.inspector(), verdicts);
    }

    /// The named inspector's verdict on the selected object.
    fn opinion(&self, who: &str) -> Option<Verdict> {
        let id = self.state.current()?.id();
        let a = self.state.tools.adjudication.as_ref()?;
        a.opinions(id)
            .into_iter()
            .find(|(n, _)| *n == who)
            .map(|(_, v)| v.clone())
    }

    /// Draw an opinion's class and z (the fit's best candidate of that class,
    /// moved to that z); nothing is recorded.
    fn show_opinion(&mut self, v: &Verdict) {
        let (Some(class), Some(z)) = (v.class.and_then(|c| c.object_class()), v.z) else {
            self.state
                .say("that verdict has no class with a redshift to show", false);
            return;
        };
        let fit = self.state.listed_fit();
        let base = fit
            .and_then(|f| f.candidates.iter().find(|c| c.class == class))
            .or_else(|| fit.and_then(|f| f.best()))
            .cloned();
        if let Some(mut c) = base {
            c.class = class;
            c.z = z;
            self.state.z_text = format!("{z:.5}");
            self.state.shown = Some(Shown {
                candidate: c,
                rank: None,
                source: v.z_source.unwrap_or(ZSource::Typed),
            });
        }
    }

    /// Record `who`'s verdict as one's own: class and z (with its error and
    /// source), then their flags and note — one's own flags that they did
    /// not raise are cleared, and the note becomes theirs — with one's own
    /// certainty (as Space would give it). Each part is an ordinary event of
    /// one's own log (the verdict, one per flag changed, the note).
    fn adopt(&mut self, who: &str) {
        let Some(v) = self.opinion(who) else {
            self.state
                .say(format!("{who} has no verdict on this object"), true);
            return;
        };
        let Some(class) = v.class else {
            self.state.say(format!("{who}'s verdict has no class yet"), true);
            return;
        };
        self.show_opinion(&v);
        let confidence = self
            .current_verdict()
            .and_then(|x| x.confidence)
            .unwrap_or(super::DEFAULT_CONFIDENCE);
        self.record(Change::Verdict {
            class,
            z: v.z,
            z_err: v.z_err,
            source: v.z_source.unwrap_or(ZSource::Typed),
            confidence,
        });
        let Some(mine) = self.current_verdict().cloned() else {
            // not recorded (no log yet): the reason is already on screen
            return;
        };
        for flag in crate::review::Flag::ALL {
            let on = v.flags.contains(&flag);
            if mine.flags.contains(&flag) != on {
                self.record(Change::Flag { flag, on });
            }
        }
        if mine.note != v.note {
            self.record(Change::Note { text: v.note.clone() });
        }
        let mine = self.current_verdict().cloned();
        self.state.sync_texts(mine.as_ref());
        if let Some(m) = &mine {
            self.state.say(
                format!("adopted {who}'s verdict: {}", super::apply::verdict_words(m)),
                false,
            );
        }
    }

    /// After a change of one's own log: keep the merge current.
    pub(crate) fn after_record(&mut self) {
        if self.state.tools.adjudication.is_some() {
            self.sync_own_log();
        }
    }

    /// Set the smoothing from the selected object's median S/N when automatic.
    pub(crate) fn auto_smooth(&mut self) {
        if !self.state.tools.auto_smoothing {
            return;
        }
        if let Some(o) = self.state.current() {
            self.state.view.smoothing = crate::spectrum::auto_boxcar_width(o.spectrum.median_snr());
        }
    }

    /// Compute the overlay, photometry and sky plot data if anything they
    /// depend on changed.
    pub(crate) fn ensure_tools_prepared(&mut self) {
        // A campaign may bring its own engine: list its templates.
        let engine = std::sync::Arc::as_ptr(&self.fitter) as *const () as usize;
        if self.state.tools.templates_of != engine {
            self.state.tools.templates = self.fitter.overlay_templates();
            self.state.tools.templates_of = engine;
            let t = &mut self.state.tools;
            if t.overlay.as_ref().is_some_and(|o| !t.templates.contains(o)) {
                t.overlay = None;
            }
        }
        let t = &self.state.tools;
        let key = PrepKey {
            serial: self.state.selection_serial,
            selected: self.state.selected,
            z: self.state.shown.as_ref().map(|s| s.z().to_bits()),
            overlay: t.overlay.clone(),
            smoothing: self.state.view.smoothing,
            rest: self.state.view.rest_frame,
            phot: t.show_photometry,
            sky: t.show_sky,
        };
        if t.key.as_ref() == Some(&key) {
            return;
        }
        self.state.tools.prepared = self.tools_prepare();
        self.state.tools.key = Some(key);
    }

    fn tools_prepare(&self) -> ToolsPrepared {
        let mut p = ToolsPrepared::default();
        let Some(obj) = self.state.current() else {
            return p;
        };
        let s = &obj.spectrum;
        let t = &self.state.tools;
        let z = self.state.shown.as_ref().map(|x| x.z());
        let zf = match (self.state.view.rest_frame, z) {
            (true, Some(z)) if z > -1.0 => 1.0 + z,
            _ => 1.0,
        };
        let width = self.state.view.smoothing.max(1);
        if let Some(o) = &t.overlay {
            match z {
                None => p.overlay_error = Some("no redshift shown yet".into()),
                Some(z) => match self.fitter.overlay(s, o, z) {
                    Ok(m) => p.overlay = smoothed_points(s, &m, width, zf),
                    Err(e) => p.overlay_error = Some(e),
                },
            }
        }
        if t.show_photometry {
            match (
                &obj.catalog,
                s.meta
                    .flux_unit
                    .as_deref()
                    .and_then(photometry::flambda_unit_scale),
            ) {
                (None, _) => p.phot_note = Some("no catalogue row".into()),
                (Some(_), None) => {
                    p.phot_note = Some(format!(
                        "flux unit {} is not an f_λ unit zvet knows: photometry not drawn",
                        s.meta
                            .flux_unit
                            .as_deref()
                            .map_or("(none)".to_string(), |u| format!("'{u}'"))
                    ))
                }
                (Some(row), Some(scale)) => {
                    p.phot = photometry::points(row, scale)
                        .into_iter()
                        .map(|mut q| {
                            q.wave /= zf;
                            q
                        })
                        .collect();
                    if p.phot.is_empty() {
                        p.phot_note = Some("no magnitudes in the catalogue row".into());
                    }
                }
            }
        }
        if t.show_sky {
            if let Some(sky) = s.sky() {
                p.sky = smoothed_points(s, sky, width, zf);
            }
        }
        p
    }
}

/// (λ/zf, `v` smoothed over `width` pixels by the library's smoothing, as the
/// flux is) at each pixel where the smoothed value is finite.
fn smoothed_points(s: &crate::Spectrum, v: &[f64], width: usize, zf: f64) -> Vec<[f64; 2]> {
    s.wave()
        .iter()
        .zip(s.smooth_values_boxcar(v, width))
        .filter(|(_, y)| y.is_finite())
        .map(|(x, y)| [x / zf, y])
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn smoothing_of_drawn_values_skips_gaps() {
        let s = crate::Spectrum::new(
            vec![1.0, 2.0, 3.0, 4.0],
            vec![0.0; 4],
            Some(vec![1.0; 4]),
            None,
            Default::default(),
        )
        .unwrap();
        let v = [1.0, f64::NAN, 3.0, 5.0];
        let p = smoothed_points(&s, &v, 3, 1.0);
        assert_eq!(p.len(), 3);
        assert!((p[0][1] - 1.0).abs() < 1e-12);
        assert!((p[1][1] - 4.0).abs() < 1e-12);
        assert!((p[2][1] - 4.0).abs() < 1e-12);
    }
}
