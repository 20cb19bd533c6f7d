/*!
The one way zvet writes an output file: create a temporary file in the
target's folder, check every write and the close, fsync the file, rename it
over the target, fsync the folder. A reader (or a crash, or a full disk) sees
the old file or the new one, never a half-written mixture; on any failure the
temporary file is removed, the old file stays and the caller gets the error.

Review logs are appended, never rewritten (`review::log`); manifests, fit
caches, result tables, exports and reports go through here. A set of files
(the report) is written whole into a temporary folder first, then renamed
into place ([`atomic_dir`]).

Files are created with the default mode of the standard library (0666 less
the user's umask), like any other program's output, so a team that shares a
campaign folder can read each other's exports and logs.
*/
use std::fs::{File, OpenOptions};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

fn parent_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// fsync a folder so a rename inside it is durable. Where folders cannot be
/// opened (Windows) there is nothing to do; an error from the fsync itself
/// is reported.
pub fn sync_dir(dir: &Path) -> io::Result<()> {
    match File::open(dir) {
        Ok(d) => match d.sync_all() {
            // Some file systems cannot fsync a folder (EINVAL): nothing to make durable.
            Err(e) if e.kind() == io::ErrorKind::InvalidInput => Ok(()),
            r => r,
        },
        Err(_) => Ok(()),
    }
}

static COUNTER: AtomicU64 = AtomicU64::new(0);

/// A fresh name `.zvet-tmp-PID-N-T<suffix>` in `dir` (not created).
fn temp_name(dir: &Path, suffix: &str) -> PathBuf {
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let t = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.subsec_nanos())
        .unwrap_or(0);
    dir.join(format!(".zvet-tmp-{}-{n}-{t:08x}{suffix}", std::process::id()))
}

/// A temporary path removed on drop unless [`TempPath::keep`] is called.
struct TempPath(Option<PathBuf>);

impl TempPath {
    fn path(&self) -> &Path {
        self.0.as_deref().unwrap_or(Path::new(""))
    }
    fn keep(mut self) {
        self.0 = None;
    }
}

impl Drop for TempPath {
    fn drop(&mut self) {
        if let Some(p) = self.0.take() {
            if p.is_dir() {
                let _ = std::fs::remove_dir_all(&p);
            } else {
                let _ = std::fs::remove_file(&p);
            }
        }
    }
}

/// Create a new, empty temporary file in `dir` with the default mode
/// (0666 less the umask).
fn create_temp(dir: &Path, suffix: &str) -> io::Result<(File, TempPath)> {
    loop {
        let p = temp_name(dir, suffix);
        match OpenOptions::new().write(true).create_new(true).open(&p) {
            Ok(f) => return Ok((f, TempPath(Some(p)))),
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => continue,
            Err(e) => return Err(e),
        }
    }
}

/// Rename the finished temporary over `path` and make the rename durable.
fn commit(tmp: TempPath, path: &Path) -> io::Result<()> {
    std::fs::rename(tmp.path(), path)?;
    tmp.keep();
    sync_dir(parent_of(path))
}

/// The file a result table grows in before it replaces `path`:
/// `.STEM.zvet-partial.EXT` in the same folder (hidden, so folder walks do
/// not read it as a spectrum; same extension, so it reads as the same kind
/// of table). A fresh `zvet fit` writes its rows there as they come and
/// renames it over `path` at the end ([`commit_partial`]); a run killed
/// half-way leaves the old `path` as it was and its rows in the partial
/// file, which `--resume` carries on.
pub fn partial_path(path: &Path) -> PathBuf {
    let stem = path.file_stem().map(|s| s.to_string_lossy()).unwrap_or_default();
    let name = match path.extension() {
        Some(ext) => format!(".{stem}.zvet-partial.{}", ext.to_string_lossy()),
        None => format!(".{stem}.zvet-partial"),
    };
    parent_of(path).join(name)
}

/// Rename a finished partial file (written, flushed and fsynced by its
/// writer) over `path` and make the rename durable. On error the old
/// `path` is untouched and the partial file stays.
pub fn commit_partial(partial: &Path, path: &Path) -> io::Result<()> {
    std::fs::rename(partial, path)?;
    sync_dir(parent_of(path))
}

/// Replace `path` with what `write` writes, atomically. Every write, the
/// flush and the fsync are checked; on any error the old file is untouched.
pub fn atomic_write(path: &Path, write: impl FnOnce(&mut dyn Write) -> io::Result<()>) -> io::Result<()> {
    let dir = parent_of(path);
    let (file, tmp) = create_temp(dir, "")?;
    let mut buf = io::BufWriter::new(file);
    write(&mut buf)?;
    buf.flush()?;
    let file = buf.into_inner().map_err(|e| e.into_error())?;
    file.sync_all()?;
    drop(file);
    commit(tmp, path)
}

/// Replace `path` with a file that `create` makes at a temporary path of the
/// same folder (for writers that insist on creating the file themselves,
/// such as the FITS library). `create` must report every failure of its
/// writer (for the FITS library: end with [`close_fits`] rather than a
/// plain drop). A temporary whose name ends in `.fits` is then checked
/// against its own headers ([`crate::io::fits_layout_exact`]): a file shorter
/// or longer than its HDUs declare is an error, not a success. The
/// temporary file is removed on failure.
pub fn atomic_create<E: From<io::Error>>(
    path: &Path,
    suffix: &str,
    create: impl FnOnce(&Path) -> Result<(), E>,
) -> Result<(), E> {
    let dir = parent_of(path);
    // Reserve a unique name with the default mode, then free it for the writer
    // (which creates it again with the same default mode).
    let (file, tmp) = create_temp(dir, suffix)?;
    drop(file);
    std::fs::remove_file(tmp.path())?;
    create(tmp.path())?;
    if suffix.eq_ignore_ascii_case(".fits") {
        crate::io::fits_layout_exact(tmp.path())
            .map_err(|e| io::Error::other(format!("the FITS file written is damaged: {e}")))?;
    }
    File::open(tmp.path())?.sync_all()?;
    Ok(commit(tmp, path)?)
}

/// Write a set of files into the folder `dir` (created if needed) as a
/// whole or not at all: `fill` writes them into a temporary folder inside
/// `dir`; only when every file is written and fsynced are they renamed into
/// `dir`, one rename each (renames take no space, so a full disk cannot
/// stop the set half-way). On failure the temporary folder is removed and
/// the old files stay. Other files of `dir` are left alone.
pub fn atomic_dir<E: From<io::Error>>(
    dir: &Path,
    fill: impl FnOnce(&Path) -> Result<(), E>,
) -> Result<(), E> {
    std::fs::create_dir_all(dir)?;
    let tmp = loop {
        let p = temp_name(dir, ".d");
        match std::fs::create_dir(&p) {
            Ok(()) => break TempPath(Some(p)),
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => continue,
            Err(e) => return Err(e.into()),
        }
    };
    fill(tmp.path())?;
    let mut names = Vec::new();
    for e in std::fs::read_dir(tmp.path())? {
        let e = e?;
        if e.file_type()?.is_file() {
            File::open(e.path())?.sync_all()?;
            names.push(e.file_name());
        }
    }
    sync_dir(tmp.path())?;
    for name in &names {
        std::fs::rename(tmp.path().join(name), dir.join(name))?;
    }
    drop(tmp);
    sync_dir(dir)?;
    Ok(())
}

/// Close a FITS file written by the FITS library and check what reached
/// the disk. The library reports every write's status, but its close (on
/// drop) flushes the last buffers and rewrites the table header silently;
/// on a full disk that flush fails unseen. So the closed file is read back
/// ([`crate::io::fits_layout_exact`]): its length must be exactly what its
/// headers declare, and its last HDU (the table written) must have `rows`
/// rows (NAXIS2). Anything else is an error.
pub fn close_fits(f: fitsio::FitsFile, rows: usize) -> io::Result<()> {
    let path = f.file_path().to_path_buf();
    drop(f);
    let layout = crate::io::fits_layout_exact(&path)
        .map_err(|e| io::Error::other(format!("the FITS file written is incomplete: {e}")))?;
    let naxis2 = layout.last().and_then(|h| h.naxis.get(1)).copied();
    if naxis2 != Some(rows as u64) {
        return Err(io::Error::other(format!(
            "the FITS file written is incomplete: its table has {} rows, {rows} were written",
            naxis2.map_or("no".into(), |n| n.to_string())
        )));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn names(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn replaces_and_leaves_no_temporaries() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.txt");
        atomic_write(&p, |w| w.write_all(b"one")).unwrap();
        atomic_write(&p, |w| w.write_all(b"two")).unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "two");
        // A failing writer leaves the old file and no temporary behind.
        let r = atomic_write(&p, |w| {
            w.write_all(b"half")?;
            Err(io::Error::other("boom"))
        });
        assert!(r.is_err());
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "two");
        let r: Result<(), io::Error> = atomic_create(&p, ".txt", |t| {
            std::fs::write(t, "x")?;
            Err(io::Error::other("boom"))
        });
        assert!(r.is_err());
        atomic_create::<io::Error>(&p, ".txt", |t| std::fs::write(t, "three")).unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "three");
        assert_eq!(names(dir.path()), vec!["a.txt".to_string()]);
    }

    #[test]
    fn the_partial_file_is_hidden_beside_its_output_with_the_same_extension() {
        let p = Path::new("runs/out.csv");
        assert_eq!(partial_path(p), Path::new("runs/.out.zvet-partial.csv"));
        assert_eq!(
            partial_path(Path::new("t.jsonl")),
            Path::new("./.t.zvet-partial.jsonl")
        );
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("o.csv");
        std::fs::write(&out, "old").unwrap();
        std::fs::write(partial_path(&out), "new").unwrap();
        commit_partial(&partial_path(&out), &out).unwrap();
        assert_eq!(std::fs::read_to_string(&out).unwrap(), "new");
        assert_eq!(names(dir.path()), vec!["o.csv".to_string()]);
    }

    #[test]
    fn a_damaged_fits_temporary_is_not_renamed_into_place() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.fits");
        std::fs::write(&p, b"old").unwrap();
        // One header block declaring 8000 bytes of data that are not there.
        let mut h = String::new();
        for c in [
            "SIMPLE  =                    T",
            "BITPIX  =                    8",
            "NAXIS   =                    1",
            "NAXIS1  =                 8000",
            "END",
        ] {
            h.push_str(&format!("{c:<80}"));
        }
        let mut block = h.into_bytes();
        block.resize(2880, b' ');
        let r: Result<(), io::Error> = atomic_create(&p, ".fits", |t| std::fs::write(t, &block));
        let e = r.unwrap_err().to_string();
        assert!(e.contains("damaged"), "{e}");
        assert_eq!(std::fs::read(&p).unwrap(), b"old");
        assert_eq!(names(dir.path()), vec!["t.fits".to_string()]);
    }

    #[test]
    fn a_set_of_files_is_written_whole_or_not_at_all() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("report");
        atomic_dir::<io::Error>(&out, |d| {
            std::fs::write(d.join("a.html"), "old a")?;
            std::fs::write(d.join("b.json"), "old b")
        })
        .unwrap();
        std::fs::write(out.join("mine.txt"), "not ours").unwrap();
        // Fails half-way: the old set stays whole.
        let r: Result<(), io::Error> = atomic_dir(&out, |d| {
            std::fs::write(d.join("a.html"), "new a")?;
            Err(io::Error::other("disk full"))
        });
        assert!(r.is_err());
        let all = vec!["a.html".to_string(), "b.json".to_string(), "mine.txt".to_string()];
        assert_eq!(names(&out), all);
        assert_eq!(std::fs::read_to_string(out.join("a.html")).unwrap(), "old a");
        atomic_dir::<io::Error>(&out, |d| {
            std::fs::write(d.join("a.html"), "new a")?;
            std::fs::write(d.join("b.json"), "new b")
        })
        .unwrap();
        assert_eq!(std::fs::read_to_string(out.join("a.html")).unwrap(), "new a");
        assert_eq!(std::fs::read_to_string(out.join("b.json")).unwrap(), "new b");
        assert_eq!(names(&out), all);
    }

    #[cfg(unix)]
    #[test]
    fn new_files_take_the_default_mode_not_owner_only() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("x.csv");
        atomic_write(&p, |w| w.write_all(b"a")).unwrap();
        // Compare with a file the standard library creates the plain way
        // (mode 0666 less the process umask).
        let plain = dir.path().join("plain");
        File::create(&plain).unwrap();
        let mode = |q: &Path| std::fs::metadata(q).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode(&p), mode(&plain));
    }
}
