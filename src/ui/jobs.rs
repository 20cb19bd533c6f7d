/*!
Fits in the background. A few worker threads take jobs from a shared queue
(the selected object jumps to the front), run the engine, and send results
back over a channel; each result asks the window to repaint, so the window
never waits on a fit. Dropping [`Jobs`] stops the workers after their current job.

Cached fits (a campaign's `fits.jsonl`) come without χ²(z) curves: the
window asks for the curves of the object it shows and of the next few in the
list ([`CURVE_PREFETCH`]) only, so opening a fitted campaign costs no refit.
Automatic fits made here for a campaign are written back to its cache
([`WriteBack`]), in batches and off the window's thread.
*/
use crate::campaign::Campaign;
use crate::fit::{Candidate, Engine, FitResult};
use crate::pipeline::FitRecord;
use crate::store::ObjectReader;
use crate::{ObjectClass, Spectrum};
use std::collections::{HashSet, VecDeque};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::mpsc::{channel, Receiver, Sender};
use std::sync::{Arc, Condvar, Mutex, OnceLock};

/// The engine as the window uses it (a trait so tests may pass a stand-in).
pub trait Fitter: Send + Sync {
    /// Full automatic fit.
    fn fit(&self, s: &Spectrum) -> Result<FitResult, String>;
    /// Fit restricted to |Δv| ≤ `half_width_kms` around `z`.
    fn refit_near(
        &self,
        s: &Spectrum,
        z: f64,
        class: Option<ObjectClass>,
        half_width_kms: f64,
    ) -> Result<FitResult, String>;
    /// Model flux at the spectrum's wavelengths (NaN where not covered).
    fn model(&self, s: &Spectrum, c: &Candidate) -> Vec<f64>;
    /// The templates that can be laid over a spectrum (none by default).
    fn overlay_templates(&self) -> Vec<crate::fit::OverlayTemplate> {
        Vec::new()
    }
    /// Template `t` fitted at `z` (amplitude and continuum), as model flux.
    fn overlay(&self, _s: &Spectrum, _t: &crate::fit::OverlayTemplate, _z: f64) -> Result<Vec<f64>, String> {
        Err("this engine offers no template overlays".into())
    }
}

impl Fitter for Engine {
    fn fit(&self, s: &Spectrum) -> Result<FitResult, String> {
        Engine::fit(self, s).map_err(|e| e.to_string())
    }
    fn refit_near(
        &self,
        s: &Spectrum,
        z: f64,
        class: Option<ObjectClass>,
        half_width_kms: f64,
    ) -> Result<FitResult, String> {
        Engine::refit_near(self, s, z, class, half_width_kms).map_err(|e| e.to_string())
    }
    fn model(&self, s: &Spectrum, c: &Candidate) -> Vec<f64> {
        Engine::model(self, s, c)
    }
    fn overlay_templates(&self) -> Vec<crate::fit::OverlayTemplate> {
        Engine::overlay_templates(self)
    }
    fn overlay(&self, s: &Spectrum, t: &crate::fit::OverlayTemplate, z: f64) -> Result<Vec<f64>, String> {
        Engine::overlay(self, s, t, z)
            .map(|o| o.model)
            .map_err(|e| e.to_string())
    }
}

/// What a job does.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum JobKind {
    /// The automatic fit.
    Fit,
    /// The χ²(z) curves of an object whose fit came from the cache (the
    /// whole automatic fit, of which the window keeps the curves).
    Curves,
    /// A refit near `z`.
    RefitNear {
        /// Centre.
        z: f64,
        /// Class, or all.
        class: Option<ObjectClass>,
    },
}

/// A finished job.
#[derive(Debug)]
pub struct JobDone {
    /// Object index.
    pub index: usize,
    /// What was done.
    pub kind: JobKind,
    /// The fit, or why it failed.
    pub result: Result<FitResult, String>,
    /// Where the spectrum came from (`file[hdu=…,row=…]`; empty when it
    /// could not be read).
    pub source: String,
}

/// Half-width of the "refit near here" window (km/s). About ±0.007 in z at
/// z = 0: wide enough for a hand-placed z, narrow enough to stay on one feature.
pub const REFIT_HALF_WIDTH_KMS: f64 = 2000.0;

/// How many objects after the shown one get their χ²(z) curves ahead of time
/// (they are read ahead too, see [`crate::store::PREFETCH`]).
pub const CURVE_PREFETCH: usize = crate::store::PREFETCH;

/// At most this many objects keep their χ²(z) curves in memory: those held
/// whole by the store's cache (a curve set of the built-in templates is of
/// the order of a megabyte). An object whose curves were dropped gets them
/// again when it is shown.
pub const CURVE_CACHE: usize = crate::store::CACHE;

/// Automatic fits written back per batch (a batch is also written when the
/// background fits are done).
pub const WRITE_BACK_BATCH: usize = 64;

struct Shared {
    queue: Mutex<VecDeque<(usize, JobKind)>>,
    curves_asked: Mutex<HashSet<usize>>,
    wake: Condvar,
    stop: AtomicBool,
    done: AtomicUsize,
    /// Automatic fits given up (cancelled before they ran).
    dropped: AtomicUsize,
    /// Jobs taken by a worker and not yet sent back.
    active: AtomicUsize,
}

/// The worker pool and its result channel.
pub struct Jobs {
    shared: Arc<Shared>,
    rx: Receiver<JobDone>,
    total: usize,
    started: std::time::Instant,
    repaint: Arc<OnceLock<egui::Context>>,
}

/// Where the automatic fits stand (for the progress display).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitProgress {
    /// Fits done.
    pub done: usize,
    /// Fits asked for (less those cancelled).
    pub total: usize,
    /// Fits per second since they started.
    pub rate: f64,
    /// Seconds left at that rate (None before the first fit).
    pub left_s: Option<f64>,
}

impl Jobs {
    /// Start workers fitting `todo` (object indices) in that order.
    pub fn start(fitter: Arc<dyn Fitter>, objects: ObjectReader, todo: Vec<usize>) -> Jobs {
        let shared = Arc::new(Shared {
            queue: Mutex::new(todo.iter().map(|&i| (i, JobKind::Fit)).collect()),
            curves_asked: Mutex::new(HashSet::new()),
            wake: Condvar::new(),
            stop: AtomicBool::new(false),
            done: AtomicUsize::new(0),
            dropped: AtomicUsize::new(0),
            active: AtomicUsize::new(0),
        });
        let (tx, rx) = channel();
        let repaint: Arc<OnceLock<egui::Context>> = Arc::new(OnceLock::new());
        // Leave one core to the window itself.
        let n = std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(2)
            .saturating_sub(1)
            .max(1);
        for k in 0..n {
            let (shared, tx, fitter, objects, repaint) = (
                shared.clone(),
                tx.clone(),
                fitter.clone(),
                objects.clone(),
                repaint.clone(),
            );
            let spawned = std::thread::Builder::new()
                .name(format!("zvet-fit-{k}"))
                .spawn(move || worker(&shared, &tx, &*fitter, &objects, &repaint));
            if spawned.is_err() && k == 0 {
                // No thread at all: results will never come; the window says so
                // through `progress` staying at zero rather than crashing.
                break;
            }
        }
        Jobs {
            shared,
            rx,
            total: todo.len(),
            started: std::time::Instant::now(),
            repaint,
        }
    }

    /// Let workers wake the window when a result is ready.
    pub fn set_repaint(&self, ctx: &egui::Context) {
        let _ = self.repaint.set(ctx.clone());
    }

    /// Move the automatic fit of `index` to the front, if it is still waiting.
    pub fn prioritize(&self, index: usize) {
        let mut q = lock(&self.shared.queue);
        if let Some(p) = q
            .iter()
            .position(|(i, k)| *i == index && matches!(k, JobKind::Fit))
        {
            if let Some(job) = q.remove(p) {
                q.push_front(job);
            }
        }
    }

    /// Ask for the χ²(z) curves of `shown` ahead of everything waiting, and
    /// of `next` after the automatic fits; an object asked for before is not
    /// asked for again.
    pub fn want_curves(&self, shown: Option<usize>, next: &[usize]) {
        let mut asked = lock(&self.shared.curves_asked);
        let mut q = lock(&self.shared.queue);
        if let Some(i) = shown.filter(|&i| asked.insert(i)) {
            q.push_front((i, JobKind::Curves));
        }
        for &i in next {
            if asked.insert(i) {
                q.push_back((i, JobKind::Curves));
            }
        }
        drop(q);
        self.shared.wake.notify_all();
    }

    /// Let the curves of `index` be asked for again (they were dropped).
    pub fn forget_curves(&self, index: usize) {
        lock(&self.shared.curves_asked).remove(&index);
    }

    /// Ask for a refit of `index` near `z` (first in line).
    pub fn refit(&self, index: usize, z: f64, class: Option<ObjectClass>) {
        lock(&self.shared.queue).push_front((index, JobKind::RefitNear { z, class }));
        self.shared.wake.notify_one();
    }

    /// Results that arrived since the last call.
    pub fn poll(&self) -> Vec<JobDone> {
        self.rx.try_iter().collect()
    }

    /// (automatic fits done, automatic fits asked for and not cancelled).
    pub fn progress(&self) -> (usize, usize) {
        (
            self.shared.done.load(Ordering::Relaxed),
            self.total - self.shared.dropped.load(Ordering::Relaxed),
        )
    }

    /// Progress with its rate and the time left.
    pub fn fit_progress(&self) -> FitProgress {
        let (done, total) = self.progress();
        let secs = self.started.elapsed().as_secs_f64().max(1e-3);
        let rate = done as f64 / secs;
        FitProgress {
            done,
            total,
            rate,
            left_s: (done > 0 && rate > 0.0).then(|| total.saturating_sub(done) as f64 / rate),
        }
    }

    /// Give up the automatic fits that have not started (those running
    /// finish); curves and refits asked for stay. Returns how many were dropped.
    pub fn cancel_fits(&self) -> usize {
        let mut q = lock(&self.shared.queue);
        let before = q.len();
        q.retain(|(_, k)| !matches!(k, JobKind::Fit));
        let n = before - q.len();
        self.shared.dropped.fetch_add(n, Ordering::Relaxed);
        n
    }

    /// True while automatic fits are outstanding.
    pub fn busy(&self) -> bool {
        let (d, t) = self.progress();
        d < t
    }

    /// True when no job of any kind (fit, curves, refit) waits or runs.
    pub fn idle(&self) -> bool {
        let q = lock(&self.shared.queue);
        q.is_empty() && self.shared.active.load(Ordering::SeqCst) == 0
    }
}

impl Drop for Jobs {
    fn drop(&mut self) {
        self.shared.stop.store(true, Ordering::Relaxed);
        lock(&self.shared.queue).clear();
        self.shared.wake.notify_all();
    }
}

fn lock<T>(m: &Mutex<T>) -> std::sync::MutexGuard<'_, T> {
    // A worker that panicked mid-fit leaves the queue itself consistent.
    m.lock().unwrap_or_else(|e| e.into_inner())
}

fn worker(
    shared: &Shared,
    tx: &Sender<JobDone>,
    fitter: &dyn Fitter,
    objects: &ObjectReader,
    repaint: &OnceLock<egui::Context>,
) {
    loop {
        let job = {
            let mut q = lock(&shared.queue);
            loop {
                if shared.stop.load(Ordering::Relaxed) {
                    return;
                }
                if let Some(j) = q.pop_front() {
                    // counted while the queue is locked, so `idle` never
                    // sees a job that is neither queued nor active
                    shared.active.fetch_add(1, Ordering::SeqCst);
                    break j;
                }
                q = shared.wake.wait(q).unwrap_or_else(|e| e.into_inner());
            }
        };
        let (index, kind) = job;
        if index >= objects.len() {
            shared.active.fetch_sub(1, Ordering::SeqCst);
            continue;
        }
        // the spectrum: the curves of an object about to be shown go
        // through the store's cache (they are read ahead), other work reads
        // it on its own
        let spectrum = match kind {
            JobKind::Curves => objects.load(index).map(|e| e.spectrum.clone()),
            _ => objects.spectrum(index),
        };
        let source = spectrum
            .as_ref()
            .map(crate::pipeline::source_of)
            .unwrap_or_default();
        // A panic inside the engine must not take the window down: report it.
        let result = spectrum.and_then(|s| {
            std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| match kind {
                JobKind::Fit | JobKind::Curves => fitter.fit(&s),
                JobKind::RefitNear { z, class } => fitter.refit_near(&s, z, class, REFIT_HALF_WIDTH_KMS),
            }))
            .unwrap_or_else(|_| Err("the fit stopped with an internal error".to_string()))
        });
        if matches!(kind, JobKind::Fit) {
            shared.done.fetch_add(1, Ordering::Relaxed);
        }
        let sent = tx.send(JobDone {
            index,
            kind,
            result,
            source,
        });
        shared.active.fetch_sub(1, Ordering::SeqCst);
        if sent.is_err() {
            return;
        }
        if let Some(ctx) = repaint.get() {
            ctx.request_repaint();
        }
    }
}

/// Where automatic fits made in the window go: the open campaign's cache.
#[derive(Default)]
pub struct WriteBack {
    campaign: Option<Campaign>,
    method: String,
    pending: Vec<FitRecord>,
    writing: Arc<Mutex<()>>,
    errors: Arc<Mutex<Vec<String>>>,
}

impl WriteBack {
    /// Write fits to `campaign`'s cache from now on (`None`: nowhere, e.g.
    /// loose files, or an engine other than the campaign's).
    pub fn set(&mut self, campaign: Option<Campaign>) {
        self.method = campaign
            .as_ref()
            .map(|c| match c.manifest().engine.method {
                crate::fit::Method::Chi2 => "chi2".to_string(),
                crate::fit::Method::XCorr => "xcorr".to_string(),
            })
            .unwrap_or_default();
        self.campaign = campaign;
        self.pending.clear();
    }

    /// Keep `fit` of the spectrum read from `source` for the next write.
    pub fn add(&mut self, source: &str, fit: &FitResult) {
        if self.campaign.is_some() {
            self.pending
                .push(FitRecord::fitted(fit.clone(), source, &self.method));
        }
    }

    /// Write what is kept when there is a batch, or anything when `all`, on
    /// a thread of its own (one write at a time).
    pub fn flush(&mut self, all: bool) {
        if self.pending.is_empty() || !(all || self.pending.len() >= WRITE_BACK_BATCH) {
            return;
        }
        let Some(campaign) = self.campaign.clone() else {
            return;
        };
        let records = std::mem::take(&mut self.pending);
        let (writing, errors) = (self.writing.clone(), self.errors.clone());
        let _ = std::thread::Builder::new()
            .name("zvet-fit-cache".into())
            .spawn(move || {
                let _one = lock(&writing);
                if let Err(e) = campaign.save_records(&records) {
                    lock(&errors).push(format!("writing fits to the campaign cache: {e}"));
                }
            });
    }

    /// Errors of earlier writes (taken).
    pub fn take_errors(&self) -> Vec<String> {
        std::mem::take(&mut *lock(&self.errors))
    }

    /// Wait for the write in progress, if any (tests).
    pub fn wait(&self) {
        drop(lock(&self.writing));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::{Candidate, FitResult, Warnings};
    use std::time::{Duration, Instant};

    /// A stand-in engine: the "fit" puts z = the spectrum's first flux value.
    struct Echo;

    fn result(s: &Spectrum, z: f64) -> FitResult {
        FitResult {
            object_id: s.meta.id.clone(),
            candidates: vec![Candidate {
                class: ObjectClass::Galaxy,
                template: "echo".into(),
                z,
                z_err: 0.0,
                chi2: 1.0,
                coeffs: vec![],
            }],
            delta_chi2: 1.0,
            chi2_reduced: 1.0,
            n_good: s.n_good(),
            snr_median: 1.0,
            warnings: Warnings::default(),
            curves: vec![],
            lines: vec![],
            per_class: vec![],
            refit_kept: false,
        }
    }

    impl Fitter for Echo {
        fn fit(&self, s: &Spectrum) -> Result<FitResult, String> {
            if s.flux()[0] < 0.0 {
                panic!("a bad spectrum");
            }
            Ok(result(s, s.flux()[0]))
        }
        fn refit_near(
            &self,
            s: &Spectrum,
            z: f64,
            _class: Option<ObjectClass>,
            _hw: f64,
        ) -> Result<FitResult, String> {
            Ok(result(s, z))
        }
        fn model(&self, s: &Spectrum, _c: &Candidate) -> Vec<f64> {
            vec![0.0; s.len()]
        }
    }

    fn objects(values: &[f64]) -> ObjectReader {
        let objects: Vec<crate::campaign::SurveyObject> = values
            .iter()
            .enumerate()
            .map(|(i, &v)| crate::campaign::SurveyObject {
                spectrum: Spectrum::new(
                    vec![1.0, 2.0],
                    vec![v, v],
                    None,
                    None,
                    crate::spectrum::SpectrumMeta {
                        id: format!("o{i}"),
                        ..Default::default()
                    },
                )
                .unwrap(),
                catalog: None,
                fit: None,
            })
            .collect();
        crate::store::ObjectStore::in_memory(objects).store.reader()
    }

    fn collect(jobs: &Jobs, want: usize) -> Vec<JobDone> {
        let start = Instant::now();
        let mut out = Vec::new();
        while out.len() < want && start.elapsed() < Duration::from_secs(30) {
            out.extend(jobs.poll());
            std::thread::sleep(Duration::from_millis(5));
        }
        out
    }

    #[test]
    fn every_object_is_fitted_and_a_panic_becomes_an_error() {
        let jobs = Jobs::start(Arc::new(Echo), objects(&[0.1, -1.0, 0.3]), vec![0, 1, 2]);
        let mut done = collect(&jobs, 3);
        done.sort_by_key(|d| d.index);
        assert_eq!(done.len(), 3);
        assert!((done[0].result.as_ref().unwrap().candidates[0].z - 0.1).abs() < 1e-12);
        assert!(done[1].result.is_err());
        assert_eq!(jobs.progress(), (3, 3));
        assert!(!jobs.busy());
    }

    #[test]
    fn refits_come_back_with_their_window_centre() {
        let jobs = Jobs::start(Arc::new(Echo), objects(&[0.1]), vec![]);
        jobs.refit(0, 1.25, None);
        let done = collect(&jobs, 1);
        assert!(matches!(done[0].kind, JobKind::RefitNear { .. }));
        assert!((done[0].result.as_ref().unwrap().candidates[0].z - 1.25).abs() < 1e-12);
    }
}
