/*!
`zvet campaign init|fit|status`: create a campaign folder, compute its
automatic fits into `fits.jsonl`, and show where it stands.
*/
use super::read_opts::ReadArgs;
use crate::campaign::{Campaign, EngineSettings, InitOptions};
use anyhow::Context;
use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `zvet campaign`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// What to do with the campaign.
    #[command(subcommand)]
    pub action: Action,
}

/// The campaign actions.
#[derive(Debug, clap::Subcommand)]
pub enum Action {
    /// Create a campaign folder (manifest, reviews/, exports/).
    Init(Box<InitArgs>),
    /// Fit the spectra that have no cached fit (or all with --refit).
    Fit(FitArgs),
    /// Print the campaign's inputs, fits and review progress.
    Status(StatusArgs),
}

/// Arguments of `zvet campaign init`.
#[derive(Debug, clap::Args)]
pub struct InitArgs {
    /// The campaign folder (created if missing).
    pub dir: PathBuf,
    /// Spectrum files or folders.
    #[arg(long, required = true, num_args = 1.., value_name = "PATH")]
    pub spectra: Vec<PathBuf>,
    /// The photometric catalogue (CSV).
    #[arg(long, value_name = "FILE")]
    pub catalog: Option<PathBuf>,
    /// Catalogue column for a field, as field=column (repeatable), e.g. id=OBJID.
    #[arg(long = "column", value_name = "FIELD=COLUMN")]
    pub columns: Vec<String>,
    /// An inspector to register (repeatable).
    #[arg(long = "inspector", value_name = "NAME")]
    pub inspectors: Vec<String>,
    /// The inspector whose verdicts settle conflicts.
    #[arg(long, value_name = "NAME")]
    pub adjudicator: Option<String>,
    /// A template-set folder instead of the built-in set.
    #[arg(long, value_name = "DIR")]
    pub templates: Option<PathBuf>,
    /// Merge tolerance on |Δz|/(1+z).
    #[arg(long, value_name = "X")]
    pub tolerance: Option<f64>,
    /// Campaign name (default: the folder name).
    #[arg(long)]
    pub name: Option<String>,
    /// Also compute the automatic fits now.
    #[arg(long)]
    pub fit: bool,
    /// How to read the spectrum files.
    #[command(flatten)]
    pub read: ReadArgs,
}

/// Arguments of `zvet campaign fit`.
#[derive(Debug, clap::Args)]
pub struct FitArgs {
    /// The campaign folder.
    pub dir: PathBuf,
    /// Fit every object again, not only those without a cached fit.
    #[arg(long)]
    pub refit: bool,
}

/// Arguments of `zvet campaign status`.
#[derive(Debug, clap::Args)]
pub struct StatusArgs {
    /// The campaign folder.
    pub dir: PathBuf,
}

/// Run `zvet campaign`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    match args.action {
        Action::Init(a) => init(*a),
        Action::Fit(a) => {
            let c = Campaign::open(&a.dir)?;
            fit(&c, a.refit)
        }
        Action::Status(a) => status(a),
    }
}

fn init(a: InitArgs) -> anyhow::Result<ExitCode> {
    let mut columns = BTreeMap::new();
    for c in &a.columns {
        let (field, column) = c
            .split_once('=')
            .with_context(|| format!("--column {c}: expected FIELD=COLUMN"))?;
        columns.insert(field.trim().to_string(), column.trim().to_string());
    }
    let opts = InitOptions {
        name: a.name,
        spectra: a.spectra,
        read: a.read.to_options(),
        catalog: a.catalog,
        columns,
        templates: a.templates,
        engine: EngineSettings::default(),
        inspectors: a.inspectors,
        adjudicator: a.adjudicator,
        tolerance: a.tolerance,
    };
    let c = Campaign::init(&a.dir, &opts)?;
    // Check the catalogue mapping now rather than at the first export.
    let (cat, problems) = c.load_catalog()?;
    for p in &problems {
        eprintln!("zvet: warning: {p}");
    }
    println!(
        "created campaign '{}' in {} ({} catalogue rows)",
        c.manifest().name,
        c.dir().display(),
        cat.len()
    );
    if a.fit {
        return fit(&c, false);
    }
    Ok(ExitCode::SUCCESS)
}

fn fit(c: &Campaign, refit: bool) -> anyhow::Result<ExitCode> {
    let (mut objects, problems) = c.load_objects()?;
    for p in &problems {
        eprintln!("zvet: warning: {p}");
    }
    let (n, failed) = c.fit_objects(&mut objects, refit)?;
    for f in &failed {
        eprintln!("zvet: could not fit {f}");
    }
    println!(
        "{n} objects fitted, {} failed, {} objects in the campaign; fits in {}",
        failed.len(),
        objects.len(),
        c.dir().join(crate::campaign::FITS_FILE).display()
    );
    Ok(if failed.is_empty() {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}

fn status(a: StatusArgs) -> anyhow::Result<ExitCode> {
    let c = Campaign::open(&a.dir)?;
    let m = c.manifest();
    println!("campaign {} ({})", m.name, c.dir().display());
    for p in c.spectra_paths() {
        println!("  spectra   {}", p.display());
    }
    if let Some(p) = c.catalog_path() {
        println!("  catalogue {}", p.display());
    }
    println!("  templates {}", m.templates);
    println!("  engine    {}", m.engine.summary());
    let (fits, fit_problems) = c.load_fits()?;
    println!("  fits      {} cached", fits.len());
    let (logs, problems) = c.read_logs()?;
    for l in &logs {
        let reviewed = l.verdicts.values().filter(|v| v.is_complete()).count();
        println!("  inspector {:<16} {reviewed} reviewed", l.inspector);
    }
    // Registered inspectors who have not reviewed yet are listed too.
    for name in m
        .inspectors
        .iter()
        .filter(|n| !logs.iter().any(|l| &l.inspector == *n))
    {
        println!("  inspector {name:<16} 0 reviewed");
    }
    for p in fit_problems.iter().chain(&problems) {
        println!("  problem   {p}");
    }
    Ok(ExitCode::SUCCESS)
}
