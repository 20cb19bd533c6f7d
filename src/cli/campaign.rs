/*!
`zvet campaign` (under construction).
*/
use std::process::ExitCode;

/// Arguments of `zvet campaign`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Run `zvet campaign`.
pub fn run(_args: Args) -> anyhow::Result<ExitCode> {
    anyhow::bail!("`zvet campaign` is not built yet")
}
