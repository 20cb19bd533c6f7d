/*!
`zvet fit` (under construction).
*/
use std::process::ExitCode;

/// Arguments of `zvet fit`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Run `zvet fit`.
pub fn run(_args: Args) -> anyhow::Result<ExitCode> {
    anyhow::bail!("`zvet fit` is not built yet")
}
