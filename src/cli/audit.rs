/*!
`zvet campaign sample` (draw a stratified random audit sample) and `zvet
campaign next` (what to vet next, with the reasons).
*/
use crate::audit::campaign::{candidates, load_sample, save_sample, view};
use crate::audit::sample::{Allocation, AuditSample};
use crate::audit::{analyse, next, SAMPLE_FILE};
use crate::campaign::Campaign;
use anyhow::bail;
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `zvet campaign sample`.
#[derive(Debug, clap::Args)]
pub struct SampleArgs {
    /// The campaign folder (fitted: the sample is drawn from its fit cache).
    pub dir: PathBuf,
    /// Number of objects to draw.
    #[arg(long, value_name = "N")]
    pub size: usize,
    /// Stratify by these variables: phot_class, mag_<band>:EDGES, snr:EDGES,
    /// e.g. phot_class,mag_r:19,20,21.
    #[arg(long, value_name = "VARS", default_value = "phot_class")]
    pub strata: String,
    /// How the sample is spread over the strata.
    #[arg(long, value_enum, default_value_t = Allocation::Proportional)]
    pub allocation: Allocation,
    /// Seed of the draw (the same seed and catalogue give the same sample).
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Replace an existing sample (its estimates are then lost).
    #[arg(long)]
    pub replace: bool,
}

/// Arguments of `zvet campaign next`.
#[derive(Debug, clap::Args)]
pub struct NextArgs {
    /// The campaign folder.
    pub dir: PathBuf,
    /// How many objects to list.
    #[arg(long, default_value_t = 20)]
    pub count: usize,
}

/// Run `zvet campaign sample`.
pub fn sample(a: SampleArgs) -> anyhow::Result<ExitCode> {
    let c = Campaign::open(&a.dir)?;
    match load_sample(&c) {
        Ok(Some(old)) if !a.replace => bail!(
            "{} already holds an audit sample of {} objects (seed {}); \
             give --replace to draw a new one (estimates then start again)",
            c.dir().join(SAMPLE_FILE).display(),
            old.members.len(),
            old.seed
        ),
        Err(e) if !a.replace => bail!("{e}; give --replace to draw a new sample over it"),
        _ => {}
    }
    let v = view(&c)?;
    for p in &v.problems {
        eprintln!("zvet: warning: {p}");
    }
    if v.units.is_empty() {
        bail!(
            "{} has no fitted objects to sample: run `zvet campaign fit {}` first",
            c.dir().display(),
            c.dir().display()
        );
    }
    if a.size > v.units.len() {
        eprintln!(
            "zvet: note: --size {} is more than the {} objects; all are drawn",
            a.size,
            v.units.len()
        );
    }
    let s =
        AuditSample::draw(&v.units, &a.strata, a.size, a.allocation, a.seed).map_err(anyhow::Error::msg)?;
    save_sample(&c, &s)?;
    println!(
        "drew {} of {} objects ({} allocation, seed {}) into {}",
        s.members.len(),
        v.units.len(),
        format!("{:?}", s.allocation).to_lowercase(),
        s.seed,
        c.dir().join(SAMPLE_FILE).display()
    );
    println!(
        "{:<44} {:>9} {:>7} {:>11}",
        "stratum", "objects", "drawn", "inclusion"
    );
    for st in &s.strata {
        println!(
            "{:<44} {:>9} {:>7} {:>11.4}",
            st.key,
            st.population,
            st.sampled,
            st.inclusion()
        );
    }
    Ok(ExitCode::SUCCESS)
}

/// Run `zvet campaign next`.
pub fn next_action(a: NextArgs) -> anyhow::Result<ExitCode> {
    let c = Campaign::open(&a.dir)?;
    let sample = load_sample(&c)?;
    let v = view(&c)?;
    for p in &v.problems {
        eprintln!("zvet: warning: {p}");
    }
    let numbers = sample.as_ref().map(|s| analyse(s, &v.observed));
    let order = next::order(&candidates(&v, sample.as_ref(), numbers.as_ref()));
    if sample.is_none() {
        eprintln!(
            "zvet: note: no audit sample yet (zvet campaign sample {} --size N); ordering by the other reasons only",
            c.dir().display()
        );
    }
    for n in order.iter().take(a.count) {
        println!("{:<24} {}", n.id, n.reasons.join("; "));
    }
    println!("{} objects still to vet", order.len());
    Ok(ExitCode::SUCCESS)
}
