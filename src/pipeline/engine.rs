/*!
The template set and the engine on it: the built-in set, or a set read from
a folder or file, prepared once for a [`FitConfig`].
*/
use crate::fit::{Engine, FitConfig, FitError};
use crate::templates::{TemplateError, TemplateSet};
use std::borrow::Cow;
use std::path::{Path, PathBuf};

/// Why the engine could not be built.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PipelineError {
    /// The template set could not be read.
    #[error("reading the template set {}: {source}", path.display())]
    Templates {
        /// The folder or file.
        path: PathBuf,
        /// The reader's error.
        source: TemplateError,
    },
    /// The engine refused the templates or the settings.
    #[error("preparing the templates: {0}")]
    Engine(#[from] FitError),
}

/// The template set at `path`, or the built-in set.
pub fn load_templates(path: Option<&Path>) -> Result<Cow<'static, TemplateSet>, PipelineError> {
    match path {
        Some(p) => crate::templates::read_set(p)
            .map(Cow::Owned)
            .map_err(|source| PipelineError::Templates {
                path: p.to_path_buf(),
                source,
            }),
        None => Ok(Cow::Borrowed(crate::templates::builtin())),
    }
}

/// The engine on the template set at `path` (built-in when `None`).
pub fn build_engine(path: Option<&Path>, config: FitConfig) -> Result<Engine, PipelineError> {
    let set = load_templates(path)?;
    Ok(Engine::new(&set, config)?)
}
