/*!
Filling a campaign's fit cache from many processes, and from outside.

- [`Campaign::fit_run`] streams the campaign's inputs through the pipeline.
  Whole, its records go into `fits.jsonl` at the end. As shard K of N (e.g.
  one task of a batch scheduler's job array), it writes only its own part
  file `parts/fits.K-of-N.jsonl`, record by record and flushed; no two shards
  touch the same file, so N tasks may run at once, and a shard run again
  carries on where it stopped.
- [`Campaign::collect_parts`] joins every part into `fits.jsonl` (one atomic
  rewrite) and removes the parts it took; it says which shards of an N are
  missing.
- [`Campaign::import_tables`] takes the records of `zvet fit` outputs (JSON
  Lines in full; CSV and FITS tables give their summary) for the campaign's
  objects.
*/
use super::{Campaign, CampaignError};
use crate::pipeline::{self, FitRecord, RowWriter, RunOptions, Summary};
use std::collections::{BTreeMap, BTreeSet, HashSet};
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

/// Folder of the shard part files inside a campaign.
pub const PARTS_DIR: &str = "parts";

/// What [`Campaign::collect_parts`] did.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct CollectSummary {
    /// Part files read (and removed).
    pub parts: usize,
    /// Records with a fit taken into the cache.
    pub fitted: usize,
    /// Records of objects that could not be fitted (not cached).
    pub failed: usize,
    /// Bad lines, and shards missing from a set of N.
    pub problems: Vec<String>,
}

/// What [`Campaign::import_tables`] did.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct ImportSummary {
    /// Records with a fit taken into the cache.
    pub imported: usize,
    /// Records of objects that could not be fitted (not cached).
    pub failed: usize,
    /// Records whose id is not an object of the campaign (left out).
    pub unknown: usize,
}

impl Campaign {
    /// The part file of shard `k` of `n`.
    pub fn part_path(&self, k: usize, n: usize) -> PathBuf {
        self.dir().join(PARTS_DIR).join(format!("fits.{k}-of-{n}.jsonl"))
    }

    /// Fit the campaign's objects through the pipeline: those without a
    /// cached fit (all with `refit`); with `shard = (k, n)` only the k-th of
    /// every n distinct objects, into the shard's part file. Returns the
    /// counts, the input problems (which should end the run in failure;
    /// notes start with `note: `) and the objects that could not be fitted
    /// (`id: reason`).
    pub fn fit_run(
        &self,
        shard: Option<(usize, usize)>,
        refit: bool,
        threads: Option<usize>,
        progress: &(dyn Fn(usize) + Sync),
        cancel: Option<&AtomicBool>,
    ) -> Result<(Summary, Vec<String>, Vec<String>), CampaignError> {
        let engine = self.engine()?;
        let mut failures = Vec::new();
        let mut note = |r: &FitRecord| {
            if r.fit.is_none() {
                failures.push(format!("{}: {}", r.object_id, r.error));
            }
        };
        let (files, problems) = self.input_files();
        let mut skip: HashSet<String> = if refit {
            HashSet::new()
        } else {
            self.load_records()?.0.into_keys().collect()
        };
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads.unwrap_or(0))
            .build()
            .map_err(|e| CampaignError::Other(format!("starting the worker threads: {e}")))?;
        let items = pipeline::stream(files, self.read_options());
        let summary = match shard {
            Some((k, n)) => {
                let part = self.part_path(k, n);
                if let Some(d) = part.parent() {
                    std::fs::create_dir_all(d).map_err(|source| CampaignError::Io {
                        path: d.to_path_buf(),
                        source,
                    })?;
                }
                // a shard run again carries on after what its part holds
                if part.exists() {
                    skip.extend(pipeline::read_records(&part)?.into_iter().map(|r| r.object_id));
                }
                let mut w = RowWriter::create(&part, true)?;
                let opts = RunOptions {
                    skip,
                    shard,
                    unique_ids: true,
                };
                let s = pool.install(|| {
                    pipeline::fit_stream(
                        &engine,
                        items,
                        &opts,
                        |r| {
                            note(&r);
                            w.write(&r)
                        },
                        progress,
                        cancel,
                    )
                })?;
                w.finish()?;
                s
            }
            None => {
                let opts = RunOptions {
                    skip,
                    shard: None,
                    unique_ids: true,
                };
                let mut records = Vec::new();
                let s = pool.install(|| {
                    pipeline::fit_stream(
                        &engine,
                        items,
                        &opts,
                        |r| {
                            note(&r);
                            records.push(r);
                            Ok::<(), CampaignError>(())
                        },
                        progress,
                        cancel,
                    )
                })?;
                self.save_records(&records)?;
                s
            }
        };
        Ok((summary, problems, failures))
    }

    /// The part files in `parts/`, sorted.
    pub fn part_files(&self) -> Result<Vec<PathBuf>, CampaignError> {
        let d = self.dir().join(PARTS_DIR);
        let rd = match std::fs::read_dir(&d) {
            Ok(rd) => rd,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
            Err(source) => return Err(CampaignError::Io { path: d, source }),
        };
        let mut v: Vec<PathBuf> = rd
            .filter_map(|e| e.ok())
            .filter(|e| e.file_type().is_ok_and(|t| t.is_file()))
            .map(|e| e.path())
            .filter(|p| p.extension().is_some_and(|x| x == "jsonl"))
            .collect();
        v.sort();
        Ok(v)
    }

    /// Join every shard part into the fit cache and remove the parts.
    pub fn collect_parts(&self) -> Result<CollectSummary, CampaignError> {
        let parts = self.part_files()?;
        let mut out = CollectSummary {
            parts: parts.len(),
            ..Default::default()
        };
        // which shards of each N are there
        let mut sets: BTreeMap<usize, BTreeSet<usize>> = BTreeMap::new();
        let mut records: Vec<FitRecord> = Vec::new();
        for p in &parts {
            if let Some((k, n)) = shard_of_name(p) {
                sets.entry(n).or_default().insert(k);
            }
            let bytes = std::fs::read(p).map_err(|source| CampaignError::Io {
                path: p.clone(),
                source,
            })?;
            let (recs, problems) = pipeline::record::parse_lines(&bytes);
            let name = p
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default();
            out.problems
                .extend(problems.into_iter().map(|e| format!("{PARTS_DIR}/{name} {e}")));
            records.extend(recs);
        }
        for (n, ks) in &sets {
            let missing: Vec<String> = (1..=*n)
                .filter(|k| !ks.contains(k))
                .map(|k| k.to_string())
                .collect();
            if !missing.is_empty() {
                out.problems.push(format!(
                    "no part from shard(s) {} of {n}: run them, then collect again",
                    missing.join(", ")
                ));
            }
        }
        out.fitted = records.iter().filter(|r| r.fit.is_some()).count();
        out.failed = records.len() - out.fitted;
        self.save_records(&records)?;
        for p in &parts {
            std::fs::remove_file(p).map_err(|source| CampaignError::Io {
                path: p.clone(),
                source,
            })?;
        }
        Ok(out)
    }

    /// Take the records of result tables written by `zvet fit` into the fit
    /// cache, for the objects of this campaign.
    pub fn import_tables(&self, tables: &[PathBuf]) -> Result<ImportSummary, CampaignError> {
        let (files, _) = self.input_files();
        let ids: HashSet<String> = pipeline::stream(files, self.read_options())
            .map(|item| match item {
                Ok(s) => s.meta.id,
                Err(f) => f.object_id,
            })
            .collect();
        let mut out = ImportSummary::default();
        let mut keep = Vec::new();
        for t in tables {
            for r in pipeline::read_records(t)? {
                if !ids.contains(&r.object_id) {
                    out.unknown += 1;
                } else if r.fit.is_none() {
                    out.failed += 1;
                } else {
                    out.imported += 1;
                    keep.push(r);
                }
            }
        }
        self.save_records(&keep)?;
        Ok(out)
    }
}

/// (K, N) of a part file named `fits.K-of-N.jsonl`.
fn shard_of_name(p: &Path) -> Option<(usize, usize)> {
    let name = p.file_name()?.to_str()?;
    let mid = name.strip_prefix("fits.")?.strip_suffix(".jsonl")?;
    let (k, n) = mid.split_once("-of-")?;
    Some((k.parse().ok()?, n.parse().ok()?))
}
