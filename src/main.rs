//! The `zvet` binary: parse the command line, open the GUI or run a subcommand.
use clap::Parser;
use std::process::ExitCode;
use zvet::cli::Cli;
#[cfg(feature = "gui")]
use zvet::cli::Command;

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        #[cfg(feature = "gui")]
        None => zvet::ui::run(zvet::ui::LaunchOptions::default()),
        #[cfg(feature = "gui")]
        Some(Command::Review(a)) => zvet::ui::run(zvet::ui::LaunchOptions {
            campaign: a.campaign,
            spectra: a.spectra,
            catalog: a.catalog,
            inspector: a.inspector,
        }),
        #[cfg(not(feature = "gui"))]
        None => {
            use clap::CommandFactory;
            let _ = Cli::command().print_help();
            Ok(ExitCode::SUCCESS)
        }
        Some(command) => zvet::cli::run(command),
    };
    match result {
        Ok(code) => code,
        Err(err) => {
            if let Some(e) = err.downcast_ref::<std::io::Error>() {
                if e.kind() == std::io::ErrorKind::BrokenPipe {
                    return ExitCode::SUCCESS;
                }
            }
            eprintln!("zvet: error: {}", message(&err));
            ExitCode::from(2)
        }
    }
}

/// The error and its causes on one line, each cause added only when the
/// text so far does not already hold it (many errors print their cause in
/// their own message; `{:#}` would then say everything twice).
fn message(err: &anyhow::Error) -> String {
    let mut out = String::new();
    for cause in err.chain() {
        let text = cause.to_string();
        if out.is_empty() {
            out = text;
        } else if !out.contains(&text) {
            out.push_str(": ");
            out.push_str(&text);
        }
    }
    out
}
