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

/// Keys of `given` (a table as written) that the manifest does not know:
/// found by comparing with `known`, the manifest as read and written back
/// (serde would otherwise drop them silently, and a typo such as
/// `tolerence = 0.1` would leave the default in force). Dotted paths.
fn unknown_keys(given: &toml::Table, known: &toml::Table, prefix: &str, out: &mut Vec<String>) {
    for (k, v) in given {
        let path = if prefix.is_empty() {
            k.clone()
        } else {
            format!("{prefix}.{k}")
        };
        match (v, known.get(k)) {
            (_, None) => out.push(path),
            // Free-form maps (the catalogue's column mapping) take any key.
            (toml::Value::Table(g), Some(toml::Value::Table(kn))) if path != "catalog.columns" => {
                unknown_keys(g, kn, &path, out);
            }
            _ => {}
        }
    }
}

impl Manifest {
    /// Read a manifest from its text and check it as strictly as the
    /// command line checks the same settings: unknown keys, the format
    /// version, the merge tolerance (a number ≥ 0, as `--tolerance`), the
    /// inspector names, the engine's grid and redshift ranges. The message
    /// names the key.
    pub fn parse(text: &str) -> Result<Manifest, String> {
        let given: toml::Table = toml::from_str(text).map_err(|e| e.to_string())?;
        let m: Manifest = toml::from_str(text).map_err(|e| e.to_string())?;
        let back: toml::Table = toml::Table::try_from(&m).map_err(|e| e.to_string())?;
        let mut unknown = Vec::new();
        unknown_keys(&given, &back, "", &mut unknown);
        if !unknown.is_empty() {
            return Err(format!(
                "unknown key(s) {} (a typo? the keys are documented in the README)",
                unknown.join(", ")
            ));
        }
        m.validate()?;
        Ok(m)
    }

    /// Check the values (see [`Manifest::parse`]).
    pub fn validate(&self) -> Result<(), String> {
        if self.format == 0 || self.format > MANIFEST_FORMAT {
            return Err(if self.format == 0 {
                format!("format = 0 is not a manifest format (this zvet writes {MANIFEST_FORMAT})")
            } else {
                format!(
                    "written in manifest format {} by a newer zvet (this one reads up to {MANIFEST_FORMAT})",
                    self.format
                )
            });
        }
        if !(self.tolerance.is_finite() && self.tolerance >= 0.0) {
            return Err(format!(
                "tolerance = {} : the merge tolerance must be a number ≥ 0",
                self.tolerance
            ));
        }
        for n in self.inspectors.iter().chain(&self.adjudicator) {
            super::check_inspector(n).map_err(|e| format!("inspectors/adjudicator: {e}"))?;
        }
        let e = &self.engine;
        if !(e.dloglam.is_finite() && e.dloglam > 0.0) {
            return Err(format!("engine.dloglam = {} must be a number > 0", e.dloglam));
        }
        for (key, (lo, hi)) in [
            ("z_galaxy", e.z_galaxy),
            ("z_quasar", e.z_quasar),
            ("z_star", e.z_star),
        ] {
            if !(lo.is_finite() && hi.is_finite() && lo > -1.0 && lo < hi) {
                return Err(format!(
                    "engine.{key} = [{lo}, {hi}] must be two numbers, −1 < low < high"
                ));
            }
        }
        for (key, v) in [
            ("sys_floor", e.sys_floor),
            ("min_separation_kms", e.min_separation_kms),
        ] {
            if !(v.is_finite() && v >= 0.0) {
                return Err(format!("engine.{key} = {v} must be a number ≥ 0"));
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod strict_tests {
    use super::*;

    fn manifest_text() -> String {
        let m = Manifest {
            format: MANIFEST_FORMAT,
            name: "t".into(),
            created: chrono::Utc::now(),
            zvet_version: "0".into(),
            spectra: vec!["spectra".into()],
            read: Default::default(),
            catalog: Some(CatalogSettings {
                path: "cat.csv".into(),
                columns: [("id".to_string(), "OBJ".to_string())].into(),
            }),
            templates: "builtin".into(),
            engine: Default::default(),
            inspectors: vec!["ana".into()],
            adjudicator: None,
            tolerance: 0.003,
        };
        toml::to_string_pretty(&m).unwrap()
    }

    #[test]
    fn a_written_manifest_reads_back() {
        let t = manifest_text();
        assert!(Manifest::parse(&t).is_ok(), "{:?}", Manifest::parse(&t).err());
    }

    #[test]
    fn bad_values_and_unknown_keys_are_refused_by_name() {
        let t = manifest_text();
        let with = |from: &str, to: &str| {
            assert!(t.contains(from), "{from}");
            Manifest::parse(&t.replacen(from, to, 1)).unwrap_err()
        };
        assert!(with("tolerance = 0.003", "tolerance = nan").contains("tolerance"));
        assert!(with("tolerance = 0.003", "tolerance = -1.0").contains("tolerance"));
        assert!(with("format = 1", "format = 0").contains("format = 0"));
        assert!(with("tolerance = 0.003", "tolerance = 0.003\ntolerence = 0.1").contains("tolerence"));
        assert!(with("[engine]", "[engine]\nz_galxy = [0.0, 1.0]").contains("engine.z_galxy"));
        assert!(with("[read]", "[read]\nair_wavelengths = true").contains("read.air_wavelengths"));
        // The column mapping is free-form.
        assert!(Manifest::parse(&t.replacen("id = \"OBJ\"", "id = \"OBJ\"\nr = \"MAG_R\"", 1)).is_ok());
    }
}
