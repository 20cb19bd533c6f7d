/*!
`zvet campaign init|fit|status`: create a campaign folder, compute its
automatic fits into `fits.jsonl`, and show where it stands.
*/
use super::progress::{cancel_on_interrupt, Bar};
use super::read_opts::ReadArgs;
use crate::campaign::{Campaign, EngineSettings, InitOptions};
use crate::pipeline;
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
    /// Draw a stratified random audit sample (audit-sample.json).
    Sample(super::audit::SampleArgs),
    /// List the objects to vet next, with the reasons.
    Next(super::audit::NextArgs),
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
    /// Fit only shard K of N (every N-th object) into the campaign's own part
    /// file parts/fits.K-of-N.jsonl; safe for N concurrent array tasks. Given
    /// without a value, or left out inside a job-array task, K and N come from
    /// the scheduler (SLURM_ARRAY_TASK_ID, _MIN, _COUNT).
    #[arg(long, value_name = "K/N", num_args = 0..=1, default_missing_value = "env",
          value_parser = parse_shard_arg, conflicts_with_all = ["collect", "import"])]
    pub shard: Option<ShardArg>,
    /// Join the shards' part files into fits.jsonl (and remove them).
    #[arg(long, conflicts_with_all = ["import", "refit"])]
    pub collect: bool,
    /// Take the fits of these `zvet fit` outputs (.jsonl, .csv, .fits) into the cache.
    #[arg(long, num_args = 1.., value_name = "FILE", conflicts_with = "refit")]
    pub import: Vec<PathBuf>,
    /// Worker threads (default: all cores).
    #[arg(long)]
    pub threads: Option<usize>,
}

/// `--shard` as given.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ShardArg {
    /// From the scheduler's environment.
    Env,
    /// K of N.
    Given(usize, usize),
}

fn parse_shard_arg(s: &str) -> Result<ShardArg, String> {
    if s == "env" {
        return Ok(ShardArg::Env);
    }
    crate::pipeline::parse_shard(s).map(|(k, n)| ShardArg::Given(k, n))
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
        Action::Fit(a) => fit_action(a),
        Action::Status(a) => status(a),
        Action::Sample(a) => super::audit::sample(a),
        Action::Next(a) => super::audit::next_action(a),
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
    if c.catalog_path().is_some() {
        let m = catalogue_match(&c, &cat);
        println!("catalogue: {}", m.counts);
        for w in &m.warnings {
            eprintln!("zvet: warning: {w}");
        }
    }
    if a.fit {
        return fit(&c, None, false, None);
    }
    Ok(ExitCode::SUCCESS)
}

fn fit_action(a: FitArgs) -> anyhow::Result<ExitCode> {
    let c = Campaign::open(&a.dir)?;
    if a.collect {
        let s = c.collect_parts()?;
        for p in &s.problems {
            eprintln!("zvet: warning: {p}");
        }
        println!(
            "collected {} part file(s): {} fits into {}, {} objects could not be fitted",
            s.parts,
            s.fitted,
            c.dir().join(crate::campaign::FITS_FILE).display(),
            s.failed
        );
        return Ok(if s.problems.is_empty() {
            ExitCode::SUCCESS
        } else {
            ExitCode::from(1)
        });
    }
    if !a.import.is_empty() {
        let s = c.import_tables(&a.import)?;
        println!(
            "imported {} fits into {}; {} records without a fit, {} of objects not in the campaign",
            s.imported,
            c.dir().join(crate::campaign::FITS_FILE).display(),
            s.failed,
            s.unknown
        );
        return Ok(ExitCode::SUCCESS);
    }
    let shard = match a.shard {
        Some(ShardArg::Given(k, n)) => Some((k, n)),
        Some(ShardArg::Env) => Some(
            crate::pipeline::shard_from_env()
                .map_err(anyhow::Error::msg)?
                .context(
                "--shard without K/N needs a job-array task (SLURM_ARRAY_TASK_ID and SLURM_ARRAY_TASK_COUNT)",
            )?,
        ),
        // inside an array task the shard is the task's, so that N tasks never
        // rewrite the one cache at once
        None => crate::pipeline::shard_from_env().map_err(anyhow::Error::msg)?,
    };
    fit(&c, shard, a.refit, a.threads)
}

fn fit(
    c: &Campaign,
    shard: Option<(usize, usize)>,
    refit: bool,
    threads: Option<usize>,
) -> anyhow::Result<ExitCode> {
    // the bar's total: the inputs' objects (from their headers) less those cached
    let (files, _) = c.input_files();
    let cached = if refit { 0 } else { c.fit_ids()?.len() as u64 };
    let mut total = pipeline::estimate_objects(&files).saturating_sub(cached);
    if let Some((_, n)) = shard {
        total = total.div_ceil(n as u64);
    }
    let bar = Bar::new("campaign fit", "objects fitted", Some(total));
    let cancel = cancel_on_interrupt();
    let run = c.fit_run(
        shard,
        refit,
        threads,
        &|done| {
            bar.set(done as u64);
        },
        Some(cancel),
    );
    bar.finish();
    let (summary, problems, failures) = run?;
    for f in &failures {
        eprintln!("zvet: could not fit {f}");
    }
    let mut failed_inputs = 0;
    for p in &problems {
        if p.starts_with("note: ") {
            eprintln!("zvet: {p}");
        } else {
            failed_inputs += 1;
            eprintln!("zvet: error: {p}");
        }
    }
    let into = match shard {
        Some((k, n)) => c.part_path(k, n),
        None => c.dir().join(crate::campaign::FITS_FILE),
    };
    if summary.cancelled {
        eprintln!(
            "zvet: stopped by the interrupt; the objects finished are kept in {} — run `zvet campaign fit {}{}` to carry on",
            into.display(),
            c.dir().display(),
            shard.map_or(String::new(), |(k, n)| format!(" --shard {k}/{n}"))
        );
    }
    println!(
        "{} objects fitted, {} failed, {} already cached{}{}; fits in {}",
        summary.fitted,
        summary.failed,
        summary.skipped,
        if summary.repeated > 0 {
            format!(", {} repeated ids passed over", summary.repeated)
        } else {
            String::new()
        },
        match shard {
            Some((k, n)) => format!(
                " (shard {k} of {n}; {} left to other shards)",
                summary.other_shards
            ),
            None => String::new(),
        },
        into.display()
    );
    if shard.is_some() {
        println!(
            "when every shard is done: zvet campaign fit {} --collect",
            c.dir().display()
        );
    }
    Ok(if summary.cancelled {
        ExitCode::from(130)
    } else if summary.failed == 0 && failed_inputs == 0 {
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
    let mut match_problems = Vec::new();
    if let Some(p) = c.catalog_path() {
        println!("  catalogue {}", p.display());
        match c.load_catalog() {
            Ok((cat, cat_problems)) => {
                let m = catalogue_match(&c, &cat);
                println!("  matches   {}", m.counts);
                match_problems.extend(cat_problems);
                match_problems.extend(m.warnings);
            }
            Err(e) => match_problems.push(format!("catalogue: {e}")),
        }
    }
    println!("  templates {}", m.templates);
    println!("  engine    {}", m.engine.summary());
    let (fits, fit_problems) = c.count_fits()?;
    println!("  fits      {fits} cached");
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
    for p in match_problems.iter().chain(&fit_problems).chain(&problems) {
        println!("  problem   {p}");
    }
    Ok(ExitCode::SUCCESS)
}

/// How the catalogue's ids meet the spectra's: one line of counts, and the
/// warnings (ids that match nothing, ids that differ only in letter case,
/// spectra that could not be read).
struct CatalogueMatch {
    counts: String,
    warnings: Vec<String>,
}

/// Read the campaign's spectra (one at a time, only their ids kept) and
/// count how their ids meet the catalogue's: spectra with a catalogue row,
/// catalogue rows that match no spectrum.
fn catalogue_match(c: &Campaign, cat: &BTreeMap<String, crate::catalog::CatalogRow>) -> CatalogueMatch {
    let (files, mut warnings) = c.input_files();
    warnings.retain(|p| !p.starts_with("note: "));
    let mut ids = Vec::new();
    let mut seen = std::collections::HashSet::new();
    for item in crate::pipeline::stream(files, c.read_options()) {
        match item {
            Ok(s) => {
                if seen.insert(s.meta.id.clone()) {
                    ids.push(s.meta.id);
                }
            }
            Err(e) => warnings.push(format!("{}: {}", e.source, e.message)),
        }
    }
    let with_row = ids.iter().filter(|id| cat.contains_key(id.trim())).count();
    let spectrum_ids: std::collections::HashSet<&str> = ids.iter().map(|i| i.trim()).collect();
    let unmatched_rows = cat.keys().filter(|k| !spectrum_ids.contains(k.trim())).count();
    let counts = format!(
        "{with_row} of {} spectra have a catalogue row; {unmatched_rows} of {} catalogue rows match no spectrum",
        ids.len(),
        cat.len()
    );
    let cat_ids: Vec<&String> = cat.keys().collect();
    if with_row == 0 && !ids.is_empty() {
        warnings.push(
            "no spectrum matches a catalogue row: the catalogue adds nothing to this campaign (check its id column, --column id=NAME)"
                .to_string(),
        );
    }
    warnings.extend(crate::catalog::match_summary(&ids, &cat_ids));
    CatalogueMatch { counts, warnings }
}
