/*!
How long reading each file takes: [`stream_file_timed`] wraps
[`super::stream_file`] and measures the time spent opening the file and
inside every step of its object stream (not the caller's work between
steps), then hands a [`FileReadTime`] to a callback when the stream ends or
is dropped. `zvet inspect` and `zvet fit` report these per file.
*/
use super::{stream_file, LoadError, ReadOptions};
use crate::spectrum::Spectrum;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// The reading of one file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FileReadTime {
    /// The file.
    pub path: PathBuf,
    /// Objects read.
    pub objects: usize,
    /// Objects (or the whole file) that could not be read.
    pub failures: usize,
    /// Time spent reading: opening plus every object.
    pub elapsed: Duration,
}

type Done = Box<dyn FnOnce(FileReadTime) + Send>;
type Stream = Box<dyn Iterator<Item = Result<Spectrum, LoadError>> + Send>;

/// [`stream_file`] with its reading time measured; `done` is called once,
/// when the stream ends or is dropped (at once, when the file cannot be
/// opened: the error is returned as well).
pub fn stream_file_timed(
    path: &Path,
    opts: &ReadOptions,
    done: impl FnOnce(FileReadTime) + Send + 'static,
) -> Result<Timed, LoadError> {
    let t0 = Instant::now();
    let opened = stream_file(path, opts);
    let mut stats = FileReadTime {
        path: path.to_path_buf(),
        objects: 0,
        failures: 0,
        elapsed: t0.elapsed(),
    };
    match opened {
        Ok(inner) => Ok(Timed {
            inner,
            stats,
            done: Some(Box::new(done)),
        }),
        Err(e) => {
            stats.failures = 1;
            done(stats);
            Err(e)
        }
    }
}

/// A timed object stream (see [`stream_file_timed`]).
pub struct Timed {
    inner: Stream,
    stats: FileReadTime,
    done: Option<Done>,
}

impl Timed {
    /// The totals so far.
    pub fn so_far(&self) -> &FileReadTime {
        &self.stats
    }

    fn finish(&mut self) {
        if let Some(d) = self.done.take() {
            d(self.stats.clone());
        }
    }
}

impl Iterator for Timed {
    type Item = Result<Spectrum, LoadError>;

    fn next(&mut self) -> Option<Self::Item> {
        let t = Instant::now();
        let item = self.inner.next();
        self.stats.elapsed += t.elapsed();
        match &item {
            Some(Ok(_)) => self.stats.objects += 1,
            Some(Err(_)) => self.stats.failures += 1,
            None => self.finish(),
        }
        item
    }
}

impl Drop for Timed {
    fn drop(&mut self) {
        self.finish();
    }
}
