/*!
`zvet merge` (under construction).
*/
use std::process::ExitCode;

/// Arguments of `zvet merge`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Run `zvet merge`.
pub fn run(_args: Args) -> anyhow::Result<ExitCode> {
    anyhow::bail!("`zvet merge` is not built yet")
}
