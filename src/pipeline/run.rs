/*!
Fitting a stream of objects in parallel: rayon over chunks, records handed
on in input order as each chunk finishes (so an interrupted run keeps all
finished chunks), with shards, ids to skip, progress and cancellation.
*/
use super::read::{source_of, Item};
use super::record::FitRecord;
use crate::fit::{Engine, FitResult, Method};
use crate::spectrum::Spectrum;
use rayon::prelude::*;
use std::collections::HashSet;
use std::sync::atomic::{AtomicBool, Ordering};

/// How many objects are fitted in parallel before their records are handed on.
pub const CHUNK: usize = 256;

/// Counts of a run.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Summary {
    /// Records with a fit.
    pub fitted: usize,
    /// Records with an error.
    pub failed: usize,
    /// Objects skipped because their id was in the skip list.
    pub skipped: usize,
    /// Objects left to other shards.
    pub other_shards: usize,
    /// Objects passed over because their id came earlier in the stream.
    pub repeated: usize,
    /// The run was cancelled before the end of the stream.
    pub cancelled: bool,
}

/// What to fit of a stream.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// Ids not to fit (already done).
    pub skip: HashSet<String>,
    /// Only shard K of N: objects whose running index i (from 0) has
    /// i mod N == K − 1.
    pub shard: Option<(usize, usize)>,
    /// Fit only the first object of each id (campaigns); the running index
    /// of a shard then counts distinct ids.
    pub unique_ids: bool,
}

/// The method's name in records.
pub fn method_name(engine: &Engine) -> &'static str {
    match engine.config().method {
        Method::Chi2 => "chi2",
        Method::XCorr => "xcorr",
    }
}

/// Fit one spectrum; a panic inside the engine becomes an error rather than
/// the end of the run.
pub fn fit_spectrum(engine: &Engine, s: &Spectrum) -> Result<FitResult, String> {
    match std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| engine.fit(s))) {
        Ok(r) => r.map_err(|e| e.to_string()),
        Err(_) => Err("the fit stopped with an internal error".into()),
    }
}

/// The record of `s` fitted (or not) as `result` says.
pub fn record_of(s: &Spectrum, result: Result<FitResult, String>, method: &str) -> FitRecord {
    match result {
        Ok(r) => FitRecord::fitted(r, &source_of(s), method),
        Err(e) => FitRecord::failed(&s.meta.id, &source_of(s), &e),
    }
}

/// Fit `items` with `engine` on the current rayon pool and hand every record
/// to `sink` in input order. `progress` is told how many objects are done
/// after each chunk; `cancel` stops the run after the chunk in hand.
pub fn fit_stream<E>(
    engine: &Engine,
    items: impl Iterator<Item = Item>,
    opts: &RunOptions,
    mut sink: impl FnMut(FitRecord) -> Result<(), E>,
    progress: &(dyn Fn(usize) + Sync),
    cancel: Option<&AtomicBool>,
) -> Result<Summary, E> {
    let mut summary = Summary::default();
    let mut chunk: Vec<Item> = Vec::with_capacity(CHUNK);
    let mut done = 0usize;
    let mut flush = |chunk: &mut Vec<Item>, summary: &mut Summary| -> Result<(), E> {
        let records: Vec<FitRecord> = chunk
            .par_drain(..)
            .map(|item| match item {
                Err(f) => FitRecord::failed(&f.object_id, &f.source, &f.message),
                Ok(s) => record_of(&s, fit_spectrum(engine, &s), method_name(engine)),
            })
            .collect();
        for r in records {
            if r.fit.is_some() {
                summary.fitted += 1;
            } else {
                summary.failed += 1;
            }
            done += 1;
            sink(r)?;
        }
        progress(done);
        Ok(())
    };
    let mut seen = HashSet::new();
    let mut index = 0usize;
    for item in items {
        if cancel.is_some_and(|c| c.load(Ordering::Relaxed)) {
            summary.cancelled = true;
            break;
        }
        let id = match &item {
            Ok(s) => &s.meta.id,
            Err(f) => &f.object_id,
        };
        if opts.unique_ids && !seen.insert(id.clone()) {
            summary.repeated += 1;
            continue;
        }
        let i = index;
        index += 1;
        if let Some((k, n)) = opts.shard {
            if i % n != k - 1 {
                summary.other_shards += 1;
                continue;
            }
        }
        if opts.skip.contains(id) {
            summary.skipped += 1;
            continue;
        }
        chunk.push(item);
        if chunk.len() >= CHUNK {
            flush(&mut chunk, &mut summary)?;
        }
    }
    flush(&mut chunk, &mut summary)?;
    Ok(summary)
}

/// Fit every spectrum of `spectra` (in memory) in parallel; the results in
/// the same order.
pub fn fit_all(engine: &Engine, spectra: &[&Spectrum]) -> Vec<Result<FitResult, String>> {
    spectra.par_iter().map(|s| fit_spectrum(engine, s)).collect()
}
