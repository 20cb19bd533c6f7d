/*!
Filling a campaign's fit cache from many processes, and from outside.

- [`Campaign::fit_run`] streams the campaign's inputs through the pipeline.
  Whole, its records are written as they come into the run's journal
  `parts/fits.run.jsonl` (flushed record by record) and folded into
  `fits.jsonl` at the end — also when the run is cancelled (Ctrl-C), so the
  objects finished are kept and a later run carries on; after a kill, the
  next run reads the journal left behind and carries on too. Memory holds a
  chunk of spectra and the ids, never all records. As shard K of N (e.g.
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

/// File name (inside [`PARTS_DIR`]) of the journal of a whole (unsharded) run.
pub const RUN_JOURNAL: &str = "fits.run.jsonl";

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
        let mut skip: HashSet<String> = if refit { HashSet::new() } else { self.fit_ids()? };
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads.unwrap_or(0))
            .build()
            .map_err(|e| CampaignError::Other(format!("starting the worker threads: {e}")))?;
        let items = pipeline::stream(files, self.read_options());
        // a shard writes its own part; a whole run its journal, folded in at the end
        let part = match shard {
            Some((k, n)) => self.part_path(k, n),
            None => self.journal_path(),
        };
        if let Some(d) = part.parent() {
            std::fs::create_dir_all(d).map_err(|source| CampaignError::Io {
                path: d.to_path_buf(),
                source,
            })?;
        }
        // a run again carries on after what its part (or a killed run's journal) holds
        if part.exists() {
            let path = part.clone();
            let kept = crate::pipeline::record::for_each_line(
                std::io::BufReader::new(std::fs::File::open(&part).map_err(|source| CampaignError::Io {
                    path: path.clone(),
                    source,
                })?),
                |r| {
                    // with --refit, only what this refit already wrote is skipped
                    if r.fit.is_some() || shard.is_some() {
                        skip.insert(r.object_id);
                    }
                },
            );
            kept.map_err(|source| CampaignError::Io { path, source })?;
        }
        let mut w = RowWriter::create(&part, true)?;
        let opts = RunOptions {
            skip,
            shard,
            unique_ids: true,
        };
        let summary = pool.install(|| {
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
        if shard.is_none() {
            self.fold_into_cache(&|f: &mut dyn FnMut(FitRecord)| read_part(&part, f))?;
            std::fs::remove_file(&part).map_err(|source| CampaignError::Io {
                path: part.clone(),
                source,
            })?;
            // the parts folder goes when nothing else is in it
            if let Some(d) = part.parent() {
                let _ = std::fs::remove_dir(d);
            }
        }
        Ok((summary, problems, failures))
    }

    /// The journal of a whole run (see the module documentation).
    pub fn journal_path(&self) -> PathBuf {
        self.dir().join(PARTS_DIR).join(RUN_JOURNAL)
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
        for p in &parts {
            if let Some((k, n)) = shard_of_name(p) {
                sets.entry(n).or_default().insert(k);
            }
        }
        let fitted = std::cell::Cell::new(0usize);
        let failed = std::cell::Cell::new(0usize);
        let counted = std::cell::Cell::new(false);
        let (_, problems) = self.fold_into_cache(&|f: &mut dyn FnMut(FitRecord)| {
            let mut problems = Vec::new();
            for p in &parts {
                let name = p
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default();
                let found = read_part(p, &mut |r: FitRecord| {
                    if !counted.get() {
                        // counted on the first pass only
                        let c = if r.fit.is_some() { &fitted } else { &failed };
                        c.set(c.get() + 1);
                    }
                    f(r)
                })?;
                problems.extend(found.into_iter().map(|e| format!("{PARTS_DIR}/{name} {e}")));
            }
            counted.set(true);
            Ok(problems)
        })?;
        out.problems.extend(problems);
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
        out.fitted = fitted.get();
        out.failed = failed.get();
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
        let first = std::cell::Cell::new(true);
        let imported = std::cell::Cell::new(0usize);
        let failed = std::cell::Cell::new(0usize);
        let unknown = std::cell::Cell::new(0usize);
        self.fold_into_cache(&|f: &mut dyn FnMut(FitRecord)| {
            let count = first.get();
            let mut take = |r: FitRecord| {
                if !ids.contains(&r.object_id) {
                    if count {
                        unknown.set(unknown.get() + 1);
                    }
                } else if r.fit.is_none() {
                    if count {
                        failed.set(failed.get() + 1);
                    }
                } else {
                    if count {
                        imported.set(imported.get() + 1);
                    }
                    f(r);
                }
            };
            for t in tables {
                if pipeline::table::TableFormat::from_path(t)? == pipeline::table::TableFormat::Jsonl {
                    stream_table(t, &mut take)?;
                } else {
                    pipeline::read_records(t)?.into_iter().for_each(&mut take);
                }
            }
            first.set(false);
            Ok(Vec::new())
        })?;
        out.imported = imported.get();
        out.failed = failed.get();
        out.unknown = unknown.get();
        Ok(out)
    }
}

/// Every record of a part file or journal, line by line (a missing file
/// holds none); its bad lines come back as problems.
fn read_part(path: &Path, f: &mut dyn FnMut(FitRecord)) -> Result<Vec<String>, CampaignError> {
    let io = |source| CampaignError::Io {
        path: path.to_path_buf(),
        source,
    };
    let file = match std::fs::File::open(path) {
        Ok(file) => file,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(io(e)),
    };
    pipeline::record::for_each_line(std::io::BufReader::new(file), f).map_err(io)
}

/// Every record of a JSON Lines result table, line by line; a bad line is
/// an error naming it (as [`pipeline::read_records`] reads such a table). A
/// torn last line (no line end) is not read.
fn stream_table(path: &Path, f: &mut dyn FnMut(FitRecord)) -> Result<(), CampaignError> {
    let file = std::fs::File::open(path).map_err(|source| CampaignError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let mut reader = std::io::BufReader::new(file);
    let mut raw = Vec::new();
    let mut line_no = 0usize;
    loop {
        raw.clear();
        let n = std::io::BufRead::read_until(&mut reader, b'\n', &mut raw).map_err(|source| {
            CampaignError::Io {
                path: path.to_path_buf(),
                source,
            }
        })?;
        if n == 0 || raw.last() != Some(&b'\n') {
            return Ok(());
        }
        line_no += 1;
        let bad = |m: String| {
            CampaignError::Table(pipeline::TableError::Format {
                path: path.to_path_buf(),
                message: format!("line {line_no}: {m}"),
            })
        };
        let line = std::str::from_utf8(&raw[..n - 1]).map_err(|_| bad("not UTF-8 text".into()))?;
        if line.trim().is_empty() {
            continue;
        }
        f(FitRecord::from_json_line(line).map_err(bad)?);
    }
}

/// (K, N) of a part file named `fits.K-of-N.jsonl`.
fn shard_of_name(p: &Path) -> Option<(usize, usize)> {
    let name = p.file_name()?.to_str()?;
    let mid = name.strip_prefix("fits.")?.strip_suffix(".jsonl")?;
    let (k, n) = mid.split_once("-of-")?;
    Some((k.parse().ok()?, n.parse().ok()?))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::{Candidate, FitResult, Warnings};
    use crate::ObjectClass;

    fn rec(id: &str, z: f64) -> FitRecord {
        let fit = FitResult {
            object_id: id.into(),
            candidates: vec![Candidate {
                class: ObjectClass::Galaxy,
                template: "g".into(),
                z,
                z_err: 1e-4,
                chi2: 10.0,
                coeffs: vec![1.0, 2.0],
            }],
            delta_chi2: 50.0,
            chi2_reduced: 1.0,
            n_good: 100,
            snr_median: 5.0,
            warnings: Warnings(0),
            curves: vec![],
            lines: vec![],
            per_class: vec![],
            refit_kept: false,
        };
        FitRecord::fitted(fit, "f.fits", "chi2")
    }

    fn cached(c: &Campaign) -> Vec<(String, f64)> {
        let mut out = Vec::new();
        super::super::fitcache::scan(&c.dir().join(super::super::FITS_FILE), |r| {
            out.push((r.object_id.clone(), r.fit.unwrap().candidates[0].z));
        })
        .unwrap();
        out
    }

    #[test]
    fn folding_keeps_old_fits_replaces_refitted_ones_and_takes_the_last_of_an_id() {
        let dir = tempfile::tempdir().unwrap();
        let spectra = dir.path().join("s");
        std::fs::create_dir_all(&spectra).unwrap();
        let c = Campaign::init(
            &dir.path().join("c"),
            &super::super::InitOptions {
                spectra: vec![spectra],
                ..Default::default()
            },
        )
        .unwrap();
        c.save_records(&[rec("a", 0.1), rec("b", 0.2)]).unwrap();
        assert_eq!(cached(&c), [("a".into(), 0.1), ("b".into(), 0.2)]);
        // a journal left by a run: b refitted, c twice (the last wins), d failed
        let journal = c.journal_path();
        std::fs::create_dir_all(journal.parent().unwrap()).unwrap();
        let mut text = String::new();
        for r in [
            rec("b", 0.25),
            rec("c", 0.3),
            FitRecord::failed("d", "f.fits", "no good pixels"),
            rec("c", 0.35),
        ] {
            text.push_str(&r.to_json_line().unwrap());
            text.push('\n');
        }
        // a torn last line, as a killed writer leaves it, is named and not taken
        text.push_str("{\"v\":2,\"object_id\":\"e\",\"cand");
        std::fs::write(&journal, text).unwrap();
        let (taken, problems) = c
            .fold_into_cache(&|f: &mut dyn FnMut(FitRecord)| read_part(&journal, f))
            .unwrap();
        assert_eq!(taken, 2);
        assert_eq!(problems.len(), 1, "{problems:?}");
        assert_eq!(
            cached(&c),
            [("a".into(), 0.1), ("b".into(), 0.25), ("c".into(), 0.35)]
        );
        // the cache read line by line keeps only the summary of each fit
        let (sums, _) = c.load_fit_summaries().unwrap();
        assert_eq!(sums.len(), 3);
        assert!(sums
            .values()
            .all(|f| f.candidates.len() == 1 && f.candidates[0].coeffs.is_empty()));
        assert_eq!(c.fit_ids().unwrap().len(), 3);
    }
}
