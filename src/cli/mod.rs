/*!
The command line: clap definitions and the headless subcommands.

Each subcommand lives in its own file with an `Args` struct (what the user
typed) and a `run` function. `main.rs` sends `review` (and no subcommand) to the
GUI; everything else runs here. Errors are `anyhow` chains printed once.
*/
use clap::{Parser, Subcommand};
use std::path::PathBuf;
use std::process::ExitCode;

pub mod audit;
pub mod campaign;
pub mod demo;
pub mod export;
pub mod fit;
pub mod inspect;
pub mod merge;
pub mod progress;
pub mod read_opts;
pub mod report;
pub mod templates;

/// zvet: fit spectra against templates, vet redshifts by eye, export a training catalogue.
#[derive(Debug, Parser)]
#[command(name = "zvet", version, about, long_about = None)]
pub struct Cli {
    /// What to do; without a subcommand the GUI opens on the built-in demo survey.
    #[command(subcommand)]
    pub command: Option<Command>,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Open the review GUI (the default).
    Review(ReviewArgs),
    /// Print what was read from spectrum files, per object.
    Inspect(inspect::Args),
    /// Fit spectra against the templates and write one row per object.
    Fit(fit::Args),
    /// Build or list template sets.
    Templates(templates::Args),
    /// Write the invented demo survey to files.
    Demo(demo::Args),
    /// Create, fit or summarise a campaign folder.
    Campaign(campaign::Args),
    /// Merge the inspectors' review logs of a campaign.
    Merge(merge::Args),
    /// Export the vetted training catalogue.
    Export(export::Args),
    /// Write the summary report of a campaign.
    Report(report::Args),
}

/// Options of the GUI.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct ReviewArgs {
    /// A campaign folder to open.
    #[arg(long)]
    pub campaign: Option<PathBuf>,
    /// Spectrum files or folders to open (instead of the demo survey).
    pub spectra: Vec<PathBuf>,
    /// A photometric catalogue (CSV) to join with the spectra.
    #[arg(long)]
    pub catalog: Option<PathBuf>,
    /// Inspector name (asked once in the GUI and remembered if not given).
    #[arg(long)]
    pub inspector: Option<String>,
}

/// Run a headless subcommand. `Review` is handled by the binary.
///
/// With `ZVET_PEAK_MEMORY_FILE=PATH` in the environment, the process's peak
/// resident memory (`VmHWM` of `/proc/self/status`, Linux) is written to
/// PATH in kB when the command ends: the memory checks of the scale tests
/// and `scripts/scale-bench.sh` read it.
pub fn run(command: Command) -> anyhow::Result<ExitCode> {
    let out = run_command(command);
    if let Some(path) = std::env::var_os("ZVET_PEAK_MEMORY_FILE") {
        let peak = std::fs::read_to_string("/proc/self/status")
            .ok()
            .and_then(|s| {
                s.lines()
                    .find_map(|l| l.strip_prefix("VmHWM:"))
                    .map(|v| v.trim().trim_end_matches("kB").trim().to_string())
            })
            .unwrap_or_default();
        let _ = std::fs::write(path, format!("{peak}\n"));
    }
    out
}

fn run_command(command: Command) -> anyhow::Result<ExitCode> {
    match command {
        Command::Review(_) => anyhow::bail!("this zvet was built without the GUI (feature `gui`)"),
        Command::Inspect(a) => inspect::run(a),
        Command::Fit(a) => fit::run(a),
        Command::Templates(a) => templates::run(a),
        Command::Demo(a) => demo::run(a),
        Command::Campaign(a) => campaign::run(a),
        Command::Merge(a) => merge::run(a),
        Command::Export(a) => export::run(a),
        Command::Report(a) => report::run(a),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn cli_definition_is_consistent() {
        Cli::command().debug_assert();
    }
}
