/*!
`campaign.toml`, the manifest of a campaign folder: what is being reviewed
(spectrum inputs and how to read them, the photometric catalogue and its
column mapping), with which templates and engine settings, by whom.

Paths inside the campaign folder are stored relative to it, others absolute,
so the folder can be moved together with its inputs.
*/
use chrono::{DateTime, Utc};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Format version of `campaign.toml`.
pub const MANIFEST_FORMAT: u32 = 1;

/// How to read the spectrum files: the readers' own options, stored as is.
pub type ReadSettings = crate::io::ReadOptions;

/// The photometric catalogue and which of its columns mean what.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CatalogSettings {
    /// The CSV file.
    pub path: PathBuf,
    /// Field → column name, for columns whose names differ from the
    /// reader's defaults (e.g. `id = "objid"`, `u = "mag_u"`).
    #[serde(default)]
    pub columns: BTreeMap<String, String>,
}

/// Engine settings: the engine's own configuration, stored as is (fields
/// missing from an older manifest take the engine's defaults).
pub type EngineSettings = crate::fit::FitConfig;

/// The manifest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// Format version ([`MANIFEST_FORMAT`]).
    pub format: u32,
    /// Campaign name (defaults to the folder name).
    pub name: String,
    /// When the campaign was created.
    pub created: DateTime<Utc>,
    /// zvet version that created it.
    pub zvet_version: String,
    /// Spectrum files or folders.
    pub spectra: Vec<PathBuf>,
    /// How to read them.
    #[serde(default)]
    pub read: ReadSettings,
    /// The photometric catalogue, if any.
    pub catalog: Option<CatalogSettings>,
    /// Template set: `builtin` or a path to a template-set folder.
    pub templates: String,
    /// Engine settings.
    #[serde(default)]
    pub engine: EngineSettings,
    /// Inspectors known to the campaign.
    #[serde(default)]
    pub inspectors: Vec<String>,
    /// The inspector whose verdicts settle conflicts.
    pub adjudicator: Option<String>,
    /// Redshift tolerance of the merge on |Δz|/(1+z).
    pub tolerance: f64,
}

/// Store `p` relative to `dir` when it lies inside it, else absolute.
pub fn store_path(dir: &Path, p: &Path) -> PathBuf {
    let abs = std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf());
    let dir_abs = std::fs::canonicalize(dir).unwrap_or_else(|_| dir.to_path_buf());
    match abs.strip_prefix(&dir_abs) {
        Ok(rel) => rel.to_path_buf(),
        Err(_) => abs,
    }
}

/// Resolve a stored path against the campaign folder.
pub fn resolve_path(dir: &Path, p: &Path) -> PathBuf {
    if p.is_absolute() {
        p.to_path_buf()
    } else {
        dir.join(p)
    }
}
