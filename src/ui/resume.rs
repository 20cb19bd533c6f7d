/*!
Resume: where an inspector was in a campaign — the object on screen, the
sort and filters of the queue, the smoothing and the view switches — kept in
a small JSON file beside that inspector's review log
(`reviews/NAME.resume.json`), so it is per campaign and per inspector and
travels with the campaign folder. Written (atomically) whenever it changes;
read when the inspector's log is opened. A missing or unreadable file only
means starting at the top of the queue; it never blocks reviewing.
*/
use crate::queue::{Filter, SortKey};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

use super::state::ViewSettings;

/// Format version of the file.
pub const RESUME_VERSION: u32 = 1;

/// What is remembered.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Resume {
    /// Format version.
    pub v: u32,
    /// Id of the object on screen.
    pub object: Option<String>,
    /// Sort key of the queue.
    pub sort: SortKey,
    /// Filter of the queue.
    pub filter: Filter,
    /// Boxcar smoothing width (px).
    pub smoothing: usize,
    /// The width follows each object's median S/N (automatic smoothing);
    /// false once the inspector set it by hand. Files without it: automatic.
    #[serde(default = "automatic")]
    pub auto_smoothing: bool,
    /// Rest-frame axis.
    pub rest_frame: bool,
    /// Model drawn.
    pub show_model: bool,
    /// Sky lines drawn.
    pub show_sky: bool,
}

impl Resume {
    /// The view settings it holds (smoothing clamped to what the window offers).
    pub fn view(&self) -> ViewSettings {
        ViewSettings {
            smoothing: self.smoothing.clamp(1, 51) | 1,
            rest_frame: self.rest_frame,
            show_model: self.show_model,
            show_sky: self.show_sky,
        }
    }
}

fn automatic() -> bool {
    true
}

/// The resume file that goes with the review log at `log`.
pub fn path_for(log: &Path) -> PathBuf {
    let stem = log
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "review".into());
    log.with_file_name(format!("{stem}.resume.json"))
}

/// Read `path`: `Ok(None)` when there is no file, an error text when it
/// cannot be used.
pub fn read(path: &Path) -> Result<Option<Resume>, String> {
    let text = match std::fs::read_to_string(path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(format!("{}: {e}", path.display())),
    };
    let r: Resume = serde_json::from_str(&text)
        .map_err(|e| format!("{}: not a resume file ({e}); starting at the top", path.display()))?;
    if r.v > RESUME_VERSION {
        return Err(format!(
            "{}: written by a newer zvet (version {}); starting at the top",
            path.display(),
            r.v
        ));
    }
    Ok(Some(r))
}

/// Write `r` to `path` through the library's one atomic output path
/// ([`crate::campaign::atomic_write`]: a temporary file, fsynced, renamed
/// over the old one), so a crash leaves either the old or the new file.
pub fn write(path: &Path, r: &Resume) -> std::io::Result<()> {
    let text = serde_json::to_string_pretty(r).map_err(std::io::Error::other)?;
    crate::campaign::atomic_write(path, |w| w.write_all(text.as_bytes()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_bad_files() {
        let dir = tempfile::tempdir().unwrap();
        let log = dir.path().join("kim.jsonl");
        let p = path_for(&log);
        assert_eq!(p.file_name().unwrap(), "kim.resume.json");
        assert_eq!(read(&p), Ok(None));
        let r = Resume {
            v: RESUME_VERSION,
            object: Some("obj7".into()),
            sort: SortKey::Snr,
            filter: Filter {
                min_snr: Some(2.0),
                ..Default::default()
            },
            smoothing: 9,
            auto_smoothing: false,
            rest_frame: true,
            show_model: false,
            show_sky: true,
        };
        write(&p, &r).unwrap();
        assert_eq!(read(&p), Ok(Some(r.clone())));
        // rewritten in place, no temporary left beside the log
        write(&p, &r).unwrap();
        let names: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name())
            .collect();
        assert_eq!(names, [p.file_name().unwrap()]);
        assert_eq!(r.view().smoothing, 9);
        std::fs::write(&p, "{ not json").unwrap();
        assert!(read(&p).unwrap_err().contains("not a resume file"));
    }
}
