/*!
`zvet export` (under construction).
*/
use std::process::ExitCode;

/// Arguments of `zvet export`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Run `zvet export`.
pub fn run(_args: Args) -> anyhow::Result<ExitCode> {
    anyhow::bail!("`zvet export` is not built yet")
}
