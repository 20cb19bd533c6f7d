/*!
The review GUI (under construction).
*/
use std::path::PathBuf;
use std::process::ExitCode;

/// What the GUI is opened on (filled from the command line by the binary).
#[derive(Debug, Clone, Default)]
pub struct LaunchOptions {
    /// A campaign folder to open.
    pub campaign: Option<PathBuf>,
    /// Spectrum files or folders to open instead of the demo survey.
    pub spectra: Vec<PathBuf>,
    /// A photometric catalogue to join with the spectra.
    pub catalog: Option<PathBuf>,
    /// Inspector name, if given.
    pub inspector: Option<String>,
}

/// Open the GUI.
pub fn run(_opts: LaunchOptions) -> anyhow::Result<ExitCode> {
    anyhow::bail!("the GUI is not built yet")
}
