/*!
`zvet inspect` (under construction).
*/
use std::process::ExitCode;

/// Arguments of `zvet inspect`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Run `zvet inspect`.
pub fn run(_args: Args) -> anyhow::Result<ExitCode> {
    anyhow::bail!("`zvet inspect` is not built yet")
}
