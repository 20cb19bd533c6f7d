/*!
`zvet export CAMPAIGN --out FILE.{csv,ecsv,fits}`: merge the logs and write
the training catalogue, optionally only objects at or above a confidence
level and without given flags. A CSV gets its provenance in a `.json`
sidecar; ECSV and FITS carry it in their headers.
*/
use crate::campaign::Campaign;
use crate::export::{export_campaign_steps, ExportOptions};
use crate::review::{Confidence, Flag};
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `zvet export`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign folder.
    pub campaign: PathBuf,
    /// Output file; `.csv` (plain CSV + `FILE.csv.json` provenance), `.ecsv`
    /// (astropy's Enhanced CSV, units and provenance in its header) or `.fits`.
    #[arg(long, value_name = "FILE")]
    pub out: PathBuf,
    /// Keep only objects at or above this certainty (guess, probable, secure;
    /// the old words doubtful, tentative, solid, certain are read as guess,
    /// probable, secure, secure).
    #[arg(long, value_name = "LEVEL", value_parser = parse_confidence)]
    pub min_confidence: Option<Confidence>,
    /// Leave out objects with any of these flags (comma-separated).
    #[arg(long, value_name = "FLAGS", value_delimiter = ',', value_parser = parse_flag)]
    pub exclude_flags: Vec<Flag>,
}

fn parse_word<T: serde::de::DeserializeOwned>(s: &str, all: &[&str]) -> Result<T, String> {
    serde_json::from_str(&format!("\"{}\"", s.trim().to_ascii_lowercase()))
        .map_err(|_| format!("unknown value '{s}' (expected one of: {})", all.join(", ")))
}

fn parse_confidence(s: &str) -> Result<Confidence, String> {
    let all: Vec<&str> = Confidence::ALL.iter().map(|c| c.as_str()).collect();
    parse_word(s, &all)
}

fn parse_flag(s: &str) -> Result<Flag, String> {
    let all: Vec<&str> = Flag::ALL.iter().map(|f| f.as_str()).collect();
    parse_word(s, &all)
}

/// Run `zvet export`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    let c = Campaign::open(&args.campaign)?;
    let opts = ExportOptions {
        min_confidence: args.min_confidence,
        exclude_flags: args.exclude_flags,
    };
    let bar = super::progress::Bar::steps("export");
    super::progress::cancel_on_interrupt();
    let s = export_campaign_steps(&c, &args.out, &opts, &mut |name| bar.step(name).is_ok());
    bar.finish();
    let s = s?;
    for p in &s.problems {
        eprintln!("zvet: warning: {p}");
    }
    println!(
        "{} objects written to {} ({} left out by the filters, {} conflicts awaiting adjudication, \
         {} incomplete verdicts left out)",
        s.rows,
        args.out.display(),
        s.filtered,
        s.conflicts,
        s.incomplete
    );
    if crate::export::Format::of(&args.out).ok() == Some(crate::export::Format::Csv) {
        println!(
            "provenance, units and column descriptions: {}",
            crate::export::sidecar_path(&args.out).display()
        );
    }
    Ok(ExitCode::SUCCESS)
}
