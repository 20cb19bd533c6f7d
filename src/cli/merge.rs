/*!
`zvet merge CAMPAIGN`: merge the inspectors' logs, print the consensus
counts, the agreement statistics and the conflicts awaiting adjudication;
`--conflicts FILE` also writes the conflicts as CSV.
*/
use crate::campaign::{atomic_write, Campaign};
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `zvet merge`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The campaign folder.
    pub campaign: PathBuf,
    /// Largest |Δz|/(1+z) still counted as agreement (default: the manifest's, 0.0015).
    #[arg(long, value_name = "X")]
    pub tolerance: Option<f64>,
    /// Write the conflicts (id, reason, each inspector's class and z) to this CSV file.
    #[arg(long, value_name = "FILE")]
    pub conflicts: Option<PathBuf>,
}

fn opt(x: Option<f64>, digits: usize) -> String {
    x.map_or("–".into(), |x| format!("{x:.digits$}"))
}

/// Run `zvet merge`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    if let Some(t) = args.tolerance.filter(|t| !(t.is_finite() && *t >= 0.0)) {
        anyhow::bail!("--tolerance must be a number ≥ 0, got {t}");
    }
    let c = Campaign::open(&args.campaign)?;
    let bar = super::progress::Bar::steps("merge");
    super::progress::cancel_on_interrupt();
    bar.step("reading and merging the review logs")?;
    let (merged, problems) = c.merge(args.tolerance)?;
    bar.finish();
    for p in &problems {
        eprintln!("zvet: warning: {p}");
    }
    let mut out = std::io::stdout().lock();
    writeln!(
        out,
        "merge of {} (tolerance {}):",
        c.manifest().name,
        merged.tolerance
    )?;
    for (state, n) in merged.counts() {
        writeln!(out, "  {:<12} {n}", state.as_str())?;
    }
    let s = &merged.stats;
    writeln!(out, "agreement ({} objects seen by two or more):", s.n_multi)?;
    for p in &s.pairs {
        writeln!(
            out,
            "  {} – {}: {} in common, same class {}, κ = {}, z within tolerance {} of {}, median |Δz|/(1+z) {}",
            p.a,
            p.b,
            p.n_common,
            opt(p.class_agreement, 3),
            opt(p.kappa, 3),
            opt(p.z_agreement, 3),
            p.n_z,
            opt(p.median_dz, 5)
        )?;
    }
    for c in &s.per_class {
        writeln!(
            out,
            "  {:<8} used {:>5} times, specific agreement {}",
            c.class.as_str(),
            c.uses,
            opt(c.agreement, 3)
        )?;
    }
    let conflicts: Vec<_> = merged.conflicts().collect();
    writeln!(out, "conflicts: {}", conflicts.len())?;
    for k in &conflicts {
        writeln!(out, "  {}: {}", k.object_id, k.reason)?;
    }
    if let Some(path) = &args.conflicts {
        if super::progress::interrupted() {
            anyhow::bail!("stopped by the interrupt; {} was not written", path.display());
        }
        atomic_write(path, |w| {
            let mut cw = csv::Writer::from_writer(w);
            cw.write_record(["id", "reason", "inspector", "class", "z", "confidence"])?;
            for k in &conflicts {
                for (who, v) in &k.opinions {
                    cw.write_record([
                        k.object_id.as_str(),
                        k.reason.as_str(),
                        who.as_str(),
                        v.class.map_or("", |c| c.as_str()),
                        &v.z.map_or(String::new(), |z| format!("{z:?}")),
                        v.confidence.map_or("", |c| c.as_str()),
                    ])?;
                }
            }
            cw.flush()
        })
        .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
        writeln!(out, "conflicts written to {}", path.display())?;
    }
    Ok(ExitCode::SUCCESS)
}
