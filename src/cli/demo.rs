/*!
`zvet demo`: the invented demo survey. `--write DIR` writes it as files
(multi-object FITS tables of `--chunk` spectra each, the catalogue and the
truth as CSV, all streamed: any `--objects`, 10⁶ and more, in bounded
memory) so the other subcommands can be tried on it; without `--write` it
prints a summary of the first 500.
*/
use anyhow::Context;
use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::ExitCode;

use crate::demo;

/// Arguments of `zvet demo`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Write the survey into this folder (created if needed).
    #[arg(long, value_name = "DIR")]
    pub write: Option<PathBuf>,
    /// Seed of the generator (the window opens on the default one).
    #[arg(long, default_value_t = demo::DEFAULT_SEED)]
    pub seed: u64,
    /// Number of objects (any number; past 500 the survey's cast repeats,
    /// shuffled anew for every 500).
    #[arg(long, default_value_t = 500)]
    pub objects: usize,
    /// Objects per spectrum file (a multi-object FITS table).
    #[arg(long, default_value_t = demo::DEFAULT_CHUNK as u64, value_parser = clap::value_parser!(u64).range(1..))]
    pub chunk: u64,
}

/// Run `zvet demo`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    match &args.write {
        Some(dir) => {
            let opts = demo::ScaleOptions {
                seed: args.seed,
                objects: args.objects,
                chunk: usize::try_from(args.chunk).unwrap_or(usize::MAX),
            };
            let bar = super::progress::Bar::new("demo", "objects written", Some(args.objects as u64));
            let cancel = super::progress::cancel_on_interrupt();
            let w = demo::write_scaled(dir, &opts, &mut |n| bar.set(n as u64), Some(cancel))
                .with_context(|| format!("writing the demo survey into {}", dir.display()));
            bar.finish();
            if super::progress::interrupted() {
                if let Err(e) = &w {
                    eprintln!("zvet demo: {e:#}");
                    return Ok(ExitCode::from(130));
                }
            }
            let w = w?;
            println!(
                "wrote {} spectra in {} file(s) to {}, the catalogue to {}, the truth to {}",
                w.objects,
                w.files,
                w.spectra.display(),
                w.catalog.display(),
                w.truth.display()
            );
        }
        None => {
            let survey = demo::generate_n(args.seed, args.objects.min(500));
            let mut kinds: BTreeMap<&str, usize> = BTreeMap::new();
            for t in &survey.truth {
                *kinds.entry(t.kind.as_str()).or_default() += 1;
            }
            println!("{}: {} objects", survey.name, survey.objects.len());
            for (k, n) in kinds {
                println!("  {k:<24} {n}");
            }
            let wrong = survey.truth.iter().filter(|t| t.phot_wrong).count();
            println!("photometric classifier wrong on {wrong}");
            println!("(use --write DIR to write the files)");
        }
    }
    Ok(ExitCode::SUCCESS)
}
