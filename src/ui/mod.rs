/*!
The review window (eframe/egui). Layout: the queue on the left, the verdict
and catalogue facts on the right, the spectrum, line close-ups and χ²(z) in
the middle, progress along the top, messages along the bottom.

State lives apart from drawing ([`state`]); drawing records [`action::Action`]s
that [`app::ZvetApp`] applies after the frame; fits and file reads run on
background threads ([`jobs`], [`load`]). Without arguments the window opens on
the invented demo survey of [`crate::demo`].
*/
use anyhow::Context as _;
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::Arc;

pub mod action;
pub mod app;
mod apply;
pub mod jobs;
pub mod jump;
pub mod keys;
pub mod load;
pub mod panels;
mod readers;
pub mod resume;
pub mod settings;
pub mod state;
pub mod timing;
pub mod tools;
pub mod view;

pub use app::{LogPlace, Session, ZvetApp};
pub use apply::{parse_z, DEFAULT_CONFIDENCE, NUDGE_STEP};

use crate::fit::{Engine, FitConfig};

/// What the GUI is opened on (filled from the command line by the binary).
#[derive(Debug, Clone, Default)]
pub struct LaunchOptions {
    /// A campaign folder to open.
    pub campaign: Option<PathBuf>,
    /// Spectrum files or folders to open instead of the demo survey.
    pub spectra: Vec<PathBuf>,
    /// A photometric catalogue to join with the spectra.
    pub catalog: Option<PathBuf>,
    /// Inspector name, if given.
    pub inspector: Option<String>,
}

/// The engine on the built-in templates with default settings.
pub fn default_engine() -> anyhow::Result<Arc<Engine>> {
    let engine = Engine::new(crate::templates::builtin(), FitConfig::default())
        .context("building the redshift engine on the built-in templates")?;
    Ok(Arc::new(engine))
}

/// The session for the demo survey: log in the user's data directory, the
/// inspector's name from `opts` or as remembered.
pub fn demo_session(opts: &LaunchOptions) -> anyhow::Result<Session> {
    let survey = crate::demo::generate(crate::demo::DEFAULT_SEED);
    let folder = settings::demo_log_folder(crate::demo::DEFAULT_SEED)
        .unwrap_or_else(|| std::env::temp_dir().join("zvet-demo-reviews"));
    let (inspector, name_file) = remembered_inspector(opts);
    Ok(Session {
        title: survey.name,
        objects: survey.objects,
        fitter: default_engine()?,
        log_place: LogPlace::Folder(folder),
        inspector,
        name_file,
    })
}

/// The inspector's name from `opts` or as remembered, and the file that remembers it.
fn remembered_inspector(opts: &LaunchOptions) -> (Option<String>, Option<PathBuf>) {
    let name_file = settings::name_file();
    let inspector = opts
        .inspector
        .clone()
        .or_else(|| name_file.as_deref().and_then(settings::read_name));
    (inspector, name_file)
}

/// The session for files or a campaign: empty until the files are read in
/// the background, no review log before they are in, and the built-in
/// engine built only if it is ever used (a campaign brings its own engine;
/// neither the demo survey nor the templates hold up the window's opening).
fn files_session(opts: &LaunchOptions) -> Session {
    let (inspector, name_file) = remembered_inspector(opts);
    Session {
        title: "reading…".into(),
        objects: Vec::new(),
        fitter: Arc::new(DefaultWhenUsed::default()),
        log_place: LogPlace::Pending,
        inspector,
        name_file,
    }
}

/// The engine on the built-in templates with default settings, built at its
/// first use (see [`files_session`]).
#[derive(Default)]
struct DefaultWhenUsed(std::sync::OnceLock<Result<Arc<Engine>, String>>);

impl DefaultWhenUsed {
    fn engine(&self) -> Result<&Engine, String> {
        self.0
            .get_or_init(|| default_engine().map_err(|e| format!("{e:#}")))
            .as_deref()
            .map_err(Clone::clone)
    }
}

impl jobs::Fitter for DefaultWhenUsed {
    fn fit(&self, s: &crate::Spectrum) -> Result<crate::fit::FitResult, String> {
        jobs::Fitter::fit(self.engine()?, s)
    }
    fn refit_near(
        &self,
        s: &crate::Spectrum,
        z: f64,
        class: Option<crate::ObjectClass>,
        half_width_kms: f64,
    ) -> Result<crate::fit::FitResult, String> {
        jobs::Fitter::refit_near(self.engine()?, s, z, class, half_width_kms)
    }
    fn model(&self, s: &crate::Spectrum, c: &crate::fit::Candidate) -> Vec<f64> {
        match self.engine() {
            Ok(e) => jobs::Fitter::model(e, s, c),
            Err(_) => vec![f64::NAN; s.len()],
        }
    }
    fn overlay_templates(&self) -> Vec<crate::fit::OverlayTemplate> {
        self.engine()
            .map(jobs::Fitter::overlay_templates)
            .unwrap_or_default()
    }
    fn overlay(
        &self,
        s: &crate::Spectrum,
        t: &crate::fit::OverlayTemplate,
        z: f64,
    ) -> Result<Vec<f64>, String> {
        jobs::Fitter::overlay(self.engine()?, s, t, z)
    }
}

/// Open the GUI.
pub fn run(opts: LaunchOptions) -> anyhow::Result<ExitCode> {
    let started = std::time::Instant::now();
    let wants_files = opts.campaign.is_some() || !opts.spectra.is_empty();
    let session = if wants_files {
        files_session(&opts)
    } else {
        demo_session(&opts)?
    };
    // The files are read in the background from here on, while the window
    // and its drawing context are made.
    let mut app = ZvetApp::new(session);
    app.timing = timing::Timing::from_env(started);
    if let Some(c) = opts.campaign {
        app.apply(action::Action::Open(action::OpenKind::Campaign, vec![c]));
    } else if !opts.spectra.is_empty() {
        app.apply(action::Action::Open(action::OpenKind::Spectra, opts.spectra));
    }
    if let Some(cat) = opts.catalog {
        let open = action::Action::Open(action::OpenKind::Catalog, vec![cat]);
        if wants_files {
            app.after_load(open);
        } else {
            app.apply(open);
        }
    }
    let native = eframe::NativeOptions {
        viewport: egui::ViewportBuilder::default()
            .with_inner_size([1560.0, 960.0])
            .with_title("zvet — redshift vetting")
            .with_drag_and_drop(true),
        ..Default::default()
    };
    eframe::run_native("zvet", native, Box::new(move |_cc| Ok(Box::new(app))))
        .map_err(|e| anyhow::anyhow!("the window could not open: {e}"))?;
    Ok(ExitCode::SUCCESS)
}
