/*!
Verdicts and the review log: the words of a verdict (`model.rs`), replaying
events into verdicts with undo/redo ([`replay`]), the crash-safe append-only
log of one inspector ([`ReviewLog`]), and the merge of several inspectors with
agreement statistics ([`merge`], [`stats`]).
*/
mod lock;
mod log;
pub mod merge;
mod model;
mod replay;
pub mod stats;

pub use lock::lock_path;
pub use log::{read_log, LogProblem, ReviewLog, LOG_FORMAT_VERSION};
pub use model::{Change, Confidence, Event, FitSeen, Flag, Verdict, VerdictClass, ZSource};
pub use replay::{apply_change, replay, ObjectState, Replay};

use std::path::PathBuf;

/// What can go wrong with a review log.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReviewError {
    /// Reading or writing a file failed.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// Another process has the inspector's log open.
    #[error("the review log {} is in use by another zvet ({holder}); close it there first", log.display())]
    Locked {
        /// The log.
        log: PathBuf,
        /// Who holds it, as written in the lock file.
        holder: String,
    },
    /// The file took only part of an event.
    #[error("{}: only {written} of {len} bytes written (disk full?); the event was not saved", path.display())]
    ShortWrite {
        /// The log.
        path: PathBuf,
        /// Bytes written.
        written: usize,
        /// Bytes of the event.
        len: usize,
    },
    /// Undo with nothing to undo.
    #[error("nothing to undo on object '{0}'")]
    NothingToUndo(String),
    /// Redo with nothing to redo.
    #[error("nothing to redo on object '{0}'")]
    NothingToRedo(String),
    /// A value that cannot be recorded (NaN, ∞).
    #[error("cannot record: {0}")]
    InvalidValue(String),
    /// An unusable inspector name.
    #[error("bad inspector name: {0}")]
    BadInspector(String),
    /// An event could not be encoded.
    #[error("could not encode the event: {0}")]
    Encode(serde_json::Error),
}
