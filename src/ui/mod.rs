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
    let name_file = settings::name_file();
    let inspector = opts
        .inspector
        .clone()
        .or_else(|| name_file.as_deref().and_then(settings::read_name));
    Ok(Session {
        title: survey.name,
        objects: survey.objects,
        fitter: default_engine()?,
        log_place: LogPlace::Folder(folder),
        inspector,
        name_file,
    })
}

/// Open the GUI.
pub fn run(opts: LaunchOptions) -> anyhow::Result<ExitCode> {
    let started = std::time::Instant::now();
    let mut session = demo_session(&opts)?;
    let wants_files = opts.campaign.is_some() || !opts.spectra.is_empty();
    if wants_files {
        // Start empty; the files are read in the background once the window
        // is up, and no review log is opened before they are in.
        session.title = "reading…".into();
        session.objects = Vec::new();
        session.log_place = LogPlace::Pending;
    }
    let native = eframe::NativeOptions {
        viewport: egui::ViewportBuilder::default()
            .with_inner_size([1560.0, 960.0])
            .with_title("zvet — redshift vetting")
            .with_drag_and_drop(true),
        ..Default::default()
    };
    eframe::run_native(
        "zvet",
        native,
        Box::new(move |_cc| {
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
            Ok(Box::new(app))
        }),
    )
    .map_err(|e| anyhow::anyhow!("the window could not open: {e}"))?;
    Ok(ExitCode::SUCCESS)
}
