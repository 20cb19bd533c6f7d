/*!
`zvet templates` (under construction).
*/
use std::process::ExitCode;

/// Arguments of `zvet templates`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Run `zvet templates`.
pub fn run(_args: Args) -> anyhow::Result<ExitCode> {
    anyhow::bail!("`zvet templates` is not built yet")
}
