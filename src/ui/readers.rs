/*!
Reading what the inspector opens (on a load thread) and putting it into the
window (on the UI thread): spectra files, a catalogue joined by id, a template
set that replaces the engine, a campaign folder with its review logs.
*/
use super::jobs::Fitter;
use crate::campaign::SurveyObject;
use crate::fit::{Engine, FitConfig};
use crate::io::{self, ReadOptions};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use super::app::{LogPlace, ZvetApp};
use super::load::Loaded;
use super::settings;
use super::state::AppState;

/// Read spectrum files and folders.
pub fn read_spectra(paths: &[PathBuf]) -> Loaded {
    let files = io::expand_inputs(paths);
    if files.is_empty() {
        return Loaded::Failed(format!(
            "no readable spectrum file in {}",
            paths
                .iter()
                .map(|p| p.display().to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    let mut objects = Vec::new();
    let mut problems = Vec::new();
    for f in &files {
        match io::read_file(f, &ReadOptions::default()) {
            Ok(spectra) => objects.extend(spectra.into_iter().map(|spectrum| SurveyObject {
                spectrum,
                catalog: None,
                fit: None,
            })),
            Err(e) => problems.push(e.to_string()),
        }
    }
    if objects.is_empty() {
        return Loaded::Failed(format!(
            "no spectrum could be read: {}",
            problems.first().cloned().unwrap_or_default()
        ));
    }
    let title = match paths {
        [one] => one.display().to_string(),
        _ => format!("{} files", files.len()),
    };
    Loaded::Spectra {
        title,
        objects,
        problems,
    }
}

/// Read a photometric catalogue.
pub fn read_catalog(path: &Path) -> Loaded {
    match crate::catalog::read_csv(path, &crate::catalog::ColumnMap::default()) {
        Ok(rows) => Loaded::Catalog {
            path: path.to_path_buf(),
            rows,
        },
        Err(e) => Loaded::Failed(format!("{}: {e}", path.display())),
    }
}

/// Read a template set and build an engine on it.
pub fn read_templates(path: &Path) -> Loaded {
    let set = match crate::templates::read_set(path) {
        Ok(s) => s,
        Err(e) => return Loaded::Failed(format!("{}: {e}", path.display())),
    };
    match Engine::new(&set, FitConfig::default()) {
        Ok(engine) => Loaded::Templates {
            name: set.name.clone(),
            fitter: Arc::new(engine),
        },
        Err(e) => Loaded::Failed(format!("template set {}: {e}", path.display())),
    }
}

/// Read a campaign folder through the library (`Campaign::load_objects`: its
/// spectra with the manifest's reader options, its catalogue joined by id,
/// its cached fits) and build the engine the manifest names, so that objects
/// without a cached fit are fitted with the campaign's own templates and
/// settings.
pub fn read_campaign(path: &Path) -> Loaded {
    let campaign = match crate::campaign::Campaign::open(path) {
        Ok(c) => c,
        Err(e) => return Loaded::Failed(format!("{}: {e}", path.display())),
    };
    let (mut objects, mut problems) = match campaign.load_objects() {
        Ok(loaded) => loaded,
        Err(e) => return Loaded::Failed(format!("{}: {e}", path.display())),
    };
    // The fit cache keeps candidates but not the χ²(z) curves the window
    // draws; such objects are fitted again in the background for display.
    for o in &mut objects {
        if o.fit.as_ref().is_some_and(|f| f.curves.is_empty()) {
            o.fit = None;
        }
    }
    let fitter: Option<Arc<dyn Fitter>> = match campaign.engine() {
        Ok(engine) => Some(Arc::new(engine)),
        Err(e) => {
            problems.push(format!(
                "campaign engine: {e}; fitting with the built-in templates"
            ));
            None
        }
    };
    let log = campaign.review_log_path("x");
    let log_folder = log
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_else(|| path.join("reviews"));
    let inspectors = known_inspectors(&campaign.manifest().inspectors, &log_folder);
    Loaded::Campaign {
        title: campaign.manifest().name.clone(),
        objects,
        log_folder,
        inspectors,
        problems,
        fitter,
    }
}

/// The campaign's registered inspectors, then those with a log in `folder`
/// (file stems of `*.jsonl`), each once.
pub fn known_inspectors(registered: &[String], folder: &Path) -> Vec<String> {
    let mut names: Vec<String> = registered.to_vec();
    let mut logs: Vec<String> = std::fs::read_dir(folder)
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .map(|e| e.path())
                .filter(|p| p.extension().is_some_and(|x| x == "jsonl"))
                .filter_map(|p| p.file_stem().map(|s| s.to_string_lossy().into_owned()))
                .collect()
        })
        .unwrap_or_default();
    logs.sort();
    for n in logs {
        if !names.contains(&n) {
            names.push(n);
        }
    }
    names
}

impl ZvetApp {
    /// Put a finished load into the window.
    pub(crate) fn apply_loaded(&mut self, loaded: Loaded) {
        match loaded {
            Loaded::Picked(kind, paths) => self.loads.open(kind, paths),
            Loaded::Failed(e) => self.state.say(e, true),
            Loaded::Spectra {
                title,
                objects,
                problems,
            } => {
                self.report(&problems);
                let place = settings::loose_log_folder()
                    .map(LogPlace::Folder)
                    .unwrap_or_else(|| LogPlace::Folder(std::env::temp_dir().join("zvet-reviews")));
                self.replace_objects(title, objects, place);
            }
            Loaded::Campaign {
                title,
                objects,
                log_folder,
                inspectors,
                problems,
                fitter,
            } => {
                self.report(&problems);
                if let Some(fitter) = fitter {
                    self.fitter = fitter;
                }
                self.replace_objects(title, objects, LogPlace::Folder(log_folder));
                self.state.known_inspectors = inspectors;
            }
            Loaded::Catalog { path, rows } => {
                let ids: Vec<String> = self.state.objects.iter().map(|o| o.id().to_string()).collect();
                let join = crate::catalog::join(&ids, &rows);
                let mut objects: Vec<SurveyObject> = self.state.objects.as_ref().clone();
                for &(si, ri) in &join.matched {
                    if let (Some(o), Some(r)) = (objects.get_mut(si), rows.get(ri)) {
                        o.catalog = Some(r.clone());
                    }
                }
                self.state.say(
                    format!(
                        "{}: {} matched, {} spectra without a row, {} rows without a spectrum",
                        path.display(),
                        join.matched.len(),
                        join.spectra_only.len(),
                        join.catalog_only.len()
                    ),
                    false,
                );
                self.state.objects = Arc::new(objects);
                self.rebuild_queue();
            }
            Loaded::Templates { name, fitter } => {
                self.fitter = fitter;
                for f in &mut self.state.fits {
                    *f = None;
                }
                for e in &mut self.state.fit_errors {
                    *e = None;
                }
                self.state.shown = None;
                self.state.refit = None;
                self.restart_fits();
                self.rebuild_queue();
                self.state
                    .say(format!("template set '{name}': refitting every object"), false);
            }
        }
    }

    fn report(&mut self, problems: &[String]) {
        for p in problems.iter().take(20) {
            self.state.say(p.clone(), true);
        }
        if problems.len() > 20 {
            self.state
                .say(format!("… and {} more problems", problems.len() - 20), true);
        }
    }

    /// Replace everything on screen by `objects`; the same inspector goes on
    /// in the log at `place`.
    pub(crate) fn replace_objects(&mut self, title: String, objects: Vec<SurveyObject>, place: LogPlace) {
        let view = self.state.view.clone();
        let messages = std::mem::take(&mut self.state.messages);
        self.state = AppState::new(title, Arc::new(objects));
        self.state.view = view;
        self.state.messages = messages;
        self.log_place = place;
        self.restart_fits();
        match self.inspector.clone() {
            Some(name) => self.set_inspector(&name, false),
            None => self.state.name_prompt = Some(String::new()),
        }
        if self.state.selected.is_none() {
            self.rebuild_queue();
            self.select_start();
        }
        for a in std::mem::take(&mut self.after_load) {
            self.apply(a);
        }
    }
}
