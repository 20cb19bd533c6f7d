/*!
Finding the inputs: files given by name, folders walked for spectrum files,
and what is skipped on the way.

- A folder walk follows each real directory once (symbolic links to folders
  are followed, a link back to a folder already seen is not), so `ln -s . x`
  loops cannot make it hang or list a file twice.
- FIFOs, sockets and devices are never opened (opening a FIFO blocks): found
  in a folder they are skipped with a note; named directly they are an error.
- A subfolder that cannot be read and a file name that is not UTF-8 are
  problems: the walk goes on, and the caller ends with a failure status.
- Files to leave out (the run's own output) are not read back.
- Text tables that are recognisably not spectra — a header with no wavelength
  column and either `ra`/`dec` columns (a catalogue) or no flux column (a
  truth table) — are skipped with one note.
*/
use crate::io::{has_spectrum_extension, synonyms, ReadOptions};
use std::collections::HashSet;
use std::io::Read;
use std::path::{Path, PathBuf};

/// What a search for inputs found.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Inputs {
    /// Files to read, in order: named files as given, each folder's files
    /// sorted by path.
    pub files: Vec<PathBuf>,
    /// Things skipped that are not failures (special files, link loops,
    /// tables that are not spectra), one line each.
    pub notes: Vec<String>,
    /// Inputs that could not be searched (the run must end in failure).
    pub problems: Vec<String>,
}

/// `path` as the file system names it (for comparing inputs and outputs): the
/// canonical path, or for a file not yet written its canonical folder joined
/// with its name.
pub fn canonical_target(path: &Path) -> PathBuf {
    if let Ok(p) = std::fs::canonicalize(path) {
        return p;
    }
    let parent = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    match (std::fs::canonicalize(parent), path.file_name()) {
        (Ok(d), Some(n)) => d.join(n),
        _ => path.to_path_buf(),
    }
}

/// Refuse an output that is one of the named inputs (writing it would
/// destroy the input before it is read).
pub fn check_output(inputs: &[PathBuf], output: &Path) -> Result<(), String> {
    let out = canonical_target(output);
    for p in inputs {
        if p.is_file() && canonical_target(p) == out {
            return Err(format!(
                "the output {} is also an input; write the results elsewhere",
                output.display()
            ));
        }
    }
    Ok(())
}

/// Expand `paths` into the files to read. `exclude` lists files never to
/// read (the run's outputs); `opts` tells which column names count as a
/// wavelength or flux column when tables are checked.
pub fn find(paths: &[PathBuf], exclude: &[PathBuf], opts: &ReadOptions) -> Inputs {
    let exclude: HashSet<PathBuf> = exclude.iter().map(|p| canonical_target(p)).collect();
    let mut out = Inputs::default();
    let mut seen_dirs: HashSet<PathBuf> = HashSet::new();
    let mut not_spectra: Vec<String> = Vec::new();
    let mut special = 0usize;
    for p in paths {
        match std::fs::metadata(p) {
            Ok(m) if m.is_dir() => {
                let mut found = Vec::new();
                let mut walk = Walk {
                    seen: &mut seen_dirs,
                    found: &mut found,
                    notes: &mut out.notes,
                    problems: &mut out.problems,
                    special: &mut special,
                };
                walk.dir(p);
                found.sort();
                for f in found {
                    if exclude.contains(&canonical_target(&f)) {
                        continue;
                    }
                    if let Some(why) = not_a_spectrum_table(&f, opts) {
                        not_spectra.push(format!("{} ({why})", f.display()));
                        continue;
                    }
                    out.files.push(f);
                }
            }
            Ok(m) if !m.is_file() => out.problems.push(format!(
                "{}: not a regular file (a FIFO, socket or device); not read",
                p.display()
            )),
            // a missing file is kept so that reading it reports the error
            _ => {
                if exclude.contains(&canonical_target(p)) {
                    continue;
                }
                if let Some(why) = not_a_spectrum_table(p, opts) {
                    not_spectra.push(format!("{} ({why})", p.display()));
                    continue;
                }
                out.files.push(p.clone());
            }
        }
    }
    if special > 0 {
        out.notes.push(format!(
            "{special} other special file(s) (FIFO, socket, device) skipped"
        ));
    }
    if !not_spectra.is_empty() {
        out.notes.push(format!(
            "skipped {} table(s) that are not spectra: {}",
            not_spectra.len(),
            not_spectra.join(", ")
        ));
    }
    out
}

struct Walk<'a> {
    seen: &'a mut HashSet<PathBuf>,
    found: &'a mut Vec<PathBuf>,
    notes: &'a mut Vec<String>,
    problems: &'a mut Vec<String>,
    special: &'a mut usize,
}

impl Walk<'_> {
    fn dir(&mut self, dir: &Path) {
        let real = match std::fs::canonicalize(dir) {
            Ok(r) => r,
            Err(e) => {
                self.problems.push(format!("{}: {e}", dir.display()));
                return;
            }
        };
        if !self.seen.insert(real) {
            // a link back to a folder already walked (e.g. `ln -s . x`)
            self.notes.push(format!(
                "{}: a folder already searched; not searched again",
                dir.display()
            ));
            return;
        }
        let rd = match std::fs::read_dir(dir) {
            Ok(rd) => rd,
            Err(e) => {
                self.problems
                    .push(format!("{}: cannot read this folder: {e}", dir.display()));
                return;
            }
        };
        for entry in rd {
            let entry = match entry {
                Ok(e) => e,
                Err(e) => {
                    self.problems
                        .push(format!("{}: cannot list this folder: {e}", dir.display()));
                    continue;
                }
            };
            let p = entry.path();
            let Some(name) = entry.file_name().to_str().map(str::to_string) else {
                self.problems.push(format!(
                    "{}: the file name is not UTF-8 text; not read (rename it)",
                    p.display()
                ));
                continue;
            };
            if name.starts_with('.') {
                continue;
            }
            // follow links; a dangling link is a note
            let meta = match std::fs::metadata(&p) {
                Ok(m) => m,
                Err(e) => {
                    if std::fs::symlink_metadata(&p).is_ok_and(|m| m.file_type().is_symlink()) {
                        self.notes
                            .push(format!("{}: a link to nothing ({e}); skipped", p.display()));
                    } else {
                        self.problems.push(format!("{}: {e}", p.display()));
                    }
                    continue;
                }
            };
            if meta.is_dir() {
                self.dir(&p);
            } else if !meta.is_file() {
                if has_spectrum_extension(&p) {
                    self.notes.push(format!(
                        "{}: not a regular file (FIFO, socket or device); skipped",
                        p.display()
                    ));
                } else {
                    *self.special += 1;
                }
            } else if has_spectrum_extension(&p) {
                self.found.push(p);
            }
        }
    }
}

/// Why a text table is recognisably not a spectrum, if it is one of those:
/// its header has no wavelength column, and has `ra` and `dec` (a catalogue)
/// or no flux column (a truth table or the like). FITS and header-less files
/// are left to the readers.
pub fn not_a_spectrum_table(path: &Path, opts: &ReadOptions) -> Option<&'static str> {
    let mut head = Vec::with_capacity(16 * 1024);
    let f = std::fs::File::open(path).ok()?;
    f.take(16 * 1024).read_to_end(&mut head).ok()?;
    if head.starts_with(b"SIMPLE  =") || head.starts_with(&[0x1f, 0x8b]) || head.contains(&0) {
        return None;
    }
    let text = String::from_utf8_lossy(&head);
    let text = text.trim_start_matches('\u{feff}');
    let line = text
        .lines()
        .map(str::trim)
        .find(|l| !l.is_empty() && !l.starts_with('#'))?;
    let fields: Vec<String> = if line.contains(',') {
        line.split(',')
            .map(|s| s.trim().trim_matches('"').to_ascii_lowercase())
            .collect()
    } else if line.contains('\t') {
        line.split('\t')
            .map(|s| s.trim().trim_matches('"').to_ascii_lowercase())
            .collect()
    } else {
        line.split_whitespace()
            .map(|s| s.trim_matches('"').to_ascii_lowercase())
            .collect()
    };
    // a header names columns; a first line of numbers is data
    if fields.iter().all(|f| f.parse::<f64>().is_ok() || f.is_empty()) {
        return None;
    }
    let bare = |f: &String| -> String { f.split(['[', '(']).next().unwrap_or("").trim().to_string() };
    let names: Vec<String> = fields.iter().map(bare).collect();
    let has = |user: Option<&String>, lists: &[&[&str]]| -> bool {
        match user {
            Some(u) => names.contains(&u.to_ascii_lowercase()),
            None => names
                .iter()
                .any(|n| lists.iter().any(|l| l.contains(&n.as_str()))),
        }
    };
    let wave = has(
        opts.wave_col.as_ref(),
        &[synonyms::WAVE, synonyms::LOG10_WAVE, synonyms::LN_WAVE],
    );
    if wave {
        return None;
    }
    if has(None, &[synonyms::RA]) && has(None, &[synonyms::DEC]) {
        return Some("ra/dec columns and no wavelength column: a catalogue");
    }
    if !has(opts.flux_col.as_ref(), &[synonyms::FLUX]) {
        return Some("no wavelength or flux column");
    }
    None
}

/// About how many objects `files` hold, from their FITS headers only (for a
/// progress bar's time left, never for results): a binary table with a
/// vector column of 16 or more elements holds one object per row, a 2-D
/// image one per row (a multi-object frame; sky and unused rows included),
/// anything else one object per file.
pub fn estimate_objects(files: &[PathBuf]) -> u64 {
    files
        .iter()
        .map(|f| {
            let Ok(layout) = crate::io::fits_layout(f) else {
                return 1;
            };
            let mut n = 0u64;
            for h in &layout {
                let vector = h
                    .columns
                    .iter()
                    .any(|(_, c)| matches!(c, crate::io::ColumnForm::Fixed { repeat } if *repeat >= 16));
                match (h.xtension.as_deref(), h.naxis.as_slice()) {
                    (Some("BINTABLE"), [_, rows, ..]) if vector => n += rows,
                    (None | Some("IMAGE"), [len, rows]) if *len > 1 && *rows > 1 => n += rows,
                    _ => {}
                }
            }
            n.max(1)
        })
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn catalogues_and_truth_tables_are_recognised_spectra_kept() {
        let dir = tempfile::tempdir().unwrap();
        let w = |n: &str, t: &str| {
            let p = dir.path().join(n);
            std::fs::write(&p, t).unwrap();
            p
        };
        let o = ReadOptions::default();
        let cat = w("cat.csv", "id,ra,dec,mag_r\nA,10.0,-5.0,20.1\n");
        let truth = w("truth.csv", "id,class,z,kind\nA,galaxy,0.3,x\n");
        let spec = w("s.csv", "wave,flux,err\n4000,1,0.1\n");
        let spec_ra = w("s2.csv", "# wavelength flux ra dec\n4000 1 2 3\n");
        let bare = w("s3.txt", "4000 1 0.1\n4001 1 0.1\n");
        assert!(not_a_spectrum_table(&cat, &o).unwrap().contains("catalogue"));
        assert!(not_a_spectrum_table(&truth, &o).is_some());
        assert_eq!(not_a_spectrum_table(&spec, &o), None);
        assert_eq!(not_a_spectrum_table(&spec_ra, &o), None);
        assert_eq!(not_a_spectrum_table(&bare, &o), None);
        let found = find(&[dir.path().to_path_buf()], &[], &o);
        assert_eq!(found.files.len(), 3, "{found:?}");
        assert_eq!(found.notes.len(), 1, "{found:?}");
        assert!(found.problems.is_empty());
    }

    #[cfg(unix)]
    #[test]
    fn link_loops_fifos_and_bad_names_neither_hang_nor_repeat() {
        use std::os::unix::ffi::OsStrExt;
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::create_dir(d.join("sub")).unwrap();
        std::fs::write(d.join("sub/a.csv"), "wave,flux\n1,2\n").unwrap();
        std::os::unix::fs::symlink(".", d.join("x")).unwrap();
        std::os::unix::fs::symlink(".", d.join("sub/y")).unwrap();
        std::os::unix::fs::symlink("..", d.join("sub/up")).unwrap();
        let fifo = d.join("pipe.fits");
        let st = std::process::Command::new("mkfifo").arg(&fifo).status();
        let bad = d.join(std::ffi::OsStr::from_bytes(b"bad\xff.csv"));
        std::fs::write(&bad, "wave,flux\n1,2\n").unwrap();
        let found = find(&[d.to_path_buf()], &[], &ReadOptions::default());
        assert_eq!(found.files, vec![d.join("sub/a.csv")], "{found:?}");
        assert_eq!(found.problems.len(), 1, "{found:?}");
        assert!(found.problems[0].contains("not UTF-8"));
        if st.is_ok_and(|s| s.success()) {
            assert!(found.notes.iter().any(|n| n.contains("pipe.fits")), "{found:?}");
            // named directly: an error, and never opened
            let direct = find(&[fifo], &[], &ReadOptions::default());
            assert!(
                direct.files.is_empty() && direct.problems.len() == 1,
                "{direct:?}"
            );
        }
    }

    #[test]
    fn an_output_among_the_inputs_is_refused_and_one_inside_a_folder_left_out() {
        let dir = tempfile::tempdir().unwrap();
        let x = dir.path().join("x.csv");
        std::fs::write(&x, "wave,flux\n1,2\n").unwrap();
        assert!(check_output(std::slice::from_ref(&x), &x).is_err());
        assert!(check_output(std::slice::from_ref(&x), &dir.path().join("out.csv")).is_ok());
        let found = find(
            &[dir.path().to_path_buf()],
            std::slice::from_ref(&x),
            &ReadOptions::default(),
        );
        assert!(found.files.is_empty(), "{found:?}");
    }
}
