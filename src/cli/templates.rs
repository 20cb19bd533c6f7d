/*!
`zvet templates`: write the built-in template set to FITS (`build`) and show
what a template set holds (`list`).
*/
use crate::templates::{self, TemplateSet};
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
