/*!
`zvet fit`: fit every object of the inputs and write one record per object.

A thin caller of [`crate::pipeline`]: inputs are found and streamed, fitted
in parallel in chunks, and records written in input order as they come, so
an interrupted run can be continued with `--resume`. `--shard K/N` keeps
every N-th object (the K-th of each N, K from 1), so that the tasks of a
cluster job array split one list of inputs; `--merge` joins their outputs,
and `zvet campaign fit DIR --import` takes them into a campaign. An object
that cannot be read or fitted gets a record with `error` filled.
*/
use super::read_opts::ReadArgs;
use crate::fit::{FitConfig, Method};
use crate::pipeline::{self, RowWriter, RunOptions};
use crate::ObjectClass;
use anyhow::Context;
use std::collections::HashSet;
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `zvet fit`.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// Spectrum files or folders.
    #[arg(required_unless_present = "merge")]
    pub inputs: Vec<PathBuf>,
    /// Output table: .csv, .jsonl or .fits.
    #[arg(long, short)]
    pub out: PathBuf,
    /// How to read the spectrum files.
    #[command(flatten)]
    pub read: ReadArgs,
    /// Worker threads (default: all cores).
    #[arg(long)]
    pub threads: Option<usize>,
    /// Fit only shard K of N (every N-th object, K = 1..N).
    #[arg(long, value_parser = parse_shard)]
    pub shard: Option<(usize, usize)>,
    /// Classes to fit, comma-separated.
    #[arg(long, value_delimiter = ',', default_value = "galaxy,quasar,star")]
    pub classes: Vec<ObjectClass>,
    /// chi2 (templates + polynomial) or xcorr (classic cross-correlation).
    #[arg(long, default_value = "chi2")]
    pub method: Method,
    /// Skip objects whose id is already in the output and append to it.
    #[arg(long)]
    pub resume: bool,
    /// Mask strong night-sky lines and telluric bands before fitting.
    #[arg(long)]
    pub mask_sky: bool,
    /// Give every template a throughput-tilt term (the template × a linear
    /// function of wavelength): for spectra with a poor relative flux calibration.
    #[arg(long)]
    pub tilt_terms: bool,
    /// The spectra were corrected for telluric absorption: weigh the
    /// telluric bands like every other pixel (without it their pixels carry
    /// an extra error of the band's typical uncorrected depth).
    #[arg(long)]
    pub telluric_corrected: bool,
    /// A template set folder to use instead of the built-in one.
    #[arg(long)]
    pub templates: Option<PathBuf>,
    /// Print how long reading each input file took (stderr; the total and
    /// the slowest file are always printed).
    #[arg(long)]
    pub read_times: bool,
    /// Join these shard outputs into --out instead of fitting.
    #[arg(long, num_args = 1.., conflicts_with_all = ["inputs", "resume", "shard"])]
    pub merge: Vec<PathBuf>,
}

/// Parse `K/N` with 1 ≤ K ≤ N.
pub fn parse_shard(s: &str) -> Result<(usize, usize), String> {
    pipeline::parse_shard(s)
}

/// Run `zvet fit`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    if !args.merge.is_empty() {
        let n = pipeline::merge_tables(&args.merge, &args.out)?;
        eprintln!("zvet fit: merged {n} objects into {}", args.out.display());
        return Ok(ExitCode::SUCCESS);
    }
    pipeline::check_output(&args.inputs, &args.out).map_err(anyhow::Error::msg)?;
    let config = FitConfig {
        classes: args.classes.clone(),
        method: args.method,
        mask_sky: args.mask_sky,
        throughput_terms: args.tilt_terms,
        telluric_floor: !args.telluric_corrected,
        ..FitConfig::default()
    };
    let engine = pipeline::build_engine(args.templates.as_deref(), config)?;
    // `--resume` carries on the rows of a killed fresh run (its partial
    // file) or of the output itself.
    let resume_from = if args.resume {
        pipeline::resume_source(&args.out)
    } else {
        None
    };
    let skip: HashSet<String> = match &resume_from {
        Some(src) => pipeline::read_records(src)
            .with_context(|| format!("reading {} to resume", src.display()))?
            .into_iter()
            .map(|r| r.object_id)
            .collect(),
        None => HashSet::new(),
    };
    let opts = args.read.to_options();
    // the output is never read back as a spectrum, even inside an input folder
    let found = pipeline::find(&args.inputs, std::slice::from_ref(&args.out), &opts);
    for n in &found.notes {
        eprintln!("zvet fit: note: {n}");
    }
    for p in &found.problems {
        eprintln!("zvet fit: error: {p}");
    }
    let mut writer = RowWriter::create(&args.out, args.resume)?;
    let mut total = pipeline::estimate_objects(&found.files).saturating_sub(skip.len() as u64);
    if let Some((_, n)) = args.shard {
        total = total.div_ceil(n as u64);
    }
    let bar = super::progress::Bar::new("fit", "objects fitted", Some(total));
    let cancel = super::progress::cancel_on_interrupt();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(args.threads.unwrap_or(0))
        .build()
        .context("starting the worker threads")?;
    let run = RunOptions {
        skip,
        shard: args.shard,
        unique_ids: false,
    };
    let tick = |done: usize| bar.set(done as u64);
    let (times_tx, times_rx) = std::sync::mpsc::channel();
    let items = pipeline::stream_timed(found.files, opts, Some(times_tx));
    let summary = pool
        .install(|| pipeline::fit_stream(&engine, items, &run, |r| writer.write(&r), &tick, Some(cancel)))?;
    writer.finish()?;
    bar.finish();
    if summary.cancelled {
        eprintln!(
            "zvet fit: stopped by the interrupt; the {} objects finished are in {} — add --resume to carry on",
            summary.fitted + summary.failed,
            args.out.display()
        );
    }
    report_read_times(&times_rx.try_iter().collect::<Vec<_>>(), args.read_times);
    eprintln!(
        "zvet fit: {} fitted, {} failed, {} already in the output{} → {}",
        summary.fitted,
        summary.failed,
        summary.skipped,
        if args.shard.is_some() {
            format!(", {} left to other shards", summary.other_shards)
        } else {
            String::new()
        },
        args.out.display()
    );
    // Like `zvet inspect`: the rows are all written, but a script must be able
    // to tell that some objects (or inputs) failed.
    Ok(if summary.cancelled {
        ExitCode::from(130)
    } else if summary.failed > 0 || !found.problems.is_empty() {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    })
}

/// Total reading time, the slowest file, and with `each` one line per file (stderr).
fn report_read_times(times: &[crate::io::FileReadTime], each: bool) {
    let ms = |t: &crate::io::FileReadTime| t.elapsed.as_secs_f64() * 1e3;
    if each {
        for t in times {
            eprintln!(
                "zvet fit: read {}: {} object(s) in {:.1} ms",
                t.path.display(),
                t.objects,
                ms(t)
            );
        }
    }
    let total: f64 = times.iter().map(ms).sum();
    if let Some(slow) = times.iter().max_by(|a, b| a.elapsed.cmp(&b.elapsed)) {
        eprintln!(
            "zvet fit: reading {} file(s) took {:.1} ms (slowest {}: {:.1} ms){}",
            times.len(),
            total,
            slow.path.display(),
            ms(slow),
            if each {
                ""
            } else {
                "; --read-times lists every file"
            }
        );
    }
}
