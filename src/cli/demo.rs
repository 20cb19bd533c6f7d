/*!
`zvet demo`: the invented demo survey. `--write DIR` writes it as files (one
FITS table per spectrum, the catalogue and the truth as CSV) so the other
subcommands can be tried on it; without `--write` it prints a summary.
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
    /// Number of objects (at most 500).
    #[arg(long, default_value_t = 500)]
    pub objects: usize,
}

/// Run `zvet demo`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    let survey = demo::generate_n(args.seed, args.objects.min(500));
    match &args.write {
        Some(dir) => {
            let w = demo::write_survey(&survey, dir)
                .with_context(|| format!("writing the demo survey into {}", dir.display()))?;
            println!(
                "wrote {} spectra to {}, the catalogue to {}, the truth to {}",
                w.objects,
                w.spectra.display(),
                w.catalog.display(),
                w.truth.display()
            );
        }
        None => {
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
