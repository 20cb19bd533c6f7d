/*!
`zvet templates`: write the built-in template set to FITS (`build`), show
what a template set holds (`list`), and train a set from vetted spectra
(`train`, see [`crate::templates::train`]).
*/
use super::read_opts::ReadArgs;
use crate::review::{Confidence, Flag};
use crate::templates::train::{self, Selection, StarMode, TrainOptions};
use crate::templates::{self, TemplateSet};
use crate::ObjectClass;
use anyhow::Context;
use clap::Subcommand;
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

/// Arguments of `zvet templates`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// What to do.
    #[command(subcommand)]
    pub action: Action,
}

/// The `templates` actions.
#[derive(Debug, Subcommand)]
#[allow(clippy::large_enum_variant)] // parsed once per run: size does not matter
pub enum Action {
    /// Generate the built-in templates and write them as FITS plus a JSON descriptor.
    Build {
        /// Output folder.
        #[arg(long, default_value = templates::DEFAULT_DIR)]
        out: PathBuf,
    },
    /// List the templates of a set (a .fits/.json file or a folder); the built-in set by default.
    List {
        /// Template set file or folder.
        path: Option<PathBuf>,
    },
    /// Train a template set from vetted spectra: a campaign folder (its merged
    /// verdicts) or a CSV table with columns path, class, z [, id, type].
    Train(TrainArgs),
}

/// Arguments of `zvet templates train`.
#[derive(Debug, clap::Args)]
pub struct TrainArgs {
    /// A campaign folder, or a CSV table of spectra with class and z.
    pub source: PathBuf,
    /// Output folder of the new template set.
    #[arg(long)]
    pub out: PathBuf,
    /// Train only these classes (comma-separated; default: every class vetted).
    #[arg(long, value_delimiter = ',')]
    pub class: Vec<ObjectClass>,
    /// Eigen-spectra per class (1–16).
    #[arg(long, default_value_t = 4)]
    pub components: usize,
    /// Lowest verdict certainty trained on (guess, probable, secure; the
    /// older words doubtful, tentative, solid and certain are read too).
    #[arg(long, value_name = "LEVEL", value_parser = parse_certainty, default_value = "secure")]
    pub min_certainty: Confidence,
    /// Also train on objects that carry an inspector's flag.
    #[arg(long)]
    pub keep_flagged: bool,
    /// Stars: one template per type (`per-type`) or an eigen-basis (`basis`).
    #[arg(long, value_parser = parse_star_mode, default_value = "per-type")]
    pub stars: StarMode,
    /// Name of the set (file names NAME.fits and NAME.json).
    #[arg(long, default_value = "trained")]
    pub name: String,
    /// Step of the template grid in log10 λ.
    #[arg(long, default_value_t = 1e-4)]
    pub dloglam: f64,
    /// Outlier rejection: set aside spectra whose reduced χ² exceeds the median by KAPPA robust σ (0 = none).
    #[arg(long, value_name = "KAPPA", default_value_t = 3.0)]
    pub clip: f64,
    /// Write only the trained classes (default: classes not trained come from the built-in set).
    #[arg(long)]
    pub trained_only: bool,
    /// How to read the spectrum files of a table (a campaign uses its own settings).
    #[command(flatten)]
    pub read: ReadArgs,
}

fn parse_certainty(s: &str) -> Result<Confidence, String> {
    let all: Vec<&str> = Confidence::ALL.iter().map(|c| c.as_str()).collect();
    serde_json::from_str(&format!("\"{}\"", s.trim().to_ascii_lowercase()))
        .map_err(|_| format!("unknown certainty '{s}' (expected one of: {})", all.join(", ")))
}

fn parse_star_mode(s: &str) -> Result<StarMode, String> {
    match s.trim().to_ascii_lowercase().as_str() {
        "per-type" | "per_type" | "type" => Ok(StarMode::PerType),
        "basis" => Ok(StarMode::Basis),
        o => Err(format!("unknown star mode '{o}' (expected per-type or basis)")),
    }
}

/// Run `zvet templates train`.
fn run_train(a: TrainArgs) -> anyhow::Result<ExitCode> {
    let sel = Selection {
        classes: a.class.clone(),
        min_certainty: a.min_certainty,
        exclude_flags: if a.keep_flagged {
            vec![]
        } else {
            Flag::ALL.to_vec()
        },
    };
    let (spectra, problems, source) = if a.source.is_dir() {
        let c = crate::campaign::Campaign::open(&a.source)?;
        let (s, p) = train::from_campaign(&c, &sel)?;
        let src = format!(
            "the vetted verdicts of campaign '{}' (certainty >= {}{})",
            c.manifest().name,
            a.min_certainty.as_str(),
            if a.keep_flagged { "" } else { ", unflagged" }
        );
        (s, p, src)
    } else {
        let (s, p) = train::from_table(&a.source, &a.read.to_options(), &sel)?;
        let name = a
            .source
            .file_name()
            .map_or(String::new(), |n| n.to_string_lossy().into_owned());
        (s, p, format!("the table {name}"))
    };
    for p in &problems {
        eprintln!("zvet: warning: {p}");
    }
    let opts = TrainOptions {
        name: a.name.clone(),
        components: a.components,
        dloglam: a.dloglam,
        star_mode: a.stars,
        clip: templates::pca::ClipOptions {
            kappa: a.clip,
            ..Default::default()
        },
        fill_from_builtin: !a.trained_only,
        source,
        ..TrainOptions::default()
    };
    let t = train::train(&spectra, &opts)?;
    for p in &t.problems {
        eprintln!("zvet: warning: {p}");
    }
    train::write_trained(&t, &a.out)
        .with_context(|| format!("writing the trained set to {}", a.out.display()))?;
    let mut out = std::io::stdout().lock();
    writeln!(
        out,
        "trained on {} of {} vetted spectra",
        t.provenance.spectra_used, t.provenance.spectra_in
    )?;
    writeln!(
        out,
        "  {:<8} {:<16} {:>5} {:>8} {:>5} {:>15} {:>17}",
        "class", "group", "used", "rejected", "K", "power explained", "rest λ (Å)"
    )?;
    for g in &t.provenance.groups {
        writeln!(
            out,
            "  {:<8} {:<16} {:>5} {:>8} {:>5} {:>15} {:>8.0}–{:<8.0}",
            g.class.as_str(),
            g.group.as_deref().unwrap_or("-"),
            g.spectra_used,
            g.rejected.len(),
            g.components,
            g.power_explained
                .iter()
                .map(|v| format!("{v:.4}"))
                .collect::<Vec<_>>()
                .join(" "),
            g.rest_range.0,
            g.rest_range.1
        )?;
    }
    if !t.provenance.from_builtin.is_empty() {
        let names: Vec<&str> = t.provenance.from_builtin.iter().map(|c| c.as_str()).collect();
        writeln!(out, "built-in templates kept for: {}", names.join(", "))?;
    }
    writeln!(
        out,
        "wrote {} and {}",
        a.out.join(format!("{}.fits", t.set.name)).display(),
        a.out.join(format!("{}.json", t.set.name)).display()
    )?;
    Ok(ExitCode::SUCCESS)
}

/// Run `zvet templates`.
pub fn run(args: Args) -> anyhow::Result<ExitCode> {
    match args.action {
        Action::Build { out } => {
            templates::write_builtin(&out)
                .with_context(|| format!("writing the built-in templates to {}", out.display()))?;
            let set = templates::builtin();
            let n: usize = set.classes.iter().map(|c| c.templates.len()).sum();
            println!(
                "wrote {n} templates to {}",
                out.join(format!("{}.fits", set.name)).display()
            );
            Ok(ExitCode::SUCCESS)
        }
        Action::List { path } => {
            let mut out = std::io::stdout().lock();
            match path {
                None => print_set(&mut out, templates::builtin(), "built in")?,
                Some(p) if p.is_dir() => {
                    let files = templates::set_files(&p)?;
                    anyhow::ensure!(
                        !files.is_empty(),
                        "{}: no template sets (*.fits) here",
                        p.display()
                    );
                    for f in files {
                        let set = templates::read_set(&f)?;
                        print_set(&mut out, &set, &f.display().to_string())?;
                    }
                }
                Some(p) => {
                    let set = templates::read_set(&p)?;
                    print_set(&mut out, &set, &p.display().to_string())?;
                }
            }
            Ok(ExitCode::SUCCESS)
        }
        Action::Train(a) => run_train(a),
    }
}

/// One line per template: class, fit mode, kind, name, rest coverage, pixels.
fn print_set(out: &mut impl Write, set: &TemplateSet, origin: &str) -> anyhow::Result<()> {
    writeln!(out, "set '{}' ({origin})", set.name)?;
    writeln!(out, "  {}", set.provenance)?;
    writeln!(
        out,
        "  {:<8} {:<10} {:<10} {:<22} {:>17} {:>7}",
        "class", "fit", "kind", "template", "rest λ (Å)", "pixels"
    )?;
    for c in &set.classes {
        let mode = match c.mode {
            templates::FitMode::Basis => "basis",
            templates::FitMode::EachAlone => "each alone",
        };
        for t in &c.templates {
            let kind = match t.kind {
                templates::TemplateKind::Emission => "emission",
                templates::TemplateKind::Absorption => "absorption",
            };
            let n = t.flux.len();
            writeln!(
                out,
                "  {:<8} {:<10} {:<10} {:<22} {:>8.0}–{:<8.0} {:>7}",
                c.class.as_str(),
                mode,
                kind,
                t.name,
                t.wave(0),
                t.wave(n.saturating_sub(1)),
                n
            )?;
        }
    }
    Ok(())
}
