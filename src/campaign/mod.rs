/*!
A review campaign: the objects under review and, on disk, a campaign folder.

```text
DIR/
  campaign.toml        manifest (inputs, catalogue + columns, templates, engine, inspectors)
  fits.jsonl           cached automatic fits, one record per line and object
  parts/               shard outputs of `zvet campaign fit --shard K/N` until collected
  reviews/NAME.jsonl   one append-only review log per inspector (+ NAME.jsonl.lock)
  exports/             catalogues and reports written by `zvet export` / `zvet report`
```
Every file but the review logs is rewritten only through [`atomic_write`].
*/
pub mod fitcache;
pub mod manifest;
mod objects;
mod shards;

// the one atomic output path lives in `io` (below every writer); kept
// here under its old names for the campaign's callers
pub use crate::io::atomic::{
    atomic_create, atomic_dir, atomic_write, close_fits, commit_partial, partial_path, sync_dir,
};
pub use manifest::{CatalogSettings, EngineSettings, Manifest, ReadSettings, MANIFEST_FORMAT};
pub use shards::{CollectSummary, ImportSummary, PARTS_DIR};

use crate::catalog::CatalogRow;
use crate::fit::FitResult;
use crate::pipeline::FitRecord;
use crate::review::merge::{merge, InspectorLog, MergeOptions, Merged, DEFAULT_TOLERANCE};
use crate::review::{LogProblem, ReviewError, ReviewLog};
use crate::Spectrum;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// One object under review: its spectrum, its catalogue row and its automatic fit.
#[derive(Debug, Clone)]
pub struct SurveyObject {
    /// The spectrum (its `meta.id` is the object id).
    pub spectrum: Spectrum,
    /// The photometric catalogue row, if the id matched.
    pub catalog: Option<CatalogRow>,
    /// The automatic fit, once computed.
    pub fit: Option<FitResult>,
}

impl SurveyObject {
    /// The object id.
    pub fn id(&self) -> &str {
        &self.spectrum.meta.id
    }
}

/// File name of the manifest.
pub const MANIFEST_FILE: &str = crate::pipeline::CAMPAIGN_MANIFEST;
/// File name of the fit cache.
pub const FITS_FILE: &str = "fits.jsonl";
/// Folder of the review logs.
pub const REVIEWS_DIR: &str = "reviews";
/// Folder of the exports.
pub const EXPORTS_DIR: &str = "exports";

/// What can go wrong with a campaign folder.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CampaignError {
    /// A file could not be read or written.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// The manifest is not valid.
    #[error("{}: {message}", path.display())]
    Manifest {
        /// The manifest.
        path: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// The folder has no manifest.
    #[error("{} is not a campaign folder (no {MANIFEST_FILE}); create one with `zvet campaign init`", .0.display())]
    NotACampaign(PathBuf),
    /// `init` on a folder that already is a campaign.
    #[error("{} already holds a campaign ({MANIFEST_FILE} exists)", .0.display())]
    Exists(PathBuf),
    /// An unusable inspector name.
    #[error("bad inspector name '{0}': use letters, digits, '-', '_' or '.', not starting with '.'")]
    BadInspector(String),
    /// A review log failed.
    #[error(transparent)]
    Review(#[from] ReviewError),
    /// Reading spectra failed (boxed: the reader's error is large).
    #[error(transparent)]
    Load(Box<crate::io::LoadError>),
    /// Reading the catalogue failed.
    #[error(transparent)]
    Catalog(#[from] crate::catalog::CatalogError),
    /// The template set could not be read.
    #[error(transparent)]
    Templates(#[from] crate::templates::TemplateError),
    /// The engine could not be set up.
    #[error("redshift engine: {0}")]
    Fit(#[from] crate::fit::FitError),
    /// The template set or engine of the pipeline.
    #[error(transparent)]
    Pipeline(#[from] crate::pipeline::PipelineError),
    /// A result table (shard part, imported output) could not be read or written.
    #[error(transparent)]
    Table(#[from] crate::pipeline::TableError),
    /// Something else, explained.
    #[error("{0}")]
    Other(String),
}

impl From<crate::io::LoadError> for CampaignError {
    fn from(e: crate::io::LoadError) -> Self {
        CampaignError::Load(Box::new(e))
    }
}

fn io_err(path: &Path) -> impl FnOnce(std::io::Error) -> CampaignError + '_ {
    move |source| CampaignError::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// Check an inspector name: it becomes a file name.
pub fn check_inspector(name: &str) -> Result<(), CampaignError> {
    let ok = !name.is_empty()
        && name.chars().count() <= 64
        && !name.starts_with('.')
        && name
            .chars()
            .all(|c| c.is_alphanumeric() || matches!(c, '-' | '_' | '.'));
    if ok {
        Ok(())
    } else {
        Err(CampaignError::BadInspector(name.to_string()))
    }
}

/// What `zvet campaign init` needs.
#[derive(Debug, Clone, Default)]
pub struct InitOptions {
    /// Campaign name (default: the folder name).
    pub name: Option<String>,
    /// Spectrum files or folders.
    pub spectra: Vec<PathBuf>,
    /// How to read them.
    pub read: ReadSettings,
    /// Photometric catalogue.
    pub catalog: Option<PathBuf>,
    /// Catalogue column mapping (field → column).
    pub columns: BTreeMap<String, String>,
    /// Template-set folder (`None`: the built-in set).
    pub templates: Option<PathBuf>,
    /// Engine settings.
    pub engine: EngineSettings,
    /// Inspectors to register.
    pub inspectors: Vec<String>,
    /// The adjudicator.
    pub adjudicator: Option<String>,
    /// Merge tolerance (`None`: the default).
    pub tolerance: Option<f64>,
}

/// An open campaign folder.
#[derive(Debug, Clone)]
pub struct Campaign {
    dir: PathBuf,
    manifest: Manifest,
}

impl Campaign {
    /// Create a campaign folder (the folder may exist but must not hold a
    /// campaign yet).
    pub fn init(dir: &Path, opts: &InitOptions) -> Result<Campaign, CampaignError> {
        let mpath = dir.join(MANIFEST_FILE);
        if mpath.exists() {
            return Err(CampaignError::Exists(dir.to_path_buf()));
        }
        for p in opts.spectra.iter().chain(&opts.catalog) {
            if !p.exists() {
                return Err(CampaignError::Io {
                    path: p.clone(),
                    source: std::io::Error::new(std::io::ErrorKind::NotFound, "no such file or folder"),
                });
            }
        }
        for n in opts.inspectors.iter().chain(&opts.adjudicator) {
            check_inspector(n)?;
        }
        if let Some(t) = opts.tolerance.filter(|t| !(t.is_finite() && *t >= 0.0)) {
            return Err(CampaignError::Other(format!(
                "the merge tolerance must be a number ≥ 0, got {t}"
            )));
        }
        for sub in [REVIEWS_DIR, EXPORTS_DIR] {
            let d = dir.join(sub);
            std::fs::create_dir_all(&d).map_err(io_err(&d))?;
        }
        let name = opts.name.clone().unwrap_or_else(|| {
            std::fs::canonicalize(dir)
                .ok()
                .and_then(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
                .unwrap_or_else(|| "campaign".into())
        });
        let mut inspectors = opts.inspectors.clone();
        inspectors.dedup();
        let manifest = Manifest {
            format: MANIFEST_FORMAT,
            name,
            created: chrono::Utc::now(),
            zvet_version: env!("CARGO_PKG_VERSION").into(),
            spectra: opts
                .spectra
                .iter()
                .map(|p| manifest::store_path(dir, p))
                .collect(),
            read: opts.read.clone(),
            catalog: opts.catalog.as_ref().map(|p| CatalogSettings {
                path: manifest::store_path(dir, p),
                columns: opts.columns.clone(),
            }),
            templates: opts.templates.as_ref().map_or("builtin".into(), |p| {
                manifest::store_path(dir, p).display().to_string()
            }),
            engine: opts.engine.clone(),
            inspectors,
            adjudicator: opts.adjudicator.clone(),
            tolerance: opts.tolerance.unwrap_or(DEFAULT_TOLERANCE),
        };
        let c = Campaign {
            dir: dir.to_path_buf(),
            manifest,
        };
        c.save_manifest()?;
        Ok(c)
    }

    /// Open an existing campaign folder.
    pub fn open(dir: &Path) -> Result<Campaign, CampaignError> {
        let mpath = dir.join(MANIFEST_FILE);
        let text = match std::fs::read_to_string(&mpath) {
            Ok(t) => t,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                return Err(CampaignError::NotACampaign(dir.to_path_buf()))
            }
            Err(e) => return Err(io_err(&mpath)(e)),
        };
        let manifest = Manifest::parse(&text).map_err(|message| CampaignError::Manifest {
            path: mpath.clone(),
            message,
        })?;
        Ok(Campaign {
            dir: dir.to_path_buf(),
            manifest,
        })
    }

    /// The folder.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// The manifest.
    pub fn manifest(&self) -> &Manifest {
        &self.manifest
    }

    /// Change the manifest and write it (atomically).
    pub fn update_manifest(&mut self, f: impl FnOnce(&mut Manifest)) -> Result<(), CampaignError> {
        let old = self.manifest.clone();
        f(&mut self.manifest);
        if let Err(e) = self.save_manifest() {
            self.manifest = old;
            return Err(e);
        }
        Ok(())
    }

    fn save_manifest(&self) -> Result<(), CampaignError> {
        let path = self.dir.join(MANIFEST_FILE);
        let text = toml::to_string_pretty(&self.manifest).map_err(|e| CampaignError::Manifest {
            path: path.clone(),
            message: e.to_string(),
        })?;
        atomic_write(&path, |w| {
            w.write_all(b"# zvet campaign manifest (format documented in the README)\n")?;
            w.write_all(text.as_bytes())
        })
        .map_err(io_err(&path))
    }

    /// Spectrum inputs, resolved against the folder.
    pub fn spectra_paths(&self) -> Vec<PathBuf> {
        self.manifest
            .spectra
            .iter()
            .map(|p| manifest::resolve_path(&self.dir, p))
            .collect()
    }

    /// The catalogue path, resolved.
    pub fn catalog_path(&self) -> Option<PathBuf> {
        self.manifest
            .catalog
            .as_ref()
            .map(|c| manifest::resolve_path(&self.dir, &c.path))
    }

    /// Path of an inspector's review log: `reviews/<inspector>.jsonl`.
    pub fn review_log_path(&self, inspector: &str) -> PathBuf {
        self.reviews_dir().join(format!("{inspector}.jsonl"))
    }

    /// The folder of the review logs.
    pub fn reviews_dir(&self) -> PathBuf {
        self.dir.join(REVIEWS_DIR)
    }

    /// The exports folder.
    pub fn exports_dir(&self) -> PathBuf {
        self.dir.join(EXPORTS_DIR)
    }

    /// Open (creating if needed) an inspector's log, registering the
    /// inspector in the manifest.
    pub fn open_review_log(
        &mut self,
        inspector: &str,
    ) -> Result<(ReviewLog, Vec<LogProblem>), CampaignError> {
        check_inspector(inspector)?;
        let opened = ReviewLog::open(&self.review_log_path(inspector), inspector)?;
        if !self.manifest.inspectors.iter().any(|n| n == inspector) {
            self.update_manifest(|m| m.inspectors.push(inspector.to_string()))?;
        }
        Ok(opened)
    }

    /// Every inspector with a log in `reviews/` (sorted), whether or not the
    /// manifest lists them.
    pub fn log_inspectors(&self) -> Result<Vec<String>, CampaignError> {
        let d = self.dir.join(REVIEWS_DIR);
        let rd = match std::fs::read_dir(&d) {
            Ok(rd) => rd,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(vec![]),
            Err(e) => return Err(io_err(&d)(e)),
        };
        let mut names = Vec::new();
        for entry in rd {
            let p = entry.map_err(io_err(&d))?.path();
            if p.extension().is_some_and(|e| e == "jsonl") {
                if let Some(stem) = p.file_stem().and_then(|s| s.to_str()) {
                    names.push(stem.to_string());
                }
            }
        }
        names.sort();
        Ok(names)
    }

    /// Read (without locking) and replay every inspector's log. Problems
    /// name the log and line.
    pub fn read_logs(&self) -> Result<(Vec<InspectorLog>, Vec<String>), CampaignError> {
        let mut logs = Vec::new();
        let mut problems = Vec::new();
        for name in self.log_inspectors()? {
            let path = self.review_log_path(&name);
            if !path.is_file() {
                problems.push(format!("reviews/{name}.jsonl is not a file (a folder?); skipped"));
                continue;
            }
            let log = InspectorLog::read(&path, &name)?;
            problems.extend(log.problems.iter().map(|p| format!("reviews/{name}.jsonl {p}")));
            logs.push(log);
        }
        let (logs, notes) = crate::review::merge::dedupe_logs(logs);
        problems.extend(notes);
        Ok((logs, problems))
    }

    /// Merge all logs with the manifest's tolerance (or `tolerance`) and
    /// adjudicator. A log named `adjudicator` counts as the adjudicator when
    /// the manifest names none.
    pub fn merge(&self, tolerance: Option<f64>) -> Result<(Merged, Vec<String>), CampaignError> {
        let (logs, problems) = self.read_logs()?;
        Ok((self.merge_logs(&logs, tolerance), problems))
    }

    /// [`Campaign::merge`] of logs already read ([`Campaign::read_logs`]),
    /// for callers that need the logs too (the report).
    pub fn merge_logs(&self, logs: &[InspectorLog], tolerance: Option<f64>) -> Merged {
        let adjudicator = self.manifest.adjudicator.clone().or_else(|| {
            logs.iter()
                .any(|l| l.inspector == "adjudicator")
                .then(|| "adjudicator".to_string())
        });
        let opts = MergeOptions {
            tolerance: tolerance.unwrap_or(self.manifest.tolerance),
            adjudicator,
        };
        merge(logs, &opts)
    }

    /// The cached automatic fits by object id (empty when none were
    /// computed); unreadable lines come back as problems.
    pub fn load_fits(&self) -> Result<(BTreeMap<String, FitResult>, Vec<String>), CampaignError> {
        let (records, problems) = self.load_records()?;
        Ok((
            records
                .into_iter()
                .filter_map(|(id, r)| r.fit.map(|f| (id, f)))
                .collect(),
            problems,
        ))
    }

    /// [`Campaign::load_fits`] keeping only each fit's summary
    /// ([`fitcache::summary`]: the best candidate, Δχ², warnings), read line
    /// by line: what status, export and report need, in a few hundred bytes
    /// per object whatever the records hold.
    pub fn load_fit_summaries(&self) -> Result<(BTreeMap<String, FitResult>, Vec<String>), CampaignError> {
        self.load_fit_summaries_with(|_, _| {})
    }

    /// [`Campaign::load_fit_summaries`], showing each whole fit to `each`
    /// first (with its object id) so a caller can keep a small part of what
    /// the summary drops (the export keeps its line columns this way).
    pub fn load_fit_summaries_with(
        &self,
        mut each: impl FnMut(&str, &FitResult),
    ) -> Result<(BTreeMap<String, FitResult>, Vec<String>), CampaignError> {
        let mut out = BTreeMap::new();
        let path = self.dir.join(FITS_FILE);
        let problems = fitcache::scan(&path, |r| {
            if let Some(f) = r.fit {
                each(&r.object_id, &f);
                out.insert(r.object_id, fitcache::summary(f));
            }
        })
        .map_err(io_err(&path))?;
        Ok((out, problems))
    }

    /// How many objects have a cached fit (read line by line, nothing kept),
    /// with the cache's problems.
    pub fn count_fits(&self) -> Result<(usize, Vec<String>), CampaignError> {
        let mut ids = std::collections::HashSet::new();
        let path = self.dir.join(FITS_FILE);
        let problems = fitcache::scan(&path, |r| {
            if r.fit.is_some() {
                ids.insert(r.object_id);
            }
        })
        .map_err(io_err(&path))?;
        Ok((ids.len(), problems))
    }

    /// The ids of the objects with a cached fit (read line by line).
    pub fn fit_ids(&self) -> Result<std::collections::HashSet<String>, CampaignError> {
        let mut out = std::collections::HashSet::new();
        let path = self.dir.join(FITS_FILE);
        fitcache::scan(&path, |r| {
            if r.fit.is_some() {
                out.insert(r.object_id);
            }
        })
        .map_err(io_err(&path))?;
        Ok(out)
    }

    /// The records of the fit cache by object id; unreadable lines (not
    /// UTF-8, not a record) are skipped and come back as problems naming
    /// their line.
    pub fn load_records(&self) -> Result<(BTreeMap<String, FitRecord>, Vec<String>), CampaignError> {
        let mut out = BTreeMap::new();
        let path = self.dir.join(FITS_FILE);
        let problems = fitcache::scan(&path, |r| {
            out.insert(r.object_id.clone(), r);
        })
        .map_err(io_err(&path))?;
        Ok((out, problems))
    }

    /// Store fits in the cache (see [`Campaign::save_records`]); their
    /// records carry the manifest's method and no source.
    pub fn save_fits(&self, fits: &[FitResult]) -> Result<(), CampaignError> {
        let method = match self.manifest.engine.method {
            crate::fit::Method::Chi2 => "chi2",
            crate::fit::Method::XCorr => "xcorr",
        };
        let records: Vec<FitRecord> = fits
            .iter()
            .map(|f| FitRecord::fitted(f.clone(), "", method))
            .collect();
        self.save_records(&records)
    }

    /// Store records with a fit in the cache: objects already there are
    /// replaced, others kept (records without a fit are not cached); the
    /// file is rewritten atomically (see [`Campaign::fold_into_cache`]).
    pub fn save_records(&self, records: &[FitRecord]) -> Result<(), CampaignError> {
        self.fold_into_cache(&|f: &mut dyn FnMut(FitRecord)| {
            records.iter().cloned().for_each(&mut *f);
            Ok(Vec::new())
        })?;
        Ok(())
    }

    /// Fold new records into the cache in one atomic rewrite, streaming:
    /// `new` hands its records to the callback it is given (it is called
    /// twice, so it must give the same records each time, e.g. by reading
    /// files again). The cached records of objects that `new` does not fit
    /// are kept in their order, then the new records with a fit follow in
    /// theirs (the last of an id wins); records without a fit are not
    /// cached. Memory holds the ids of the new records, never the records.
    /// Returns the new records' problems (from the first pass) and the
    /// number of records with a fit taken.
    pub fn fold_into_cache(&self, new: &NewRecords<'_>) -> Result<(usize, Vec<String>), CampaignError> {
        // pass 1: which ids the new records fit, and where each id's last one is
        let mut last: std::collections::HashMap<String, u64> = std::collections::HashMap::new();
        let mut seq = 0u64;
        let problems = new(&mut |r: FitRecord| {
            if r.fit.is_some() {
                last.insert(r.object_id, seq);
            }
            seq += 1;
        })?;
        let path = self.dir.join(FITS_FILE);
        let mut taken = 0usize;
        atomic_write(&path, |w| {
            let mut failed: Option<std::io::Error> = None;
            let put = |r: &FitRecord, w: &mut dyn std::io::Write| -> std::io::Result<()> {
                let line = r.to_json_line().map_err(std::io::Error::other)?;
                w.write_all(line.as_bytes())?;
                w.write_all(b"\n")
            };
            fitcache::scan(&path, |r| {
                if failed.is_none() && r.fit.is_some() && !last.contains_key(&r.object_id) {
                    if let Err(e) = put(&r, w) {
                        failed = Some(e);
                    }
                }
            })?;
            let mut seq = 0u64;
            new(&mut |r: FitRecord| {
                if failed.is_none() && last.get(&r.object_id) == Some(&seq) {
                    match put(&r, w) {
                        Ok(()) => taken += 1,
                        Err(e) => failed = Some(e),
                    }
                }
                seq += 1;
            })
            .map_err(|e| std::io::Error::other(e.to_string()))?;
            failed.map_or(Ok(()), Err)
        })
        .map_err(io_err(&path))?;
        Ok((taken, problems))
    }
}

/// A source of records for [`Campaign::fold_into_cache`]: hands every record
/// to the callback, returns its problems.
pub type NewRecords<'a> = dyn Fn(&mut dyn FnMut(FitRecord)) -> Result<Vec<String>, CampaignError> + 'a;
