/*!
`zvet report` (under construction).
*/
use std::process::ExitCode;

/// Arguments of `zvet report`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Run `zvet report`.
pub fn run(_args: Args) -> anyhow::Result<ExitCode> {
    anyhow::bail!("`zvet report` is not built yet")
}
