/*!
Opening things without freezing the window: file dialogs and file reading run
on their own threads and hand back a [`Loaded`] over a channel. Paths arrive
from a dialog (rfd; on desktops without a portal it may give nothing, so a
path can also be typed), from drag and drop, or from the command line.
*/
use crate::catalog::CatalogRow;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::mpsc::{channel, Receiver, Sender};
use std::sync::{Arc, OnceLock};

use super::action::{Action, OpenKind};
use super::jobs::Fitter;
use crate::pipeline::kind::{self, PathKind};

/// What a background load produced.
pub enum Loaded {
    /// A dialog returned these paths.
    Picked(OpenKind, Vec<PathBuf>),
    /// Spectra read from files.
    Spectra {
        /// Name for the title bar.
        title: String,
        /// The objects, listed (read when shown).
        objects: Box<crate::store::Opened>,
        /// Files or rows that could not be read.
        problems: Vec<String>,
    },
    /// A catalogue read from a CSV file.
    Catalog {
        /// The file.
        path: PathBuf,
        /// Its rows.
        rows: Vec<CatalogRow>,
    },
    /// A template set, ready as an engine.
    Templates {
        /// Name of the set.
        name: String,
        /// The engine built on it.
        fitter: Arc<dyn Fitter>,
    },
    /// A campaign folder.
    Campaign {
        /// Name for the title bar.
        title: String,
        /// The objects, listed, with the summaries of their cached fits.
        objects: Box<crate::store::Opened>,
        /// The campaign folder (its review logs are opened through it).
        dir: PathBuf,
        /// Inspectors the campaign knows (registered, or with a log).
        inspectors: Vec<String>,
        /// Things that could not be read.
        problems: Vec<String>,
        /// The engine on the campaign's templates and settings (None: keep the current one).
        fitter: Option<Arc<dyn Fitter>>,
        /// The campaign whose cache takes the fits made in the window.
        write_back: Option<Box<crate::campaign::Campaign>>,
        /// The campaign's audit sample for the audit orders of the queue.
        audit: Option<super::state::AuditQueue>,
    },
    /// Something went wrong; the text says what.
    Failed(String),
}

/// Background loads and their results.
pub struct Loads {
    tx: Sender<Loaded>,
    rx: Receiver<Loaded>,
    running: Arc<AtomicUsize>,
    repaint: Arc<OnceLock<egui::Context>>,
}

impl Default for Loads {
    fn default() -> Self {
        Self::new()
    }
}

impl Loads {
    /// Nothing running yet.
    pub fn new() -> Loads {
        let (tx, rx) = channel();
        Loads {
            tx,
            rx,
            running: Arc::new(AtomicUsize::new(0)),
            repaint: Arc::new(OnceLock::new()),
        }
    }

    /// Let finished loads wake the window.
    pub fn set_repaint(&self, ctx: &egui::Context) {
        let _ = self.repaint.set(ctx.clone());
    }

    /// True while a dialog or a read is running.
    pub fn busy(&self) -> bool {
        self.running.load(Ordering::Relaxed) > 0
    }

    /// Results that arrived since the last call.
    pub fn poll(&self) -> Vec<Loaded> {
        self.rx.try_iter().collect()
    }

    fn spawn(&self, work: impl FnOnce() -> Loaded + Send + 'static) {
        let (tx, running, repaint) = (self.tx.clone(), self.running.clone(), self.repaint.clone());
        running.fetch_add(1, Ordering::Relaxed);
        let spawned = std::thread::Builder::new()
            .name("zvet-load".into())
            .spawn(move || {
                let out = std::panic::catch_unwind(std::panic::AssertUnwindSafe(work))
                    .unwrap_or_else(|_| Loaded::Failed("reading stopped with an internal error".into()));
                running.fetch_sub(1, Ordering::Relaxed);
                let _ = tx.send(out);
                if let Some(ctx) = repaint.get() {
                    ctx.request_repaint();
                }
            });
        if spawned.is_err() {
            self.running.fetch_sub(1, Ordering::Relaxed);
            let _ = self
                .tx
                .send(Loaded::Failed("could not start a thread to read files".into()));
        }
    }

    /// Show a file dialog for `kind` on its own thread.
    pub fn browse(&self, kind: OpenKind) {
        self.spawn(move || {
            let dialog = rfd::FileDialog::new();
            let picked: Vec<PathBuf> = match kind {
                OpenKind::Spectra => dialog
                    .add_filter("spectra", &kind::spectrum_dialog_extensions())
                    .pick_files()
                    .unwrap_or_default(),
                OpenKind::Catalog => dialog
                    .add_filter("catalogue", kind::CATALOGUE_EXTENSIONS)
                    .pick_file()
                    .into_iter()
                    .collect(),
                OpenKind::Templates | OpenKind::Campaign => dialog.pick_folder().into_iter().collect(),
            };
            if picked.is_empty() {
                Loaded::Failed(
                    "no path chosen (if no dialog appeared, type the path in the bar above)".into(),
                )
            } else {
                Loaded::Picked(kind, picked)
            }
        });
    }

    /// Read `paths` as `kind` on a worker thread.
    pub fn open(&self, kind: OpenKind, paths: Vec<PathBuf>) {
        if paths.is_empty() {
            let _ = self.tx.send(Loaded::Failed("no path given".into()));
            return;
        }
        self.spawn(move || match kind {
            OpenKind::Spectra => super::readers::read_spectra(&paths),
            OpenKind::Catalog => super::readers::read_catalog(&paths[0]),
            OpenKind::Templates => super::readers::read_templates(&paths[0]),
            OpenKind::Campaign => super::readers::read_campaign(&paths[0]),
        });
    }
}

/// What a dropped path is, as the library judges it from the content
/// ([`crate::pipeline::kind_of`]): a campaign folder, a template set (a folder
/// of set files whatever its name), a catalogue (a table with ra/dec and no
/// wavelength), or spectra.
pub fn guess_kind(path: &Path) -> OpenKind {
    match kind::kind_of(path) {
        PathKind::Campaign => OpenKind::Campaign,
        PathKind::TemplateSet => OpenKind::Templates,
        PathKind::Catalogue => OpenKind::Catalog,
        PathKind::Spectra => OpenKind::Spectra,
    }
}

/// Turn files dropped on the window this frame into open actions.
pub fn dropped_files(ctx: &egui::Context, out: &mut Vec<Action>) {
    let dropped: Vec<PathBuf> = ctx.input(|i| {
        i.raw
            .dropped_files
            .iter()
            .map(|f| f.path().to_path_buf())
            .collect()
    });
    let mut spectra = Vec::new();
    for p in dropped {
        match guess_kind(&p) {
            OpenKind::Spectra => spectra.push(p),
            kind => out.push(Action::Open(kind, vec![p])),
        }
    }
    if !spectra.is_empty() {
        out.push(Action::Open(OpenKind::Spectra, spectra));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dropped_paths_are_sorted_by_kind() {
        let dir = tempfile::tempdir().unwrap();
        let camp = dir.path().join("camp");
        std::fs::create_dir(&camp).unwrap();
        std::fs::write(camp.join("campaign.toml"), "").unwrap();
        let cat = dir.path().join("phot.csv");
        std::fs::write(&cat, "id,ra,dec,mag_r\n").unwrap();
        let spec = dir.path().join("spec.csv");
        std::fs::write(&spec, "wave,flux\n").unwrap();
        assert_eq!(guess_kind(&camp), OpenKind::Campaign);
        assert_eq!(guess_kind(&cat), OpenKind::Catalog);
        assert_eq!(guess_kind(&spec), OpenKind::Spectra);
        assert_eq!(guess_kind(dir.path()), OpenKind::Spectra);
        // a copy of the shipped template set under another name
        let tpl = dir.path().join("my-templates");
        std::fs::create_dir(&tpl).unwrap();
        let shipped = Path::new(env!("CARGO_MANIFEST_DIR")).join("templates-spectra/builtin.fits");
        std::fs::copy(shipped, tpl.join("set.fits")).unwrap();
        assert_eq!(guess_kind(&tpl), OpenKind::Templates);
    }
}
