/*!
The append-only review log of one inspector: JSON Lines, one [`Event`] per
line, written with a single `write` call per event and fsynced before
[`ReviewLog::record`] returns.

Reading is forgiving and precise: blank lines are skipped, a line that is not
a valid event is reported as a [`LogProblem`] with its 1-based line number and
the rest still loads. A last line without its newline is what a crash in the
middle of a write leaves: if it parses it is kept (all its bytes made it), if
not it is ignored with a warning. Either way the next append first writes a
newline, so the torn bytes stay a line of their own and are never extended
into something else. Nothing is ever rewritten in place.
*/
use super::lock::{self, LogLock};
use super::model::{Change, Event, FitSeen, Verdict};
use super::replay::{ObjectState, Replay};
use super::ReviewError;
use std::fs::{File, OpenOptions};
use std::io::Write;
use std::path::{Path, PathBuf};

/// The format version written in every event's `v`.
pub const LOG_FORMAT_VERSION: u32 = 1;

/// A line of a log that could not be used.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LogProblem {
    /// 1-based line number.
    pub line: usize,
    /// What is wrong with it.
    pub message: String,
}

impl std::fmt::Display for LogProblem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

/// What parsing a log's bytes found.
struct Parsed {
    events: Vec<Event>,
    problems: Vec<LogProblem>,
    /// The bytes do not end with a newline (the next append must start one).
    open_tail: bool,
}

#[derive(serde::Deserialize)]
struct VersionOnly {
    v: Option<u32>,
}

fn newer_version(v: u32) -> String {
    format!("written in log format version {v} (this zvet reads up to {LOG_FORMAT_VERSION})")
}

/// Read a log line by line (memory holds one line and the events, never
/// the file's bytes).
fn parse_lines(mut reader: impl std::io::BufRead) -> std::io::Result<Parsed> {
    let mut events = Vec::new();
    let mut problems = Vec::new();
    let mut open_tail = false;
    let mut raw = Vec::new();
    let mut line = 0usize;
    loop {
        raw.clear();
        if reader.read_until(b'\n', &mut raw)? == 0 {
            break;
        }
        line += 1;
        // only the last line can lack its newline
        let is_tail = raw.last() != Some(&b'\n');
        open_tail = is_tail;
        if !is_tail {
            raw.pop();
        }
        let raw = &raw[..];
        if raw.iter().all(|b| b.is_ascii_whitespace()) {
            continue;
        }
        let result = std::str::from_utf8(raw)
            .map_err(|e| format!("not UTF-8 text ({e})"))
            .and_then(|s| match serde_json::from_str::<Event>(s) {
                Ok(e) if e.v <= LOG_FORMAT_VERSION => Ok(e),
                Ok(e) => Err(newer_version(e.v)),
                // A line of a newer format may not fit today's event at all:
                // say so rather than "missing field".
                Err(err) => match serde_json::from_str::<VersionOnly>(s) {
                    Ok(VersionOnly { v: Some(v) }) if v > LOG_FORMAT_VERSION => Err(newer_version(v)),
                    _ => Err(err.to_string()),
                },
            });
        match result {
            Ok(e) => events.push(e),
            Err(msg) if is_tail => problems.push(LogProblem {
                line,
                message: format!(
                    "incomplete last line ignored (a write was cut short, e.g. by a crash): {msg}"
                ),
            }),
            Err(msg) => problems.push(LogProblem {
                line,
                message: format!("not a valid event, skipped: {msg}"),
            }),
        }
    }
    Ok(Parsed {
        events,
        problems,
        open_tail,
    })
}

/// Read every event of a log without taking its lock (merge, reports).
/// Unusable lines come back as problems; only an unreadable file is an error.
pub fn read_log(path: &Path) -> Result<(Vec<Event>, Vec<LogProblem>), ReviewError> {
    let io = |source| ReviewError::Io {
        path: path.to_path_buf(),
        source,
    };
    let file = File::open(path).map_err(io)?;
    let p = parse_lines(std::io::BufReader::new(file)).map_err(io)?;
    Ok((p.events, p.problems))
}

/// One inspector's open review log: the file (locked) and its replayed state.
#[derive(Debug)]
pub struct ReviewLog {
    path: PathBuf,
    inspector: String,
    file: File,
    _lock: LogLock,
    state: Replay,
    next_seq: u64,
    /// The file does not end with a newline: start a new line before the next event.
    open_tail: bool,
    reviewed: usize,
}

/// Check the values a change carries before it goes to disk: JSON has no
/// NaN/∞, and such a line would not read back.
fn validate(fit: Option<&FitSeen>, change: &Change) -> Result<(), ReviewError> {
    let bad = |what: &str, x: f64| {
        Err(ReviewError::InvalidValue(format!(
            "{what} must be a finite number, got {x}"
        )))
    };
    if let Some(f) = fit {
        if !f.z.is_finite() {
            return bad("the fit's redshift", f.z);
        }
        if !f.chi2.is_finite() {
            return bad("the fit's χ²", f.chi2);
        }
    }
    let (z, z_err) = match change {
        Change::Verdict { z, z_err, .. } => (*z, *z_err),
        Change::Redshift { z, z_err, .. } => (Some(*z), *z_err),
        _ => (None, None),
    };
    if let Some(z) = z.filter(|z| !z.is_finite()) {
        return bad("the redshift", z);
    }
    if let Some(e) = z_err.filter(|e| !e.is_finite()) {
        return bad("the redshift error", e);
    }
    Ok(())
}

impl ReviewLog {
    /// Create or open `path` for `inspector`, take the lock file, replay.
    /// The problems are the skipped lines, with line numbers.
    pub fn open(path: &Path, inspector: &str) -> Result<(ReviewLog, Vec<LogProblem>), ReviewError> {
        if inspector.trim().is_empty() {
            return Err(ReviewError::BadInspector("the inspector name is empty".into()));
        }
        if let Some(parent) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
            std::fs::create_dir_all(parent).map_err(|source| ReviewError::Io {
                path: parent.to_path_buf(),
                source,
            })?;
        }
        let lock = lock::acquire(path, inspector)?;
        let io = |source| ReviewError::Io {
            path: path.to_path_buf(),
            source,
        };
        let file = OpenOptions::new()
            .read(true)
            .append(true)
            .create(true)
            .open(path)
            .map_err(io)?;
        // read line by line through the handle just opened (under the lock)
        let parsed = parse_lines(std::io::BufReader::new(&file)).map_err(io)?;
        let state = Replay::from_events(&parsed.events);
        let next_seq = parsed.events.iter().map(|e| e.seq).max().unwrap_or(0) + 1;
        let reviewed = state.objects.values().filter(|s| s.verdict.is_complete()).count();
        Ok((
            ReviewLog {
                path: path.to_path_buf(),
                inspector: inspector.to_string(),
                file,
                _lock: lock,
                state,
                next_seq,
                open_tail: parsed.open_tail,
                reviewed,
            },
            parsed.problems,
        ))
    }

    /// Append one event (one write, flush, fsync) and apply it. An `Err`
    /// leaves the in-memory state unchanged. An undo or redo with nothing to
    /// act on is refused without writing.
    pub fn record(
        &mut self,
        object_id: &str,
        fit: Option<FitSeen>,
        change: Change,
    ) -> Result<(), ReviewError> {
        self.record_event(object_id, fit, change).map(|_| ())
    }

    /// Like [`ReviewLog::record`], returning the sequence number written.
    pub fn record_event(
        &mut self,
        object_id: &str,
        fit: Option<FitSeen>,
        change: Change,
    ) -> Result<u64, ReviewError> {
        validate(fit.as_ref(), &change)?;
        let event = Event {
            v: LOG_FORMAT_VERSION,
            seq: self.next_seq,
            time: chrono::Utc::now(),
            inspector: self.inspector.clone(),
            object_id: object_id.to_string(),
            fit,
            change,
        };
        let empty = ObjectState::default();
        let obj = self.state.objects.get(object_id).unwrap_or(&empty);
        if !obj.is_effective(&event) {
            return Err(match event.change {
                Change::Undo => ReviewError::NothingToUndo(object_id.to_string()),
                _ => ReviewError::NothingToRedo(object_id.to_string()),
            });
        }
        let was_reviewed = obj.verdict.is_complete();

        let mut buf = Vec::with_capacity(256);
        if self.open_tail {
            buf.push(b'\n');
        }
        serde_json::to_writer(&mut buf, &event).map_err(ReviewError::Encode)?;
        buf.push(b'\n');

        // From here on a sequence number may be on disk even if we fail, so
        // never hand it out twice.
        self.next_seq += 1;
        let io = |source| ReviewError::Io {
            path: self.path.clone(),
            source,
        };
        // One write call for the whole line, so a crash leaves either the
        // line, nothing, or (power loss) a torn tail that the reader drops.
        match self.file.write(&buf) {
            Ok(n) if n == buf.len() => {}
            Ok(n) => {
                self.open_tail = true;
                return Err(ReviewError::ShortWrite {
                    path: self.path.clone(),
                    written: n,
                    len: buf.len(),
                });
            }
            Err(e) => {
                // Unknown how much reached the file: start afresh next time.
                self.open_tail = true;
                return Err(io(e));
            }
        }
        self.open_tail = false;
        self.file.flush().map_err(io)?;
        self.file.sync_data().map_err(io)?;

        self.state.apply(&event);
        let now_reviewed = self.state.objects[object_id].verdict.is_complete();
        match (was_reviewed, now_reviewed) {
            (false, true) => self.reviewed += 1,
            (true, false) => self.reviewed -= 1,
            _ => {}
        }
        Ok(event.seq)
    }

    /// The current verdict on an object, if it has any event.
    pub fn verdict(&self, object_id: &str) -> Option<&Verdict> {
        self.state.objects.get(object_id).map(|s| &s.verdict)
    }

    /// Every event on an object, oldest first.
    pub fn history(&self, object_id: &str) -> &[Event] {
        self.state
            .objects
            .get(object_id)
            .map(|s| s.events.as_slice())
            .unwrap_or(&[])
    }

    /// True when this inspector has a change on the object to undo.
    pub fn can_undo(&self, object_id: &str) -> bool {
        self.state
            .objects
            .get(object_id)
            .is_some_and(|s| s.can_undo(&self.inspector))
    }

    /// True when this inspector has an undone change on the object to redo.
    pub fn can_redo(&self, object_id: &str) -> bool {
        self.state
            .objects
            .get(object_id)
            .is_some_and(|s| s.can_redo(&self.inspector))
    }

    /// True when the object's verdict is complete ([`Verdict::is_complete`]).
    pub fn is_reviewed(&self, object_id: &str) -> bool {
        self.verdict(object_id).is_some_and(Verdict::is_complete)
    }

    /// Number of objects whose verdict is complete.
    pub fn reviewed_count(&self) -> usize {
        self.reviewed
    }

    /// All current verdicts, by object id.
    pub fn verdicts(&self) -> impl Iterator<Item = (&str, &Verdict)> {
        self.state.objects.iter().map(|(id, s)| (id.as_str(), &s.verdict))
    }

    /// The inspector whose log this is.
    pub fn inspector(&self) -> &str {
        &self.inspector
    }

    /// The log file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The sequence number the next event will get.
    pub fn next_seq(&self) -> u64 {
        self.next_seq
    }
}
