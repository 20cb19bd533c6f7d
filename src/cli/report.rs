/*!
`zvet report CAMPAIGN --out DIR`: write the summary report (report.html with
the plots inlined, the plots as SVG files, the numbers as report.json).
*/
use crate::campaign::Campaign;
use crate::report::{input_from_campaign, numbers, write_report};
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `zvet report`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign folder.
    pub campaign: PathBuf,
    /// Output folder (default: the campaign's exports/report).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

/// Run `zvet report`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    let c = Campaign::open(&args.campaign)?;
    let bar = super::progress::Bar::steps("report");
    super::progress::cancel_on_interrupt();
    bar.step("reading logs, fits and catalogue")?;
    let input = input_from_campaign(&c)?;
    bar.step("counting")?;
    let n = numbers(&input);
    drop(input.fits);
    let out = args.out.unwrap_or_else(|| c.exports_dir().join("report"));
    bar.step("drawing and writing")?;
    let files = write_report(&out, &n)?;
    bar.finish();
    for p in &input.problems {
        eprintln!("zvet: warning: {p}");
    }
    println!(
        "report written to {} ({} files): {} reviewed, {} conflicts, catastrophic redshift rate {}",
        out.join("report.html").display(),
        files.len(),
        n.n_reviewed,
        n.conflicts.len(),
        n.z_catastrophic_rate
            .map_or("–".into(), |r| format!("{:.1} %", 100.0 * r))
    );
    Ok(ExitCode::SUCCESS)
}
