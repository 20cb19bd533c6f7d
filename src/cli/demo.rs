/*!
`zvet demo` (under construction).
*/
use std::process::ExitCode;

/// Arguments of `zvet demo`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Run `zvet demo`.
pub fn run(_args: Args) -> anyhow::Result<ExitCode> {
    anyhow::bail!("`zvet demo` is not built yet")
}
