/*!
The lock file that keeps a second zvet process off an inspector's review log.

The lock is an advisory exclusive lock (`File::try_lock`, flock on Unix) on a
file next to the log (`<log>.lock`). The operating system releases it when
the holder exits, even on a crash, so a stale lock can never block anyone.
After taking the lock we write who holds it (pid, host, time) into the file;
a refused process reads that text back to name the holder in its message.

The file is never deleted: deleting it on release would let two processes
lock two different files of the same name (one the old inode, one a new
file) at once.
*/
use super::ReviewError;
use std::fs::{File, OpenOptions, TryLockError};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

/// A held lock; released when dropped (closing the file releases it).
#[derive(Debug)]
pub struct LogLock {
    _file: File,
}

/// Further attempts at a lock that is held, [`LOCK_RETRY_PAUSE`] apart.
const LOCK_RETRIES: u32 = 20;
/// Pause between attempts (20 × 10 ms: a fifth of a second in all).
const LOCK_RETRY_PAUSE: std::time::Duration = std::time::Duration::from_millis(10);

/// The lock-file path for a log: the log's path with `.lock` appended.
pub fn lock_path(log: &Path) -> PathBuf {
    let mut s = log.as_os_str().to_owned();
    s.push(".lock");
    PathBuf::from(s)
}

/// This machine's name, best effort (for the holder line only).
fn host_name() -> String {
    std::fs::read_to_string("/proc/sys/kernel/hostname")
        .ok()
        .or_else(|| std::env::var("HOSTNAME").ok())
        .or_else(|| std::env::var("COMPUTERNAME").ok())
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .unwrap_or_else(|| "unknown host".into())
}

/// Take the lock for `log` for `inspector`, or say who holds it.
pub fn acquire(log: &Path, inspector: &str) -> Result<LogLock, ReviewError> {
    let path = lock_path(log);
    let io = |source| ReviewError::Io {
        path: path.clone(),
        source,
    };
    let mut file = OpenOptions::new()
        .read(true)
        .write(true)
        .create(true)
        .truncate(false)
        .open(&path)
        .map_err(io)?;
    // A lock held only for an instant is not a holder: a child process that
    // another thread is starting shares our open files until it executes its
    // program, which keeps a lock we just dropped alive for that moment. Try
    // again for a short while before calling the log taken.
    let mut attempt = 0;
    let taken = loop {
        match file.try_lock() {
            Err(TryLockError::WouldBlock) if attempt < LOCK_RETRIES => {
                attempt += 1;
                std::thread::sleep(LOCK_RETRY_PAUSE);
            }
            other => break other,
        }
    };
    match taken {
        Ok(()) => {}
        Err(TryLockError::WouldBlock) => {
            let mut holder = String::new();
            // The holder may be writing its line this very moment; an empty or
            // partial text only makes the message vaguer.
            let _ = file.read_to_string(&mut holder);
            let holder = holder.trim();
            return Err(ReviewError::Locked {
                log: log.to_path_buf(),
                holder: if holder.is_empty() {
                    "another process (no details written yet)".into()
                } else {
                    holder.to_string()
                },
            });
        }
        Err(TryLockError::Error(e)) => return Err(io(e)),
    }
    let text = format!(
        "inspector {inspector}, process {} on {}, since {}\n",
        std::process::id(),
        host_name(),
        chrono::Utc::now().format("%Y-%m-%dT%H:%M:%SZ")
    );
    file.set_len(0).map_err(io)?;
    file.seek(SeekFrom::Start(0)).map_err(io)?;
    file.write_all(text.as_bytes()).map_err(io)?;
    file.flush().map_err(io)?;
    Ok(LogLock { _file: file })
}
