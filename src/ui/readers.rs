/*!
Reading what the inspector opens (on a load thread) and putting it into the
window (on the UI thread): spectra files, a catalogue joined by id, a template
set that replaces the engine, a campaign folder with its review logs.
*/
use super::jobs::Fitter;
use crate::fit::{Engine, FitConfig};
use crate::io::ReadOptions;
use crate::pipeline;
use crate::store::{ObjectStore, Opened};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use super::app::{LogPlace, ZvetApp};
use super::load::Loaded;
use super::settings;
use super::state::AppState;

/// Read spectrum files and folders (through the pipeline's input search and
/// reader, as `zvet fit` does).
pub fn read_spectra(paths: &[PathBuf]) -> Loaded {
    let opts = ReadOptions::default();
    let found = pipeline::find(paths, &[], &opts);
    let files = found.files;
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
    let n_files = files.len();
    let mut problems = found.problems;
    problems.extend(found.notes);
    // listed now (ids only), read when shown
    let opened = ObjectStore::open_files(files, &opts);
    problems.extend(opened.problems.iter().cloned());
    if opened.store.is_empty() {
        return Loaded::Failed(format!(
            "no spectrum could be read: {}",
            problems.first().cloned().unwrap_or_default()
        ));
    }
    let title = match paths {
        [one] => one.display().to_string(),
        _ => format!("{n_files} files"),
    };
    Loaded::Spectra {
        title,
        objects: Box::new(opened),
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
    let set = match pipeline::load_templates(Some(path)) {
        Ok(s) => s,
        Err(e) => return Loaded::Failed(e.to_string()),
    };
    match Engine::new(&set, FitConfig::default()) {
        Ok(engine) => Loaded::Templates {
            name: set.name.clone(),
            fitter: Arc::new(engine),
        },
        Err(e) => Loaded::Failed(format!("template set {}: {e}", path.display())),
    }
}

/// Open a campaign folder for the window ([`ObjectStore::open_campaign`]:
/// its inputs listed by id with the manifest's reader options, its
/// catalogue joined by id, its fit cache indexed — spectra and whole fits
/// are read when an object is shown) and build the engine the manifest
/// names, so that objects without a cached fit are fitted with the
/// campaign's own templates and settings. Cached fits are used as they are;
/// their χ²(z) curves are computed when an object is shown (see [`super::jobs`]).
pub fn read_campaign(path: &Path) -> Loaded {
    use crate::store::open_phase;
    let t = std::time::Instant::now();
    let campaign = match crate::campaign::Campaign::open(path) {
        Ok(c) => c,
        Err(e) => return Loaded::Failed(format!("{}: {e}", path.display())),
    };
    // the engine (its templates built on first use) is made on another
    // thread while the inputs are listed and the cache indexed
    let (opened, engine) = std::thread::scope(|scope| {
        let engine = scope.spawn(|| {
            let t = std::time::Instant::now();
            let e = campaign.engine();
            open_phase("engine built", t);
            e
        });
        let opened = ObjectStore::open_campaign(&campaign);
        open_phase("objects listed, catalogue joined, fit cache indexed", t);
        // a panic there is the reading thread's (see `load`)
        let engine = engine.join().unwrap_or_else(|p| std::panic::resume_unwind(p));
        (opened, engine)
    });
    let (objects, mut problems) = match opened {
        Ok(mut opened) => {
            let problems = std::mem::take(&mut opened.problems);
            (Box::new(opened), problems)
        }
        Err(e) => return Loaded::Failed(format!("{}: {e}", path.display())),
    };
    let t = std::time::Instant::now();
    let fitter: Option<Arc<dyn Fitter>> = match engine {
        Ok(engine) => Some(Arc::new(engine)),
        Err(e) => {
            problems.push(format!(
                "campaign engine: {e}; fitting with the built-in templates"
            ));
            None
        }
    };
    let inspectors = known_inspectors(&campaign);
    let audit = match audit_queue(&campaign) {
        Ok(a) => a,
        Err(e) => {
            problems.push(format!("audit sample: {e}"));
            None
        }
    };
    open_phase("inspectors and audit sample read", t);
    Loaded::Campaign {
        audit,
        title: campaign.manifest().name.clone(),
        objects,
        dir: campaign.dir().to_path_buf(),
        inspectors,
        problems,
        // automatic fits made here go back to the campaign's cache only when
        // they come from the campaign's own engine
        write_back: fitter.is_some().then(|| Box::new(campaign.clone())),
        fitter,
    }
}

/// The campaign's audit sample with each member's review position and each
/// object's stratum interval width (from the estimates as they stand).
fn audit_queue(
    campaign: &crate::campaign::Campaign,
) -> Result<Option<super::state::AuditQueue>, crate::campaign::CampaignError> {
    let Some(sample) = crate::audit::campaign::load_sample(campaign)? else {
        return Ok(None);
    };
    let view = crate::audit::campaign::view(campaign)?;
    let numbers = crate::audit::analyse(&sample, &view.observed);
    let widths: std::collections::BTreeMap<String, f64> = numbers
        .strata
        .iter()
        .map(|s| (s.key.clone(), s.accuracy_width))
        .collect();
    let vars = sample.vars();
    let units: std::collections::HashMap<&str, &crate::audit::sample::Unit> =
        view.units.iter().map(|u| (u.id.as_str(), u)).collect();
    Ok(Some(super::state::AuditQueue::new(
        &sample,
        &widths,
        |id| units.get(id).map(|u| crate::audit::sample::stratum_of(&vars, u)),
        view.units.iter().map(|u| u.id.clone()),
    )))
}

/// The campaign's registered inspectors, then those with a log (as the
/// campaign lists them), each once.
pub fn known_inspectors(campaign: &crate::campaign::Campaign) -> Vec<String> {
    let mut names: Vec<String> = campaign.manifest().inspectors.clone();
    for n in campaign.log_inspectors().unwrap_or_default() {
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
                self.write_back.set(None);
                let place = settings::loose_log_folder()
                    .map(LogPlace::Folder)
                    .unwrap_or_else(|| LogPlace::Folder(std::env::temp_dir().join("zvet-reviews")));
                self.replace_objects(title, *objects, place);
            }
            Loaded::Campaign {
                title,
                objects,
                dir,
                inspectors,
                problems,
                fitter,
                write_back,
                audit,
            } => {
                self.report(&problems);
                self.write_back.set(write_back.map(|c| *c));
                if let Some(fitter) = fitter {
                    self.fitter = fitter;
                }
                self.replace_objects(title, *objects, LogPlace::Campaign(dir));
                self.state.known_inspectors = inspectors;
                if let Some(a) = audit {
                    self.state.say(
                        format!(
                            "audit sample: {} objects (orders \"audit sample\" and \"vet next\"); only their verdicts feed the catalogue-wide estimates, the others are training data",
                            a.sampled()
                        ),
                        false,
                    );
                    self.state.audit = Some(a);
                    self.rebuild_queue();
                }
            }
            Loaded::Catalog { path, rows } => {
                let join = crate::store::join_catalog(&self.state.objects, &rows);
                for &(si, ri) in &join.matched {
                    if let Some(r) = rows.get(ri) {
                        self.state.objects.set_catalog(si, Some(r.clone()));
                    }
                }
                if let Some((i, o)) = &mut self.state.shown_object {
                    o.catalog = self.state.objects.get(*i).and_then(|s| s.catalog.clone());
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
                self.rebuild_queue();
            }
            Loaded::Templates { name, fitter } => {
                // fits on another template set are not the campaign's
                self.write_back.set(None);
                self.fitter = fitter;
                for f in &mut self.state.fits {
                    *f = None;
                }
                self.state.objects.clear_fits();
                if let Some((_, o)) = &mut self.state.shown_object {
                    o.fit = None;
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
    pub(crate) fn replace_objects(&mut self, title: String, objects: Opened, place: LogPlace) {
        let view = self.state.view.clone();
        let messages = std::mem::take(&mut self.state.messages);
        self.state = AppState::new(title, objects.store, objects.fits);
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

/// χ²(z) curves on demand and fits written back (see [`super::jobs`]).
impl ZvetApp {
    /// Ask for the χ²(z) curves of object `index` and of the next few in the
    /// list, where their fit came without them, and read the next few ahead.
    pub(crate) fn want_curves_from(&mut self, index: usize) {
        let next: Vec<usize> = match self.state.order.iter().position(|&i| i == index) {
            Some(pos) => self.state.order[pos + 1..]
                .iter()
                .copied()
                .take(super::jobs::CURVE_PREFETCH)
                .collect(),
            None => Vec::new(),
        };
        self.state.objects.prefetch(&next);
        let fitted = |i: usize| self.state.fits.get(i).is_some_and(|f| f.is_some());
        let shown = self
            .state
            .current_fit()
            .is_some_and(|f| f.curves.is_empty())
            .then_some(index);
        let next: Vec<usize> = next
            .into_iter()
            .filter(|&i| fitted(i) && !self.state.objects.has_curves(i))
            .collect();
        self.jobs.want_curves(shown, &next);
    }

    /// Put the curves of a whole fit onto the cached fit of `index` (and
    /// the shown object's); curves of an object no longer held are let go,
    /// to be asked for again when it is shown.
    pub(crate) fn absorb_curves(&mut self, index: usize, fit: &crate::fit::FitResult) {
        self.state.take_curves(index, fit);
        let held = self.state.objects.set_curves(index, fit);
        if !held && self.state.selected != Some(index) {
            self.jobs.forget_curves(index);
        }
    }

    /// An automatic fit made here: keep it for the campaign's cache.
    pub(crate) fn write_back(&mut self, source: &str, fit: &crate::fit::FitResult) {
        self.write_back.add(source, fit);
        let all = !self.jobs.busy();
        self.write_back.flush(all);
        for e in self.write_back.take_errors() {
            self.state.say(e, true);
        }
    }
}
