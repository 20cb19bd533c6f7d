/*!
The one way zvet rewrites a file: write a temporary file in the same folder,
fsync it, rename it over the target, fsync the folder. A reader (or a crash)
sees the old file or the new one, never a half-written mixture. Review logs
are never rewritten; manifests, fit caches, exports and reports go through
here.
*/
use std::fs::File;
use std::io::{self, Write};
use std::path::Path;

fn parent_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// fsync a folder so a rename inside it is durable (no-op where folders
/// cannot be opened, e.g. on Windows).
fn sync_dir(dir: &Path) {
    if let Ok(d) = File::open(dir) {
        let _ = d.sync_all();
    }
}

/// Replace `path` with what `write` writes, atomically.
pub fn atomic_write(path: &Path, write: impl FnOnce(&mut dyn Write) -> io::Result<()>) -> io::Result<()> {
    let dir = parent_of(path);
    let mut tmp = tempfile::Builder::new().prefix(".zvet-tmp-").tempfile_in(dir)?;
    {
        let mut buf = io::BufWriter::new(tmp.as_file_mut());
        write(&mut buf)?;
        buf.flush()?;
    }
    tmp.as_file().sync_all()?;
    tmp.persist(path).map_err(|e| e.error)?;
    sync_dir(dir);
    Ok(())
}

/// Replace `path` with a file that `create` makes at a temporary path of the
/// same folder (for writers that insist on creating the file themselves,
/// such as the FITS library). The temporary file is removed on failure.
pub fn atomic_create<E: From<io::Error>>(
    path: &Path,
    suffix: &str,
    create: impl FnOnce(&Path) -> Result<(), E>,
) -> Result<(), E> {
    let dir = parent_of(path);
    // Reserve a unique name, then free it for the writer.
    let tmp = tempfile::Builder::new()
        .prefix(".zvet-tmp-")
        .suffix(suffix)
        .tempfile_in(dir)?
        .into_temp_path();
    std::fs::remove_file(&tmp)?;
    // `tmp` (a TempPath) deletes the file when dropped unless kept.
    create(&tmp)?;
    File::open(&tmp)?.sync_all()?;
    tmp.persist(path).map_err(|e| e.error)?;
    sync_dir(dir);
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

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
        let names: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(names.len(), 1);
    }
}
