/*!
Where the window keeps things between runs: the inspector's name (a small
text file in the user's config directory) and the review logs of the demo and
of loose files (the user's data directory), both found with the `directories`
crate.
*/
use std::path::{Path, PathBuf};

fn dirs() -> Option<directories::ProjectDirs> {
    directories::ProjectDirs::from("", "", "zvet")
}

/// The file that remembers the inspector's name.
pub fn name_file() -> Option<PathBuf> {
    dirs().map(|d| d.config_dir().join("inspector.txt"))
}

/// The remembered name, if any (an unreadable file counts as none).
pub fn read_name(path: &Path) -> Option<String> {
    let s = std::fs::read_to_string(path).ok()?;
    let s = s.trim();
    (!s.is_empty()).then(|| s.to_string())
}

/// Remember `name` in `path` (creating the folder), through the library's
/// one atomic output path ([`crate::campaign::atomic_write`]).
pub fn write_name(path: &Path, name: &str) -> std::io::Result<()> {
    if let Some(dir) = path.parent() {
        std::fs::create_dir_all(dir)?;
    }
    crate::campaign::atomic_write(path, |w| writeln!(w, "{}", name.trim()))
}

/// Folder of the demo survey's review logs (work on the demo persists).
pub fn demo_log_folder(seed: u64) -> Option<PathBuf> {
    dirs().map(|d| d.data_dir().join(format!("demo-{seed}")).join("reviews"))
}

/// Folder of the review logs for spectra opened without a campaign.
pub fn loose_log_folder() -> Option<PathBuf> {
    dirs().map(|d| d.data_dir().join("loose").join("reviews"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn name_round_trips() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("sub").join("inspector.txt");
        assert_eq!(read_name(&p), None);
        write_name(&p, " kim ").unwrap();
        assert_eq!(read_name(&p).as_deref(), Some("kim"));
        write_name(&p, "ana").unwrap();
        assert_eq!(read_name(&p).as_deref(), Some("ana"));
        // replaced whole, no temporary left behind
        let names: Vec<_> = std::fs::read_dir(p.parent().unwrap())
            .unwrap()
            .map(|e| e.unwrap().file_name())
            .collect();
        assert_eq!(names, [p.file_name().unwrap()]);
    }
}
