/*!
`zvet fit`: fit every object of the inputs and write one row per object.

Inputs are files or folders (expanded and read by the `io` module, one or
many objects per file, streamed with bounded memory). Objects are fitted in
parallel with rayon in chunks, rows written in input order as they come, so
an interrupted run can be continued with `--resume`. `--shard K/N` keeps
every N-th object (the K-th of each N, K from 1), so that the tasks of a
cluster job array split one list of inputs; `--merge` joins their outputs.
An object that cannot be read or fitted gets a row with `error` filled.
The time spent reading the inputs is printed at the end (total and slowest
file; every file with `--read-times`).
*/
use super::read_opts::ReadArgs;
use crate::fit::table::{read_rows, write_rows, FitRow, RowWriter};
use crate::fit::{Engine, FitConfig, Method};
use crate::io::{FileReadTime, ReadOptions};
use crate::spectrum::Spectrum;
use crate::templates::TemplateSet;
use crate::ObjectClass;
use anyhow::Context;
use rayon::prelude::*;
use std::collections::HashSet;
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
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
    let (k, n) = s
        .split_once('/')
        .ok_or_else(|| format!("shard '{s}' must look like K/N, e.g. 3/10"))?;
    let k: usize = k
        .trim()
        .parse()
        .map_err(|_| format!("shard '{s}': K is not a number"))?;
    let n: usize = n
        .trim()
        .parse()
        .map_err(|_| format!("shard '{s}': N is not a number"))?;
    if n == 0 || k == 0 || k > n {
        return Err(format!("shard '{s}': need 1 ≤ K ≤ N"));
    }
    Ok((k, n))
}

/// One object as read: a spectrum, or why it could not be read.
pub type Item = Result<Spectrum, ReadFailure>;

/// An object (or file) that could not be read.
#[derive(Debug, Clone)]
pub struct ReadFailure {
    /// Id to report (the file stem when nothing better is known).
    pub object_id: String,
    /// The file.
    pub source: String,
    /// The reader's message.
    pub message: String,
}

/// Counts of a run.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Summary {
    /// Rows written with a fit.
    pub fitted: usize,
    /// Rows written with an error.
    pub failed: usize,
    /// Objects skipped because their id was already in the output.
    pub skipped: usize,
    /// Objects left to other shards.
    pub other_shards: usize,
}

/// `file[hdu=2,row=5]`-style source of a spectrum.
pub fn source_of(s: &Spectrum) -> String {
    let mut out = s
        .meta
        .source
        .as_ref()
        .map(|p| p.display().to_string())
        .unwrap_or_default();
    let mut parts = Vec::new();
    if let Some(h) = s.meta.hdu {
        parts.push(format!("hdu={h}"));
    }
    if let Some(r) = s.meta.row {
        parts.push(format!("row={r}"));
    }
    if !parts.is_empty() {
        out.push_str(&format!("[{}]", parts.join(",")));
    }
    out
}

/// How many objects are fitted in parallel before their rows are written.
const CHUNK: usize = 256;

/// Fit `items` with `engine` and write a row for each to `writer`.
/// Objects whose id is in `skip` are passed over; with `shard = (k, n)` only
/// objects whose running index i (from 0) has i mod n == k − 1 are kept.
pub fn fit_items(
    engine: &Engine,
    items: impl Iterator<Item = Item>,
    writer: &mut RowWriter,
    skip: &HashSet<String>,
    shard: Option<(usize, usize)>,
    progress: Option<&indicatif::ProgressBar>,
) -> anyhow::Result<Summary> {
    let method = match engine.config().method {
        Method::Chi2 => "chi2",
        Method::XCorr => "xcorr",
    };
    let mut summary = Summary::default();
    let mut chunk: Vec<Item> = Vec::with_capacity(CHUNK);
    let mut flush = |chunk: &mut Vec<Item>, summary: &mut Summary| -> anyhow::Result<()> {
        let rows: Vec<FitRow> = chunk
            .par_drain(..)
            .map(|item| match item {
                Err(f) => FitRow::failed(&f.object_id, &f.source, &f.message),
                Ok(s) => match engine.fit(&s) {
                    Ok(r) => FitRow::from_result(&r, &source_of(&s), method),
                    Err(e) => FitRow::failed(&s.meta.id, &source_of(&s), &e.to_string()),
                },
            })
            .collect();
        for r in &rows {
            if r.error.is_empty() {
                summary.fitted += 1;
            } else {
                summary.failed += 1;
            }
            writer.write(r)?;
        }
        if let Some(p) = progress {
            p.inc(rows.len() as u64);
        }
        Ok(())
    };
    for (i, item) in items.enumerate() {
        if let Some((k, n)) = shard {
            if i % n != k - 1 {
                summary.other_shards += 1;
                continue;
            }
        }
        let id = match &item {
            Ok(s) => &s.meta.id,
            Err(f) => &f.object_id,
        };
        if skip.contains(id) {
            summary.skipped += 1;
            continue;
        }
        chunk.push(item);
        if chunk.len() >= CHUNK {
            flush(&mut chunk, &mut summary)?;
        }
    }
    flush(&mut chunk, &mut summary)?;
    Ok(summary)
}

/// Join shard outputs: rows in the order given, the first row of each id kept.
pub fn merge(inputs: &[PathBuf], out: &Path) -> anyhow::Result<usize> {
    let mut seen = HashSet::new();
    let mut rows = Vec::new();
    for p in inputs {
        for r in read_rows(p).with_context(|| format!("reading shard output {}", p.display()))? {
            if seen.insert(r.object_id.clone()) {
                rows.push(r);
            }
        }
    }
    write_rows(out, &rows)?;
    Ok(rows.len())
}

/// Run `zvet fit`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    if !args.merge.is_empty() {
        let n = merge(&args.merge, &args.out)?;
        eprintln!("zvet fit: merged {n} objects into {}", args.out.display());
        return Ok(ExitCode::SUCCESS);
    }
    let set = load_templates(args.templates.as_deref())?;
    let config = FitConfig {
        classes: args.classes.clone(),
        method: args.method,
        mask_sky: args.mask_sky,
        throughput_terms: args.tilt_terms,
        ..FitConfig::default()
    };
    let engine = Engine::new(&set, config).context("preparing the templates")?;
    let skip: HashSet<String> = if args.resume && args.out.exists() {
        read_rows(&args.out)
            .with_context(|| format!("reading {} to resume", args.out.display()))?
            .into_iter()
            .map(|r| r.object_id)
            .collect()
    } else {
        HashSet::new()
    };
    let mut writer = RowWriter::create(&args.out, args.resume)?;
    let (times_tx, times_rx) = std::sync::mpsc::channel();
    let items = open_inputs_timed(&args.inputs, args.read.to_options(), Some(times_tx));
    let progress = std::io::stderr().is_terminal().then(|| {
        let p = indicatif::ProgressBar::new_spinner();
        if let Ok(style) =
            indicatif::ProgressStyle::with_template("{spinner} {pos} objects fitted ({per_sec}, {elapsed})")
        {
            p.set_style(style);
        }
        p
    });
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(args.threads.unwrap_or(0))
        .build()
        .context("starting the worker threads")?;
    let summary =
        pool.install(|| fit_items(&engine, items, &mut writer, &skip, args.shard, progress.as_ref()))?;
    writer.finish()?;
    if let Some(p) = progress {
        p.finish_and_clear();
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
    // to tell that some objects failed.
    Ok(if summary.failed > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    })
}

/// Total reading time, the slowest file, and with `each` one line per file (stderr).
fn report_read_times(times: &[FileReadTime], each: bool) {
    let ms = |t: &FileReadTime| t.elapsed.as_secs_f64() * 1e3;
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

/// The template set: a user folder or the built-in set.
fn load_templates(path: Option<&Path>) -> anyhow::Result<TemplateSet> {
    match path {
        Some(p) => {
            crate::templates::read_set(p).with_context(|| format!("reading the template set {}", p.display()))
        }
        None => Ok(crate::templates::builtin().clone()),
    }
}

/// Every object of the inputs, streamed file by file; a file that cannot be
/// opened becomes one failed item (id = file stem) and the run goes on.
pub fn open_inputs(paths: &[PathBuf], opts: ReadOptions) -> impl Iterator<Item = Item> + Send {
    open_inputs_timed(paths, opts, None)
}

/// [`open_inputs`], sending each file's reading time to `times` when its
/// objects have all been taken.
pub fn open_inputs_timed(
    paths: &[PathBuf],
    opts: ReadOptions,
    times: Option<std::sync::mpsc::Sender<FileReadTime>>,
) -> impl Iterator<Item = Item> + Send {
    crate::io::expand_inputs(paths).into_iter().flat_map(move |path| {
        let sink = times.clone();
        let done = move |t: FileReadTime| {
            if let Some(s) = sink {
                let _ = s.send(t);
            }
        };
        let source = path.display().to_string();
        let stem = path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| source.clone());
        let stem = stem.split('.').next().unwrap_or(&stem).to_string();
        let items: Box<dyn Iterator<Item = Item> + Send> =
            match crate::io::stream_file_timed(&path, &opts, done) {
                Ok(it) => {
                    let (source, stem) = (source.clone(), stem.clone());
                    Box::new(it.map(move |r| {
                        r.map_err(|e| ReadFailure {
                            object_id: stem.clone(),
                            source: source.clone(),
                            message: e.to_string(),
                        })
                    }))
                }
                Err(e) => Box::new(std::iter::once(Err(ReadFailure {
                    object_id: stem,
                    source,
                    message: e.to_string(),
                }))),
            };
        items
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_parse_and_reject_nonsense() {
        assert_eq!(parse_shard("3/10"), Ok((3, 10)));
        assert!(parse_shard("0/10").is_err());
        assert!(parse_shard("11/10").is_err());
        assert!(parse_shard("x").is_err());
    }
}
