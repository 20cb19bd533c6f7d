/*!
Objects on demand, for the review window: what it keeps of every object is a
summary (id, catalogue row, S/N — and, held by the window, the summary of its
fit: best class, z, σz, Δχ², warnings), a few hundred bytes; the spectrum and
the full fit record of an object are read when the object is shown, through a
small least-recently-used cache ([`CACHE`] objects) that a background thread
fills ahead of the inspector with the next few objects of the list.

Where each object is read from:
- a spectrum: its input file and its place in the file's stream of objects
  (a multi-object table's row, a frame's row, an HDU; see
  [`crate::io::list_objects`] and [`crate::io::read_object`]), found at open
  time by reading only the id columns;
- a cached fit: its byte range in the campaign's `fits.jsonl`, through a
  handle opened when the index was built (a later atomic rewrite of the cache
  replaces the file by a rename; the handle keeps reading the indexed one);
- a fit made in the window: its line in a temporary file of the store's own
  (the fit also goes to the campaign's cache, but the window keeps only its
  summary in memory).

The built-in demo and tests keep their objects in memory behind the same
interface ([`ObjectStore::in_memory`]).

A read that fails (a file gone or damaged since the open, a changed file that
no longer holds the object at its place) comes back as a message naming the
object; nothing panics and nothing is written.
*/
use crate::campaign::{fitcache, Campaign, CampaignError, SurveyObject, FITS_FILE};
use crate::catalog::CatalogRow;
use crate::fit::FitResult;
use crate::io::ReadOptions;
use crate::pipeline::FitRecord;
use crate::Spectrum;
use std::collections::{HashMap, VecDeque};
use std::fs::File;
use std::io::{BufRead, Read, Seek, SeekFrom, Write};
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Instant;

/// Objects held whole (spectrum and full fit) at most.
pub const CACHE: usize = 16;

/// How many objects after the shown one are read ahead of time.
pub const PREFETCH: usize = 3;

/// What the window keeps of every object.
#[derive(Debug, Clone, PartialEq)]
pub struct Summary {
    /// Object id.
    pub id: String,
    /// The photometric catalogue row, if the id matched.
    pub catalog: Option<CatalogRow>,
    /// Median per-pixel S/N of the spectrum (NaN until known: from the fit).
    pub snr: f64,
}

impl Summary {
    /// The object id.
    pub fn id(&self) -> &str {
        &self.id
    }
}

/// An object read whole.
#[derive(Debug, Clone)]
pub struct Entry {
    /// The spectrum.
    pub spectrum: Spectrum,
    /// Its full automatic fit (curves when computed since), if any.
    pub fit: Option<FitResult>,
    /// The fit record could not be read (the spectrum could).
    pub problem: Option<String>,
}

impl Entry {
    /// Bytes held by the entry's arrays (spectrum and fit curves), roughly.
    pub fn bytes(&self) -> usize {
        let s = &self.spectrum;
        let arrays = 4 + usize::from(s.sky().is_some());
        let curves: usize = self
            .fit
            .iter()
            .flat_map(|f| &f.curves)
            .map(|c| (c.z.len() + c.chi2.len()) * 8)
            .sum();
        s.len() * 8 * arrays + curves
    }
}

enum SpecAt {
    Memory(Arc<Spectrum>),
    File { file: u32, item: u32 },
}

#[derive(Debug, Clone)]
enum FitAt {
    None,
    Memory(Arc<FitResult>),
    Cache { offset: u64, len: u32 },
    Spill { offset: u64, len: u32 },
}

#[derive(Default)]
struct Lru {
    order: VecDeque<usize>,
    map: HashMap<usize, Arc<Entry>>,
    evicted: Vec<usize>,
}

impl Lru {
    fn get(&mut self, i: usize) -> Option<Arc<Entry>> {
        let e = self.map.get(&i)?.clone();
        self.order.retain(|&k| k != i);
        self.order.push_back(i);
        Some(e)
    }

    fn put(&mut self, i: usize, e: Arc<Entry>) {
        self.map.insert(i, e);
        self.order.retain(|&k| k != i);
        self.order.push_back(i);
        while self.order.len() > CACHE {
            if let Some(old) = self.order.pop_front() {
                self.map.remove(&old);
                self.evicted.push(old);
            }
        }
    }
}

struct Spill {
    file: File,
    end: u64,
}

#[derive(Default)]
struct Prefetch {
    want: VecDeque<usize>,
    running: bool,
}

/// Spectrum files kept open (their layout checked once) at most.
const OPEN_FILES: usize = 4;

/// What tells a file changed since it was opened: length, modification
/// time, inode.
type Stamp = (u64, Option<std::time::SystemTime>, u64);

fn stamp(path: &std::path::Path) -> std::io::Result<Stamp> {
    let m = std::fs::metadata(path)?;
    #[cfg(unix)]
    let ino = std::os::unix::fs::MetadataExt::ino(&m);
    #[cfg(not(unix))]
    let ino = 0;
    Ok((m.len(), m.modified().ok(), ino))
}

/// An open file shared by the reading threads (one read at a time).
type SharedFile = Arc<Mutex<crate::io::ObjectFile>>;

struct Inner {
    files: Vec<PathBuf>,
    /// Open files, least recently used first.
    handles: Mutex<Vec<(u32, Stamp, SharedFile)>>,
    opts: ReadOptions,
    ids: Vec<Box<str>>,
    spectra: Vec<SpecAt>,
    fits: Mutex<Vec<FitAt>>,
    cache_file: Option<Mutex<File>>,
    spill: Mutex<Option<Spill>>,
    cache: Mutex<Lru>,
    prefetch: Mutex<Prefetch>,
    reads: AtomicUsize,
}

fn lock<T>(m: &Mutex<T>) -> std::sync::MutexGuard<'_, T> {
    m.lock().unwrap_or_else(|e| e.into_inner())
}

fn read_range(file: &Mutex<File>, offset: u64, len: u32) -> std::io::Result<Vec<u8>> {
    let mut f = lock(file);
    f.seek(SeekFrom::Start(offset))?;
    let mut buf = vec![0u8; len as usize];
    f.read_exact(&mut buf)?;
    Ok(buf)
}

fn fit_of_line(bytes: &[u8]) -> Result<Option<FitResult>, String> {
    let line = std::str::from_utf8(bytes).map_err(|_| "not UTF-8 text".to_string())?;
    Ok(FitRecord::from_json_line(line.trim_end())?.fit)
}

impl Inner {
    /// File `fi`, open (kept open while it has not changed on disk).
    fn file(&self, fi: u32) -> Result<SharedFile, String> {
        let path = &self.files[fi as usize];
        let now = stamp(path).map_err(|e| format!("{}: {e}", path.display()))?;
        {
            let mut h = lock(&self.handles);
            if let Some(pos) = h.iter().position(|(f, _, _)| *f == fi) {
                let entry = h.remove(pos);
                if entry.1 == now {
                    let file = entry.2.clone();
                    h.push(entry);
                    return Ok(file);
                }
            }
        }
        let file = Arc::new(Mutex::new(
            crate::io::ObjectFile::open(path, &self.opts).map_err(|e| e.to_string())?,
        ));
        let mut h = lock(&self.handles);
        h.retain(|(f, _, _)| *f != fi);
        h.push((fi, now, file.clone()));
        if h.len() > OPEN_FILES {
            h.remove(0);
        }
        Ok(file)
    }

    fn read_spectrum(&self, i: usize) -> Result<Spectrum, String> {
        let want = self.ids.get(i).ok_or_else(|| format!("no object {i}"))?;
        match &self.spectra[i] {
            SpecAt::Memory(s) => Ok((**s).clone()),
            SpecAt::File { file, item } => {
                let path = &self.files[*file as usize];
                self.reads.fetch_add(1, Ordering::Relaxed);
                let s = self
                    .file(*file)
                    .and_then(|f| lock(&f).read(*item as usize).map_err(|e| e.to_string()))
                    .map_err(|e| format!("{want}: the spectrum cannot be read: {e}"))?;
                if *s.meta.id != **want {
                    return Err(format!(
                        "{want}: {} now holds '{}' at its place (object {}); the file changed since it was opened — open the campaign again",
                        path.display(),
                        s.meta.id,
                        item + 1
                    ));
                }
                Ok(s)
            }
        }
    }

    fn read_fit(&self, i: usize) -> Result<Option<FitResult>, String> {
        let at = lock(&self.fits).get(i).cloned().unwrap_or(FitAt::None);
        let from = |file: Option<&Mutex<File>>, offset: u64, len: u32, what: &str| {
            let file = file.ok_or_else(|| format!("no {what} open"))?;
            let bytes = read_range(file, offset, len).map_err(|e| format!("{what}: {e}"))?;
            fit_of_line(&bytes).map_err(|e| format!("{what} at byte {offset}: {e}"))
        };
        match at {
            FitAt::None => Ok(None),
            FitAt::Memory(f) => Ok(Some((*f).clone())),
            FitAt::Cache { offset, len } => from(self.cache_file.as_ref(), offset, len, FITS_FILE),
            FitAt::Spill { offset, len } => {
                let spill = lock(&self.spill);
                let Some(s) = spill.as_ref() else {
                    return Err("the window's fit file is gone".into());
                };
                let mut f = &s.file;
                let mut buf = vec![0u8; len as usize];
                f.seek(SeekFrom::Start(offset))
                    .and_then(|_| f.read_exact(&mut buf))
                    .map_err(|e| format!("the window's fit file: {e}"))?;
                drop(spill);
                fit_of_line(&buf).map_err(|e| format!("the window's fit file: {e}"))
            }
        }
    }

    fn read(&self, i: usize) -> Result<Entry, String> {
        let spectrum = self.read_spectrum(i)?;
        let (fit, problem) = match self.read_fit(i) {
            Ok(f) => (f, None),
            Err(e) => (
                None,
                Some(format!("{}: its fit cannot be read: {e}", self.ids[i])),
            ),
        };
        Ok(Entry {
            spectrum,
            fit,
            problem,
        })
    }

    fn load(&self, i: usize) -> Result<Arc<Entry>, String> {
        if let Some(e) = lock(&self.cache).get(i) {
            return Ok(e);
        }
        let e = Arc::new(self.read(i)?);
        lock(&self.cache).put(i, e.clone());
        Ok(e)
    }
}

/// Reads objects for the background workers (shares the store's cache).
#[derive(Clone)]
pub struct ObjectReader(Arc<Inner>);

impl ObjectReader {
    /// The spectrum of object `i` (from the cache when it is there, else
    /// read without filling the cache).
    pub fn spectrum(&self, i: usize) -> Result<Spectrum, String> {
        if let Some(e) = lock(&self.0.cache).map.get(&i) {
            return Ok(e.spectrum.clone());
        }
        self.0.read_spectrum(i)
    }

    /// Object `i` whole, through the cache (it stays there).
    pub fn load(&self, i: usize) -> Result<Arc<Entry>, String> {
        self.0.load(i)
    }

    /// Number of objects.
    pub fn len(&self) -> usize {
        self.0.ids.len()
    }

    /// True when there is no object.
    pub fn is_empty(&self) -> bool {
        self.0.ids.is_empty()
    }
}

/// The window's objects: summaries in memory, the rest on demand.
pub struct ObjectStore {
    summaries: Vec<Summary>,
    inner: Arc<Inner>,
}

impl std::fmt::Debug for ObjectStore {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ObjectStore")
            .field("objects", &self.summaries.len())
            .field("files", &self.inner.files.len())
            .finish()
    }
}

impl Clone for ObjectStore {
    fn clone(&self) -> Self {
        ObjectStore {
            summaries: self.summaries.clone(),
            inner: self.inner.clone(),
        }
    }
}

impl std::ops::Index<usize> for ObjectStore {
    type Output = Summary;
    fn index(&self, i: usize) -> &Summary {
        &self.summaries[i]
    }
}

/// A store just opened: the store, the summary of each object's fit
/// ([`fitcache::summary`]), and what could not be read.
pub struct Opened {
    /// The store.
    pub store: ObjectStore,
    /// Fit summaries by object index.
    pub fits: Vec<Option<FitResult>>,
    /// Files, rows or fit lines that could not be read, repeated ids.
    pub problems: Vec<String>,
}

impl ObjectStore {
    fn build(
        summaries: Vec<Summary>,
        files: Vec<PathBuf>,
        opts: ReadOptions,
        spectra: Vec<SpecAt>,
        fits: Vec<FitAt>,
        cache_file: Option<File>,
    ) -> ObjectStore {
        let ids = summaries.iter().map(|s| s.id.clone().into_boxed_str()).collect();
        ObjectStore {
            summaries,
            inner: Arc::new(Inner {
                files,
                handles: Mutex::new(Vec::new()),
                opts,
                ids,
                spectra,
                fits: Mutex::new(fits),
                cache_file: cache_file.map(Mutex::new),
                spill: Mutex::new(None),
                cache: Mutex::new(Lru::default()),
                prefetch: Mutex::new(Prefetch::default()),
                reads: AtomicUsize::new(0),
            }),
        }
    }

    /// Objects held in memory (the built-in demo, tests): their spectra and
    /// fits stay whole; fits made later go to the store's file like any other.
    pub fn in_memory(objects: Vec<SurveyObject>) -> Opened {
        let mut summaries = Vec::with_capacity(objects.len());
        let mut spectra = Vec::with_capacity(objects.len());
        let mut fits = Vec::with_capacity(objects.len());
        let mut sums = Vec::with_capacity(objects.len());
        for o in objects {
            let snr = o
                .fit
                .as_ref()
                .map(|f| f.snr_median)
                .unwrap_or_else(|| o.spectrum.median_snr());
            summaries.push(Summary {
                id: o.id().to_string(),
                catalog: o.catalog,
                snr,
            });
            spectra.push(SpecAt::Memory(Arc::new(o.spectrum)));
            sums.push(o.fit.clone().map(fitcache::summary));
            fits.push(o.fit.map_or(FitAt::None, |f| FitAt::Memory(Arc::new(f))));
        }
        Opened {
            store: ObjectStore::build(summaries, Vec::new(), ReadOptions::default(), spectra, fits, None),
            fits: sums,
            problems: Vec::new(),
        }
    }

    /// The objects of spectrum files, listed (ids only) and read when shown;
    /// no catalogue, no fits yet. The first object of a repeated id is kept.
    pub fn open_files(files: Vec<PathBuf>, opts: &ReadOptions) -> Opened {
        let (summaries, spectra, files, problems) = list(files, opts);
        let n = summaries.len();
        Opened {
            store: ObjectStore::build(
                summaries,
                files,
                opts.clone(),
                spectra,
                vec![FitAt::None; n],
                None,
            ),
            fits: vec![None; n],
            problems,
        }
    }

    /// The objects of a campaign: its inputs listed (ids only), its
    /// catalogue joined by id, its fit cache indexed (each line's byte range
    /// and fit summary; the records are read again when their object is shown).
    pub fn open_campaign(c: &Campaign) -> Result<Opened, CampaignError> {
        let t = Instant::now();
        let (files, mut problems) = c.input_files();
        let opts = c.read_options();
        let (mut summaries, spectra, files, list_problems) = list(files, &opts);
        open_phase("inputs listed", t);
        let t = Instant::now();
        problems.extend(list_problems);
        let (mut catalog, cat_problems) = c.load_catalog()?;
        problems.extend(cat_problems);
        if c.manifest().catalog.is_some() {
            let ids: Vec<&str> = summaries.iter().map(|s| s.id.as_str()).collect();
            let cat_ids: Vec<&String> = catalog.keys().collect();
            problems.extend(crate::catalog::match_summary(&ids, &cat_ids));
        }
        for s in &mut summaries {
            s.catalog = catalog.remove(&s.id);
        }
        open_phase("catalogue joined", t);
        let t = Instant::now();
        let n = summaries.len();
        let mut fits = vec![FitAt::None; n];
        let mut sums: Vec<Option<FitResult>> = vec![None; n];
        let path = c.dir().join(FITS_FILE);
        let cache_file = match File::open(&path) {
            Ok(f) => Some(f),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => None,
            Err(e) => {
                return Err(CampaignError::Io { path, source: e });
            }
        };
        if let Some(f) = &cache_file {
            let index: HashMap<&str, usize> = summaries
                .iter()
                .enumerate()
                .map(|(i, s)| (s.id.as_str(), i))
                .collect();
            let io = |source| CampaignError::Io {
                path: path.clone(),
                source,
            };
            let lines = index_lines(f, |offset, len, (id, fit)| {
                let Some(fit) = fit else { return };
                if let Some(&i) = index.get(id.as_str()) {
                    fits[i] = FitAt::Cache { offset, len };
                    sums[i] = Some(fit);
                }
            })
            .map_err(io)?;
            problems.extend(lines.into_iter().map(|p| format!("{FITS_FILE} {p}")));
        }
        open_phase("fit cache indexed", t);
        for (s, f) in summaries.iter_mut().zip(&sums) {
            if let Some(f) = f {
                s.snr = f.snr_median;
            }
        }
        let store = ObjectStore::build(summaries, files, opts, spectra, fits, cache_file);
        Ok(Opened {
            store,
            fits: sums,
            problems,
        })
    }

    /// Number of objects.
    pub fn len(&self) -> usize {
        self.summaries.len()
    }

    /// True when there is no object.
    pub fn is_empty(&self) -> bool {
        self.summaries.is_empty()
    }

    /// The summary of object `i`.
    pub fn get(&self, i: usize) -> Option<&Summary> {
        self.summaries.get(i)
    }

    /// Every summary, in object order.
    pub fn iter(&self) -> std::slice::Iter<'_, Summary> {
        self.summaries.iter()
    }

    /// The id of object `i`.
    pub fn id(&self, i: usize) -> Option<&str> {
        self.summaries.get(i).map(|s| s.id.as_str())
    }

    /// Set the catalogue rows (a catalogue joined after the open).
    pub fn set_catalog(&mut self, i: usize, row: Option<CatalogRow>) {
        if let Some(s) = self.summaries.get_mut(i) {
            s.catalog = row;
        }
    }

    /// Set the S/N of object `i` (known once it is fitted).
    pub fn set_snr(&mut self, i: usize, snr: f64) {
        if let Some(s) = self.summaries.get_mut(i) {
            s.snr = snr;
        }
    }

    /// A reader for background threads.
    pub fn reader(&self) -> ObjectReader {
        ObjectReader(self.inner.clone())
    }

    /// Object `i` whole (spectrum, full fit), from the cache or read now;
    /// an object that cannot be read gives a message naming it.
    pub fn load(&self, i: usize) -> Result<Arc<Entry>, String> {
        if i >= self.len() {
            return Err(format!("no object {i}"));
        }
        self.inner.load(i)
    }

    /// Object `i` whole, as a [`SurveyObject`] (its catalogue row from the summary).
    pub fn object(&self, i: usize) -> Result<(SurveyObject, Option<String>), String> {
        let e = self.load(i)?;
        Ok((
            SurveyObject {
                spectrum: e.spectrum.clone(),
                catalog: self.summaries[i].catalog.clone(),
                fit: e.fit.clone(),
            },
            e.problem.clone(),
        ))
    }

    /// True when object `i` is in the cache.
    pub fn is_cached(&self, i: usize) -> bool {
        lock(&self.inner.cache).map.contains_key(&i)
    }

    /// True when object `i` is in the cache with a fit that holds its χ²(z) curves.
    pub fn has_curves(&self, i: usize) -> bool {
        lock(&self.inner.cache)
            .map
            .get(&i)
            .is_some_and(|e| e.fit.as_ref().is_some_and(|f| !f.curves.is_empty()))
    }

    /// Read the objects `want` (in that order) into the cache on a
    /// background thread, replacing an earlier request not yet done.
    pub fn prefetch(&self, want: &[usize]) {
        let mut p = lock(&self.inner.prefetch);
        p.want = want
            .iter()
            .copied()
            .filter(|&i| i < self.len() && !self.is_cached(i))
            .collect();
        if p.want.is_empty() || p.running {
            return;
        }
        p.running = true;
        drop(p);
        let inner = self.inner.clone();
        let spawned = std::thread::Builder::new()
            .name("zvet-prefetch".into())
            .spawn(move || loop {
                let next = {
                    let mut p = lock(&inner.prefetch);
                    match p.want.pop_front() {
                        Some(i) => i,
                        None => {
                            p.running = false;
                            return;
                        }
                    }
                };
                // a failure is met again (and shown) when the object is selected
                let _ = inner.load(next);
            });
        if spawned.is_err() {
            lock(&self.inner.prefetch).running = false;
        }
    }

    /// True while the background reader has work.
    pub fn prefetching(&self) -> bool {
        lock(&self.inner.prefetch).running
    }

    /// Put the χ²(z) curves of `fit` onto the cached fit of object `i`
    /// (when it is cached and its fit has none). Returns true when taken.
    pub fn set_curves(&self, i: usize, fit: &FitResult) -> bool {
        let mut c = lock(&self.inner.cache);
        let Some(e) = c.map.get(&i) else {
            return false;
        };
        let Some(old) = &e.fit else {
            return false;
        };
        if !old.curves.is_empty() {
            return true;
        }
        let mut new = (**e).clone();
        if let Some(f) = &mut new.fit {
            f.curves = fit.curves.clone();
        }
        c.map.insert(i, Arc::new(new));
        true
    }

    /// A fit made in the window for object `i`: its record goes to the
    /// store's file (read back when the object is shown), the cached object
    /// (if any) takes it whole. Returns the fit's summary.
    pub fn put_fit(&mut self, i: usize, fit: &FitResult) -> Result<FitResult, String> {
        if i >= self.len() {
            return Err(format!("no object {i}"));
        }
        let line = FitRecord::fitted(fit.clone(), "", "")
            .to_json_line()
            .map_err(|e| e.to_string())?;
        {
            let mut spill = lock(&self.inner.spill);
            if spill.is_none() {
                let file = tempfile::tempfile().map_err(|e| format!("a temporary file for fits: {e}"))?;
                *spill = Some(Spill { file, end: 0 });
            }
            let Some(s) = spill.as_mut() else {
                return Err("no temporary file for fits".into());
            };
            let offset = s.end;
            s.file
                .seek(SeekFrom::Start(offset))
                .and_then(|_| s.file.write_all(line.as_bytes()))
                .and_then(|_| s.file.write_all(b"\n"))
                .map_err(|e| format!("writing a fit to a temporary file: {e}"))?;
            s.end += line.len() as u64 + 1;
            lock(&self.inner.fits)[i] = FitAt::Spill {
                offset,
                len: line.len() as u32,
            };
        }
        let mut c = lock(&self.inner.cache);
        if let Some(e) = c.map.get(&i) {
            let mut new = (**e).clone();
            new.fit = Some(fit.clone());
            new.problem = None;
            c.map.insert(i, Arc::new(new));
        }
        drop(c);
        self.set_snr(i, fit.snr_median);
        Ok(fitcache::summary(fit.clone()))
    }

    /// Forget every fit (another template set): objects are refitted.
    pub fn clear_fits(&mut self) {
        for f in lock(&self.inner.fits).iter_mut() {
            *f = FitAt::None;
        }
        let mut c = lock(&self.inner.cache);
        for e in c.map.values_mut() {
            let mut new = (**e).clone();
            new.fit = None;
            *e = Arc::new(new);
        }
    }

    /// Objects dropped from the cache since the last call (their curves
    /// are gone with them).
    pub fn take_evicted(&self) -> Vec<usize> {
        std::mem::take(&mut lock(&self.inner.cache).evicted)
    }

    /// (objects held whole, bytes of their arrays, spectra read from files
    /// so far): what the cache holds, for tests and the memory figures.
    pub fn held(&self) -> (usize, usize, usize) {
        let c = lock(&self.inner.cache);
        let bytes = c.map.values().map(|e| e.bytes()).sum();
        (c.map.len(), bytes, self.inner.reads.load(Ordering::Relaxed))
    }
}

/// Append the line `open_ms MS PHASE` (the milliseconds since `since`) to
/// the file named by `ZVET_WINDOW_TIMES`, when it is set: the window's
/// timings (`ui::timing`), taken on the thread that opens a campaign.
pub fn open_phase(phase: &str, since: Instant) {
    let Some(path) = std::env::var_os("ZVET_WINDOW_TIMES") else {
        return;
    };
    if let Ok(mut f) = std::fs::OpenOptions::new().create(true).append(true).open(path) {
        // a measurement that cannot be written is lost, nothing else
        let _ = writeln!(f, "open_ms {:.1} {phase}", since.elapsed().as_secs_f64() * 1e3);
    }
}

type Listed = (Vec<Summary>, Vec<SpecAt>, Vec<PathBuf>, Vec<String>);

/// List the objects of `files` (ids and places; the first of a repeated id
/// kept), as [`crate::pipeline::read_all`] would read them.
fn list(files: Vec<PathBuf>, opts: &ReadOptions) -> Listed {
    let mut summaries = Vec::new();
    let mut spectra = Vec::new();
    let mut problems = Vec::new();
    let mut seen: HashMap<String, u32> = HashMap::new();
    // every file's ids, on every core (each file's layout is checked as it is opened)
    let listed: Vec<Result<Vec<Result<String, String>>, String>> = {
        use rayon::prelude::*;
        files
            .par_iter()
            .map(|path| crate::io::list_objects(path, opts).map_err(|e| e.to_string()))
            .collect()
    };
    for ((fi, path), items) in files.iter().enumerate().zip(listed) {
        let items = match items {
            Ok(items) => items,
            Err(e) => {
                problems.push(e);
                continue;
            }
        };
        for (k, item) in items.into_iter().enumerate() {
            match item {
                Ok(id) => {
                    if let Some(first) = seen.get(&id) {
                        problems.push(format!(
                            "object id '{id}' appears more than once ({}, object {}); the first spectrum is used (from {})",
                            path.display(),
                            k + 1,
                            files[*first as usize].display()
                        ));
                        continue;
                    }
                    seen.insert(id.clone(), fi as u32);
                    summaries.push(Summary {
                        id,
                        catalog: None,
                        snr: f64::NAN,
                    });
                    spectra.push(SpecAt::File {
                        file: fi as u32,
                        item: k as u32,
                    });
                }
                Err(m) => problems.push(m),
            }
        }
    }
    (summaries, spectra, files, problems)
}

/// Lines parsed together (on every core).
const INDEX_BATCH: usize = 512;

/// One line of the cache as the index needs it: the object id and the
/// summary of its fit ([`fitcache::summary`]; None for a record without a fit).
type Indexed = (String, Option<FitResult>);

/// Read a fit cache line by line through `file`, handing the id and fit
/// summary of each record with its byte offset and length (without the
/// newline) to `f`, in file order; lines are parsed in batches on every
/// core. Bad lines come back as `line N: …` problems.
fn index_lines(file: &File, mut f: impl FnMut(u64, u32, Indexed)) -> std::io::Result<Vec<String>> {
    use rayon::prelude::*;
    let mut reader = std::io::BufReader::with_capacity(1 << 20, file);
    let mut problems = Vec::new();
    let mut offset = 0u64;
    let mut n = 0usize;
    loop {
        // (line number, offset, bytes without the newline)
        let mut batch: Vec<(usize, u64, Vec<u8>)> = Vec::with_capacity(INDEX_BATCH);
        while batch.len() < INDEX_BATCH {
            let mut raw = Vec::new();
            let got = reader.read_until(b'\n', &mut raw)?;
            if got == 0 {
                break;
            }
            n += 1;
            let start = offset;
            offset += got as u64;
            if raw.last() == Some(&b'\n') {
                raw.pop();
            }
            batch.push((n, start, raw));
        }
        if batch.is_empty() {
            break;
        }
        let parsed: Vec<Option<Result<Indexed, String>>> = batch
            .par_iter()
            .map(|(_, _, raw)| {
                let Ok(line) = std::str::from_utf8(raw) else {
                    return Some(Err("not UTF-8 text".to_string()));
                };
                if line.trim().is_empty() {
                    return None;
                }
                Some(summary_of_line(line))
            })
            .collect();
        for ((line, start, raw), p) in batch.iter().zip(parsed) {
            match p {
                None => {}
                Some(Ok(x)) => f(*start, raw.len() as u32, x),
                Some(Err(e)) => problems.push(format!("line {line}: {e}; skipped")),
            }
        }
    }
    Ok(problems)
}

/// The keys of a record line the index reads (the others are skipped
/// unparsed: line measurements, per-class solutions, the flat columns).
#[derive(serde::Deserialize)]
struct LightLine {
    v: Option<u32>,
    object_id: Option<String>,
    #[serde(default)]
    error: Option<String>,
    candidates: Option<Vec<LightCandidate>>,
    delta_chi2: Option<f64>,
    chi2_reduced: Option<f64>,
    n_good: Option<usize>,
    snr_median: Option<f64>,
    warnings: Option<crate::fit::Warnings>,
}

#[derive(serde::Deserialize)]
struct LightCandidate {
    class: crate::ObjectClass,
    template: String,
    z: Option<f64>,
    z_err: Option<f64>,
    chi2: Option<f64>,
}

/// The id and fit summary of one record line: read through [`LightLine`]
/// for lines of the current format, else (older formats, flat rows,
/// anything unexpected) through the full reader [`FitRecord::from_json_line`].
/// Both give the same summary (`null` numbers as NaN, a `null` Δχ² as ∞).
fn summary_of_line(line: &str) -> Result<Indexed, String> {
    let slow = || {
        let r = FitRecord::from_json_line(line)?;
        Ok((r.object_id, r.fit.map(fitcache::summary)))
    };
    let Ok(l) = serde_json::from_str::<LightLine>(line) else {
        return slow();
    };
    let (Some(v), Some(id), Some(cands)) = (l.v, l.object_id, l.candidates) else {
        return slow();
    };
    if v != crate::pipeline::RECORD_FORMAT || id.is_empty() {
        return slow();
    }
    if l.error.as_deref().is_some_and(|e| !e.is_empty()) {
        return Ok((id, None));
    }
    let nan = |x: Option<f64>| x.unwrap_or(f64::NAN);
    let best = cands.into_iter().next().map(|c| crate::fit::Candidate {
        class: c.class,
        template: c.template,
        z: nan(c.z),
        z_err: nan(c.z_err),
        chi2: nan(c.chi2),
        coeffs: Vec::new(),
    });
    let fit = FitResult {
        object_id: id.clone(),
        candidates: best.into_iter().collect(),
        delta_chi2: l.delta_chi2.unwrap_or(f64::INFINITY),
        chi2_reduced: nan(l.chi2_reduced),
        n_good: l.n_good.unwrap_or(0),
        snr_median: nan(l.snr_median),
        warnings: l.warnings.unwrap_or_default(),
        curves: Vec::new(),
        lines: Vec::new(),
        per_class: Vec::new(),
        refit_kept: false,
    };
    Ok((id, Some(fit)))
}

/// The catalogue rows of `rows` joined to the store's ids (for a catalogue
/// opened after the spectra): (object index, row) pairs and the join's counts.
pub fn join_catalog(store: &ObjectStore, rows: &[CatalogRow]) -> crate::catalog::Join {
    let ids: Vec<String> = store.iter().map(|s| s.id.clone()).collect();
    crate::catalog::join(&ids, rows)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::{Candidate, Warnings};

    fn fit(delta: f64, z_err: f64) -> FitResult {
        FitResult {
            object_id: "K-7".into(),
            candidates: vec![
                Candidate {
                    class: crate::ObjectClass::Quasar,
                    template: "q".into(),
                    z: 2.25,
                    z_err,
                    chi2: 4100.5,
                    coeffs: vec![1.0, -2.0],
                },
                Candidate {
                    class: crate::ObjectClass::Galaxy,
                    template: "g".into(),
                    z: 0.5,
                    z_err: 1e-4,
                    chi2: 4200.0,
                    coeffs: vec![3.0],
                },
            ],
            delta_chi2: delta,
            chi2_reduced: 1.05,
            n_good: 3900,
            snr_median: 4.5,
            warnings: Warnings(5),
            curves: vec![],
            lines: vec![],
            per_class: vec![],
            refit_kept: false,
        }
    }

    #[test]
    fn the_quick_line_reader_gives_the_summary_of_the_full_reader() {
        for f in [fit(99.5, 3e-4), fit(f64::INFINITY, f64::NAN)] {
            let line = FitRecord::fitted(f, "a.fits[hdu=1,row=3]", "chi2")
                .to_json_line()
                .unwrap();
            let quick = summary_of_line(&line).unwrap();
            let full = FitRecord::from_json_line(&line).unwrap();
            let want = fitcache::summary(full.fit.unwrap());
            assert_eq!(quick.0, "K-7");
            // NaN ≠ NaN: compare as text
            assert_eq!(format!("{:?}", quick.1.unwrap()), format!("{want:?}"));
        }
        // a record without a fit, and a line of the first cache format (key `id`)
        let failed = FitRecord::failed("K-8", "b.fits", "no good pixels")
            .to_json_line()
            .unwrap();
        assert_eq!(summary_of_line(&failed).unwrap(), ("K-8".to_string(), None));
        let old = r#"{"id":"K-9","candidates":[{"class":"galaxy","template":"g","z":0.1,"z_err":0.001,"chi2":10.0,"coeffs":[]}],"delta_chi2":50.0,"chi2_reduced":1.0,"n_good":10,"snr_median":3.0,"warnings":0,"lines":[]}"#;
        let (id, f) = summary_of_line(old).unwrap();
        assert_eq!(id, "K-9");
        assert!((f.unwrap().best().unwrap().z - 0.1).abs() < 1e-15);
        assert!(summary_of_line("{not json").is_err());
    }
}
