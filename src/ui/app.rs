/*!
The app shell: owns the [`AppState`] and the runtime handles (review log,
engine, background fits and loads), lays the panels out, and applies the
frame's actions once every panel is drawn. `eframe::App::ui` only delegates to
[`ZvetApp::show`], which tests drive headless through egui_kittest.
*/
use crate::campaign::SurveyObject;
use crate::review::{Event, ReviewLog, Verdict};
use crate::store::ObjectStore;
use std::path::PathBuf;
use std::sync::Arc;

use super::jobs::{Fitter, JobKind, Jobs};
use super::keys;
use super::load::Loads;
use super::panels;
use super::state::{AppState, Shown};
use super::view::{self, Prepared};

/// Where the review log of an inspector lives.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum LogPlace {
    /// Exactly this file, whoever the inspector is (tests).
    File(PathBuf),
    /// `<folder>/<inspector>.jsonl` (the demo, loose files).
    Folder(PathBuf),
    /// The campaign in this folder: its `reviews/<inspector>.jsonl`, opened
    /// by the campaign (which registers the inspector in its manifest).
    Campaign(PathBuf),
    /// Not known yet: the files named on the command line are still being
    /// read, and no log is opened (or created) until they are in.
    Pending,
}

impl LogPlace {
    /// The log file for `inspector` (None while the place is pending). An
    /// inspector name becomes a file name: outside a single named file it
    /// must pass the library's check ([`crate::campaign::check_inspector`]).
    pub fn path_for(&self, inspector: &str) -> Result<Option<PathBuf>, String> {
        let checked = || crate::campaign::check_inspector(inspector).map_err(|e| e.to_string());
        match self {
            LogPlace::File(p) => Ok(Some(p.clone())),
            LogPlace::Folder(d) => checked().map(|()| Some(d.join(format!("{inspector}.jsonl")))),
            LogPlace::Campaign(dir) => {
                checked()?;
                let c = crate::campaign::Campaign::open(dir).map_err(|e| e.to_string())?;
                Ok(Some(c.review_log_path(inspector)))
            }
            LogPlace::Pending => Ok(None),
        }
    }

    /// The folder of the review logs (None while pending).
    pub fn folder(&self) -> Option<PathBuf> {
        match self {
            LogPlace::File(p) => Some(p.parent().map(PathBuf::from).unwrap_or_default()),
            LogPlace::Folder(d) => Some(d.clone()),
            LogPlace::Campaign(dir) => Some(dir.join(crate::campaign::REVIEWS_DIR)),
            LogPlace::Pending => None,
        }
    }

    /// Open (creating if needed) `inspector`'s log through the library: a
    /// campaign's through [`crate::campaign::Campaign::open_review_log`],
    /// any other through [`ReviewLog::open`]. Returns the log, the lines it
    /// had to skip, and its path; None while the place is pending.
    pub fn open(&self, inspector: &str) -> Result<Option<OpenedLog>, String> {
        let Some(path) = self.path_for(inspector)? else {
            return Ok(None);
        };
        let (log, problems) = match self {
            LogPlace::Campaign(dir) => crate::campaign::Campaign::open(dir)
                .and_then(|mut c| c.open_review_log(inspector))
                .map_err(|e| e.to_string())?,
            _ => {
                if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
                    std::fs::create_dir_all(dir).map_err(|e| format!("{}: {e}", dir.display()))?;
                }
                ReviewLog::open(&path, inspector).map_err(|e| e.to_string())?
            }
        };
        Ok(Some(OpenedLog { log, problems, path }))
    }
}

/// A review log the window opened.
pub struct OpenedLog {
    /// The log.
    pub log: ReviewLog,
    /// Lines it had to skip.
    pub problems: Vec<crate::review::LogProblem>,
    /// Its file.
    pub path: PathBuf,
}

/// What the window opens on.
pub struct Session {
    /// Name of what is open.
    pub title: String,
    /// The objects (fits may already be attached).
    pub objects: Vec<SurveyObject>,
    /// The engine.
    pub fitter: Arc<dyn Fitter>,
    /// Where the review logs go.
    pub log_place: LogPlace,
    /// Inspector name, if known (else the window asks).
    pub inspector: Option<String>,
    /// File where the inspector name is remembered (None: not remembered).
    pub name_file: Option<PathBuf>,
}

/// The key under which the prepared plot data is cached.
#[derive(Debug, Clone, PartialEq)]
struct PrepKey {
    selected: Option<usize>,
    serial: u64,
    shown: Option<Shown>,
    view: super::state::ViewSettings,
    fitted: bool,
}

/// The review window.
pub struct ZvetApp {
    /// Everything that is not a runtime handle.
    pub state: AppState,
    pub(crate) log: Option<ReviewLog>,
    pub(crate) log_place: LogPlace,
    pub(crate) fitter: Arc<dyn Fitter>,
    pub(crate) jobs: Jobs,
    pub(crate) loads: Loads,
    pub(crate) inspector: Option<String>,
    pub(crate) name_file: Option<PathBuf>,
    /// Actions to apply once the next spectra or campaign load is in
    /// (e.g. a catalogue given on the command line with the spectra).
    pub(crate) after_load: Vec<super::action::Action>,
    /// Where automatic fits made here are written back (a campaign's cache).
    pub(crate) write_back: super::jobs::WriteBack,
    prepared: Option<(PrepKey, Prepared)>,
    /// The resume file of the open log, and what it last held.
    pub(crate) resume: Option<(PathBuf, Option<super::resume::Resume>)>,
    /// Object id to open on (from the resume file).
    pub(crate) resume_target: Option<String>,
    /// Timings for the scale figures (`ZVET_WINDOW_TIMES`, see [`super::timing`]).
    pub timing: Option<super::timing::Timing>,
}

impl ZvetApp {
    /// Open the window's state on `session`; fits of objects without one start
    /// in the background, the first object of the queue is selected.
    pub fn new(session: Session) -> ZvetApp {
        let Session {
            title,
            objects,
            fitter,
            log_place,
            inspector,
            name_file,
        } = session;
        let opened = ObjectStore::in_memory(objects);
        let jobs = Jobs::start(fitter.clone(), opened.store.reader(), Vec::new());
        let state = AppState::new(title, opened.store, opened.fits);
        let mut app = ZvetApp {
            state,
            log: None,
            log_place,
            fitter,
            jobs,
            loads: Loads::new(),
            inspector: None,
            name_file,
            after_load: Vec::new(),
            write_back: Default::default(),
            prepared: None,
            resume: None,
            resume_target: None,
            timing: None,
        };
        app.restart_fits();
        match inspector {
            Some(name) => app.set_inspector(&name, false),
            None => app.state.name_prompt = Some(String::new()),
        }
        if app.state.selected.is_none() {
            app.rebuild_queue();
            app.select_start();
        }
        app
    }

    /// Select where the inspector left off (the resume file's object), else
    /// the top of the list.
    pub(crate) fn select_start(&mut self) {
        let target = self.resume_target.take().and_then(|id| {
            self.state
                .objects
                .iter()
                .position(|o| o.id() == id)
                .filter(|i| self.state.order.contains(i))
        });
        if let Some(i) = target.or_else(|| self.state.order.first().copied()) {
            self.select(i);
        }
    }

    /// What the resume file should hold now.
    fn resume_now(&self) -> super::resume::Resume {
        let v = &self.state.view;
        super::resume::Resume {
            v: super::resume::RESUME_VERSION,
            object: self.state.current().map(|o| o.id().to_string()),
            sort: self.state.sort,
            filter: self.state.filter.clone(),
            smoothing: v.smoothing,
            auto_smoothing: self.state.tools.auto_smoothing,
            rest_frame: v.rest_frame,
            show_model: v.show_model,
            show_sky: v.show_sky,
        }
    }

    /// Write the resume file when what it holds changed.
    pub(crate) fn save_resume(&mut self) {
        if self.log.is_none() || self.state.objects.is_empty() {
            return;
        }
        let now = self.resume_now();
        let Some((path, saved)) = self.resume.as_mut() else {
            return;
        };
        if saved.as_ref() == Some(&now) {
            return;
        }
        let path = path.clone();
        *saved = Some(now.clone());
        if let Err(e) = super::resume::write(&path, &now) {
            self.state.say(
                format!("could not remember the position in {}: {e}", path.display()),
                true,
            );
        }
    }

    /// Read the resume file beside the log at `log_path` into the state.
    pub(crate) fn load_resume(&mut self, log_path: &std::path::Path) {
        let path = super::resume::path_for(log_path);
        let read = super::resume::read(&path);
        let saved = match read {
            Ok(Some(r)) => {
                self.state.sort = r.sort;
                self.state.filter = r.filter.clone();
                self.state.view = r.view();
                self.state.tools.auto_smoothing = r.auto_smoothing;
                self.resume_target = r.object.clone();
                Some(r)
            }
            Ok(None) => None,
            Err(e) => {
                self.state.say(e, true);
                None
            }
        };
        self.resume = Some((path, saved));
    }

    /// Apply `action` after the next spectra or campaign load has arrived.
    pub fn after_load(&mut self, action: super::action::Action) {
        self.after_load.push(action);
    }

    /// The open review log, once the inspector is known.
    pub fn log(&self) -> Option<&ReviewLog> {
        self.log.as_ref()
    }

    /// The current verdict on object `index`.
    pub fn verdict_of(&self, index: usize) -> Option<&Verdict> {
        let id = self.state.objects.get(index)?.id();
        self.log.as_ref()?.verdict(id)
    }

    /// The verdict on the selected object.
    pub fn current_verdict(&self) -> Option<&Verdict> {
        self.verdict_of(self.state.selected?)
    }

    /// The selected object's review history.
    pub fn current_history(&self) -> &[Event] {
        match (self.state.current(), self.log.as_ref()) {
            (Some(o), Some(log)) => log.history(o.id()),
            _ => &[],
        }
    }

    /// (automatic fits done, asked for) of the background jobs.
    pub fn fit_progress(&self) -> (usize, usize) {
        self.jobs.progress()
    }

    /// True while objects are being read ahead of the inspector.
    pub fn prefetching(&self) -> bool {
        self.state.objects.prefetching()
    }

    /// True when no background fit, χ²(z) curve or refit waits or runs
    /// (results may still wait to be taken by the next frame).
    pub fn background_idle(&self) -> bool {
        self.jobs.idle()
    }

    /// Draw one frame and apply what the inspector asked for.
    pub fn show(&mut self, ui: &mut egui::Ui) {
        let frame_start = std::time::Instant::now();
        let ctx = ui.ctx().clone();
        self.jobs.set_repaint(&ctx);
        self.loads.set_repaint(&ctx);
        self.take_results();
        let mut actions = Vec::new();
        keys::read(&ctx, &self.state, &mut actions);
        super::tools::read_keys(&ctx, &self.state, &mut actions);
        super::load::dropped_files(&ctx, &mut actions);
        self.ensure_prepared();
        self.ensure_tools_prepared();
        let prepared = self.prepared.as_ref().map(|(_, p)| p);
        let log = self.log.as_ref();
        let verdict = self
            .state
            .current()
            .and_then(|o| log.and_then(|l| l.verdict(o.id())));
        let reviewed = log.map(|l| l.reviewed_count()).unwrap_or(0);
        let top = panels::topbar::TopInfo {
            reviewed,
            fits: self.jobs.fit_progress(),
            loading: self.loads.busy(),
            inspector: self.inspector.as_deref(),
        };
        panels::topbar::ui(ui, &mut self.state, &top, &mut actions);
        panels::messages::ui(ui, &self.state);
        panels::queue::ui(ui, &self.state, &mut actions);
        egui::Panel::right("zvet-right")
            .resizable(true)
            .default_size(330.0)
            .show(ui, |ui| {
                egui::ScrollArea::vertical().show(ui, |ui| {
                    panels::adjudicate::ui(ui, &self.state, self.inspector.as_deref(), &mut actions);
                    let history = match (self.state.current(), log) {
                        (Some(o), Some(l)) => l.history(o.id()),
                        _ => &[],
                    };
                    let undo = self
                        .state
                        .current()
                        .zip(log)
                        .map(|(o, l)| (l.can_undo(o.id()), l.can_redo(o.id())));
                    panels::verdict::ui(
                        ui,
                        &mut self.state,
                        verdict,
                        history,
                        undo.unwrap_or((false, false)),
                        &mut actions,
                    );
                    ui.separator();
                    panels::facts::ui(ui, &self.state);
                });
            });
        egui::CentralPanel::default().show(ui, |ui| {
            let h = ui.available_height();
            panels::spectrum::ui(ui, &mut self.state, prepared, h * 0.44, &mut actions);
            panels::closeups::ui(ui, &self.state, prepared, h * 0.17);
            panels::chi2::ui(ui, &self.state, h * 0.2, &mut actions);
        });
        panels::help::ui(&ctx, &mut self.state);
        super::jump::ui(&ctx, &mut self.state, &mut actions);
        let has_log = self.log.is_some();
        panels::inspector::ui(&ctx, &mut self.state, has_log, &mut actions);
        let drew = prepared.is_some() && self.state.current().is_some();
        let frame_work = frame_start.elapsed();
        for a in actions {
            self.apply(a);
        }
        if let Some(t) = &mut self.timing {
            t.frame_end(frame_work, drew, self.state.objects.len());
        }
        self.save_resume();
        if self.state.quit_asked {
            ctx.send_viewport_cmd(egui::ViewportCommand::Close);
        }
    }

    /// Collect finished fits and loads.
    fn take_results(&mut self) {
        let mut any_fit = false;
        for done in self.jobs.poll() {
            let i = done.index;
            match (done.kind, done.result) {
                (JobKind::Fit, Ok(fit)) => {
                    self.write_back(&done.source, &fit);
                    // The fit goes to the store's file and (whole) to its
                    // cache when the object is held there; the window keeps
                    // its summary.
                    self.state.take_full_fit(i, &fit);
                    match self.state.objects.put_fit(i, &fit) {
                        Ok(summary) => {
                            if let Some(slot) = self.state.fits.get_mut(i) {
                                *slot = Some(summary);
                                any_fit = true;
                            }
                        }
                        Err(e) => self.state.say(format!("{}: {e}", fit.object_id), true),
                    }
                    let v = self.verdict_of(i).cloned();
                    self.state.refresh_item(i, v.as_ref());
                    if self.state.selected == Some(i) && self.state.shown.is_none() {
                        let v = self.current_verdict().cloned();
                        self.state.show_recorded(v.as_ref());
                    }
                }
                (JobKind::Fit, Err(e)) => {
                    if let Some(slot) = self.state.fit_errors.get_mut(i) {
                        *slot = Some(e);
                    }
                }
                (JobKind::Curves, Ok(fit)) => self.absorb_curves(i, &fit),
                (JobKind::Curves, Err(_)) => {}
                (JobKind::RefitNear { .. }, result) => {
                    if self.state.selected != Some(i) {
                        continue;
                    }
                    self.state.refit_running = false;
                    match result {
                        Ok(fit) => {
                            self.state.shown = fit.best().map(|c| Shown {
                                candidate: c.clone(),
                                rank: Some(0),
                                source: crate::review::ZSource::Refit,
                            });
                            self.state.refit = Some(fit);
                        }
                        Err(e) => self.state.say(format!("refit failed: {e}"), true),
                    }
                }
            }
        }
        // The list is never re-sorted by itself (a row would move under the
        // pointer): new fits only mark the order as out of date, and the
        // inspector re-sorts when ready.
        if any_fit {
            self.state.order_stale = true;
        }
        // objects dropped from the store's cache lost their curves
        for i in self.state.objects.take_evicted() {
            self.jobs.forget_curves(i);
        }
        for loaded in self.loads.poll() {
            self.apply_loaded(loaded);
        }
    }

    /// Restart the background fits for every object that has none.
    pub(crate) fn restart_fits(&mut self) {
        let todo: Vec<usize> = (0..self.state.objects.len())
            .filter(|&i| self.state.fits[i].is_none())
            .collect();
        self.jobs = Jobs::start(self.fitter.clone(), self.state.objects.reader(), todo);
    }

    /// Re-filter and re-sort the list from the log's verdicts.
    pub(crate) fn rebuild_queue(&mut self) {
        let log = self.log.as_ref();
        self.state
            .rebuild_queue(|id| log.and_then(|l| l.verdict(id)).cloned());
    }

    /// Select object `index`, asking for its fit first if it is not done.
    pub(crate) fn select(&mut self, index: usize) {
        let t0 = std::time::Instant::now();
        let v = self.verdict_of(index).cloned();
        self.state.select(index, v.as_ref());
        self.auto_smooth();
        if self.state.fits.get(index).is_some_and(|f| f.is_none()) {
            self.jobs.prioritize(index);
        }
        self.want_curves_from(index);
        if let Some(t) = &mut self.timing {
            t.selected(t0.elapsed());
        }
    }

    /// Compute the plot data if the object, solution or view changed.
    pub fn ensure_prepared(&mut self) {
        let key = PrepKey {
            selected: self.state.selected,
            serial: self.state.selection_serial,
            shown: self.state.shown.clone(),
            view: self.state.view.clone(),
            fitted: self.state.current_fit().is_some(),
        };
        if self.prepared.as_ref().is_some_and(|(k, _)| *k == key) {
            return;
        }
        self.prepared = self.prepare_current().map(|p| (key, p));
    }

    /// The plot data of the selected object (the benchmark's unit of work).
    pub fn prepare_current(&self) -> Option<Prepared> {
        let obj = self.state.current()?;
        let shown = self.state.shown.as_ref();
        let model = match shown {
            Some(s) if self.state.view.show_model => self.fitter.model(&obj.spectrum, &s.candidate),
            _ => Vec::new(),
        };
        Some(view::prepare(
            &obj.spectrum,
            shown.map(|s| s.z()),
            shown.map(|s| s.class()),
            &model,
            &self.state.view,
        ))
    }
}

impl eframe::App for ZvetApp {
    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        self.show(ui);
    }
}
