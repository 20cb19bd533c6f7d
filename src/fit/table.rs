/*!
The per-object result table of `zvet fit`: one [`FitRow`] per object, written
as CSV, JSON Lines or a FITS binary table (chosen by the file extension),
read back for `--resume` and `--merge`.

CSV and JSON Lines are written row by row and flushed, every write checked,
so an interrupted run (a kill, a full disk) loses at most the row being
written; that torn row is cut off when `--resume` reopens the file
([`repair_tail`]) and the run carries on. A FITS table is written once at the
end through the one atomic output path (`campaign::atomic_create`): a
temporary file, the FITS library's status checked, renamed into place — or an
error, and the old file stays.
Missing numbers are empty (CSV), `null` (JSON) or NaN (FITS).
*/
use super::result::FitResult;
use serde::{Deserialize, Serialize};
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

/// Errors of the result table.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum TableError {
    /// The extension names no known format.
    #[error("{0}: unknown output format (use .csv, .jsonl or .fits)")]
    UnknownFormat(PathBuf),
    /// File-system trouble.
    #[error("{path}: {source}")]
    Io {
        /// the file
        path: PathBuf,
        /// the cause
        source: std::io::Error,
    },
    /// A row could not be read or written.
    #[error("{path}: {message}")]
    Format {
        /// the file
        path: PathBuf,
        /// what went wrong (with the line number where known)
        message: String,
    },
}

/// File format of a result table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TableFormat {
    /// Comma-separated values with a header line.
    Csv,
    /// One JSON object per line.
    Jsonl,
    /// A FITS binary-table extension named `FITS_RESULTS`.
    Fits,
}

impl TableFormat {
    /// The format named by `path`'s extension.
    pub fn from_path(path: &Path) -> Result<TableFormat, TableError> {
        let ext = path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase);
        match ext.as_deref() {
            Some("csv") => Ok(TableFormat::Csv),
            Some("jsonl") | Some("ndjson") => Ok(TableFormat::Jsonl),
            Some("fits") | Some("fit") => Ok(TableFormat::Fits),
            _ => Err(TableError::UnknownFormat(path.to_path_buf())),
        }
    }
}

/// One output row: the best answer, the next two candidates, or an error.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct FitRow {
    /// Object id.
    pub object_id: String,
    /// Input file (and HDU/row when inside a multi-object file).
    pub source: String,
    /// `galaxy`, `quasar` or `star` (empty on error).
    pub class: String,
    /// Best redshift.
    pub z: Option<f64>,
    /// Its 1σ uncertainty.
    pub z_err: Option<f64>,
    /// χ² of the best solution.
    pub chi2: Option<f64>,
    /// χ² per degree of freedom.
    pub chi2_reduced: Option<f64>,
    /// χ² of the next distinct solution minus the best (empty if none).
    pub delta_chi2: Option<f64>,
    /// Warning bits (see `Warnings`).
    pub warnings: u32,
    /// Names of the set warning bits joined by `|`.
    pub warning_names: String,
    /// Best template (stars) or class basis.
    pub template: String,
    /// Median per-pixel S/N.
    pub snr_median: Option<f64>,
    /// Good pixels on the engine grid.
    pub n_good: Option<u64>,
    /// Second candidate: redshift.
    pub z_2: Option<f64>,
    /// Second candidate: class.
    pub class_2: String,
    /// Second candidate: χ².
    pub chi2_2: Option<f64>,
    /// Third candidate: redshift.
    pub z_3: Option<f64>,
    /// Third candidate: class.
    pub class_3: String,
    /// Third candidate: χ².
    pub chi2_3: Option<f64>,
    /// `chi2` or `xcorr`.
    pub method: String,
    /// Why this object could not be fitted (empty when it was).
    pub error: String,
    /// Best solution of every class, `class:template:z:χ²` joined by `;`
    /// (see [`ClassSolution::join`](super::result::ClassSolution::join);
    /// empty in tables written before it existed).
    #[serde(default)]
    pub per_class: String,
}

fn finite(v: f64) -> Option<f64> {
    // f64::MAX is the engine's "no runner-up" value
    (v.is_finite() && v < f64::MAX).then_some(v)
}

impl FitRow {
    /// The row for a successful fit.
    pub fn from_result(r: &FitResult, source: &str, method: &str) -> FitRow {
        let c = |i: usize| r.candidates.get(i);
        let best = c(0);
        FitRow {
            object_id: r.object_id.clone(),
            source: source.to_string(),
            class: best.map(|b| b.class.to_string()).unwrap_or_default(),
            z: best.and_then(|b| finite(b.z)),
            z_err: best.and_then(|b| finite(b.z_err)),
            chi2: best.and_then(|b| finite(b.chi2)),
            chi2_reduced: finite(r.chi2_reduced),
            delta_chi2: finite(r.delta_chi2),
            warnings: r.warnings.0,
            warning_names: r.warnings.names(),
            template: best.map(|b| b.template.clone()).unwrap_or_default(),
            snr_median: finite(r.snr_median),
            n_good: Some(r.n_good as u64),
            z_2: c(1).and_then(|b| finite(b.z)),
            class_2: c(1).map(|b| b.class.to_string()).unwrap_or_default(),
            chi2_2: c(1).and_then(|b| finite(b.chi2)),
            z_3: c(2).and_then(|b| finite(b.z)),
            class_3: c(2).map(|b| b.class.to_string()).unwrap_or_default(),
            chi2_3: c(2).and_then(|b| finite(b.chi2)),
            method: method.to_string(),
            error: String::new(),
            per_class: super::result::ClassSolution::join(&r.per_class),
        }
    }

    /// The row for an object that could not be read or fitted.
    pub fn failed(object_id: &str, source: &str, error: &str) -> FitRow {
        FitRow {
            object_id: object_id.to_string(),
            source: source.to_string(),
            error: error.replace(['\n', '\r'], " "),
            ..FitRow::default()
        }
    }
}

fn io_err(path: &Path) -> impl FnOnce(std::io::Error) -> TableError + '_ {
    move |source| TableError::Io {
        path: path.to_path_buf(),
        source,
    }
}

fn fmt_err(path: &Path, message: impl std::fmt::Display) -> TableError {
    TableError::Format {
        path: path.to_path_buf(),
        message: message.to_string(),
    }
}

/// The length of the complete rows of a CSV or JSON Lines table: everything
/// up to and including its last line end. An interrupted writer (a kill, a
/// full disk) can leave a torn last row without its line end; it is not a
/// row.
pub fn complete_len(bytes: &[u8]) -> usize {
    bytes.iter().rposition(|&b| b == b'\n').map_or(0, |i| i + 1)
}

/// Cut a torn last row off a CSV or JSON Lines table so that rows appended
/// later start on a line of their own. Returns the number of bytes cut (0
/// when the file ends with a complete row or does not exist). A FITS table
/// is never torn (it is written whole or not at all).
pub fn repair_tail(path: &Path) -> Result<u64, TableError> {
    if TableFormat::from_path(path)? == TableFormat::Fits {
        return Ok(0);
    }
    let bytes = match std::fs::read(path) {
        Ok(b) => b,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(0),
        Err(e) => return Err(io_err(path)(e)),
    };
    let keep = complete_len(&bytes);
    if keep == bytes.len() {
        return Ok(0);
    }
    let f = std::fs::OpenOptions::new()
        .write(true)
        .open(path)
        .map_err(io_err(path))?;
    f.set_len(keep as u64).map_err(io_err(path))?;
    f.sync_all().map_err(io_err(path))?;
    Ok((bytes.len() - keep) as u64)
}

/// Read every row of a result table. A torn last row of a CSV or JSON Lines
/// table (see [`complete_len`]) is not read; any other bad row is an error
/// naming its line.
pub fn read_rows(path: &Path) -> Result<Vec<FitRow>, TableError> {
    match TableFormat::from_path(path)? {
        TableFormat::Csv => {
            let bytes = std::fs::read(path).map_err(io_err(path))?;
            let bytes = &bytes[..complete_len(&bytes)];
            let mut rd = csv::Reader::from_reader(bytes);
            let mut out = Vec::new();
            for (i, rec) in rd.deserialize().enumerate() {
                match rec {
                    Ok(r) => out.push(r),
                    Err(e) => return Err(fmt_err(path, format!("row {}: {e}", i + 1))),
                }
            }
            Ok(out)
        }
        TableFormat::Jsonl => {
            let bytes = std::fs::read(path).map_err(io_err(path))?;
            let bytes = &bytes[..complete_len(&bytes)];
            let mut out = Vec::new();
            for (i, line) in bytes.split(|&b| b == b'\n').enumerate() {
                let Ok(line) = std::str::from_utf8(line) else {
                    return Err(fmt_err(path, format!("line {}: not UTF-8 text", i + 1)));
                };
                if line.trim().is_empty() {
                    continue;
                }
                match serde_json::from_str(line) {
                    Ok(r) => out.push(r),
                    Err(e) => return Err(fmt_err(path, format!("line {}: {e}", i + 1))),
                }
            }
            Ok(out)
        }
        TableFormat::Fits => super::table_fits::read(path),
    }
}

/// Writes rows to a result table as they come.
pub struct RowWriter {
    path: PathBuf,
    kind: WriterKind,
}

enum WriterKind {
    Csv(Box<csv::Writer<File>>),
    Jsonl(BufWriter<File>),
    Fits(Vec<FitRow>),
}

impl RowWriter {
    /// Create `path` (or, with `append`, add to it: existing rows are kept
    /// and a torn last row is cut off first, see [`repair_tail`]).
    pub fn create(path: &Path, append: bool) -> Result<RowWriter, TableError> {
        let exists = append && path.exists();
        if exists {
            repair_tail(path)?;
        }
        let kind = match TableFormat::from_path(path)? {
            TableFormat::Csv => {
                let f = std::fs::OpenOptions::new()
                    .create(true)
                    .append(exists)
                    .write(true)
                    .truncate(!exists)
                    .open(path)
                    .map_err(io_err(path))?;
                let has_rows = exists && f.metadata().map(|m| m.len() > 0).unwrap_or(false);
                WriterKind::Csv(Box::new(
                    csv::WriterBuilder::new().has_headers(!has_rows).from_writer(f),
                ))
            }
            TableFormat::Jsonl => {
                let f = std::fs::OpenOptions::new()
                    .create(true)
                    .append(exists)
                    .write(true)
                    .truncate(!exists)
                    .open(path)
                    .map_err(io_err(path))?;
                WriterKind::Jsonl(BufWriter::new(f))
            }
            TableFormat::Fits => WriterKind::Fits(if exists { read_rows(path)? } else { Vec::new() }),
        };
        Ok(RowWriter {
            path: path.to_path_buf(),
            kind,
        })
    }

    /// Write one row (flushed for CSV and JSON Lines).
    pub fn write(&mut self, row: &FitRow) -> Result<(), TableError> {
        let path = self.path.clone();
        match &mut self.kind {
            WriterKind::Csv(w) => {
                w.serialize(row).map_err(|e| fmt_err(&path, e))?;
                w.flush().map_err(io_err(&path))
            }
            WriterKind::Jsonl(w) => {
                let line = serde_json::to_string(row).map_err(|e| fmt_err(&path, e))?;
                writeln!(w, "{line}").map_err(io_err(&path))?;
                w.flush().map_err(io_err(&path))
            }
            WriterKind::Fits(rows) => {
                rows.push(row.clone());
                Ok(())
            }
        }
    }

    /// Finish the file: CSV and JSON Lines are flushed and fsynced (with
    /// their folder); a FITS table is written now, atomically. Every error is
    /// returned.
    pub fn finish(self) -> Result<(), TableError> {
        let path = &self.path;
        let file = match self.kind {
            WriterKind::Csv(w) => w
                .into_inner()
                .map_err(|e| io_err(path)(std::io::Error::other(e.to_string())))?,
            WriterKind::Jsonl(w) => w.into_inner().map_err(|e| io_err(path)(e.into_error()))?,
            WriterKind::Fits(rows) => return super::table_fits::write(path, &rows),
        };
        file.sync_all().map_err(io_err(path))?;
        let dir = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p,
            _ => Path::new("."),
        };
        crate::campaign::sync_dir(dir).map_err(io_err(dir))
    }
}

/// Write `rows` to `path` (replacing it).
pub fn write_rows(path: &Path, rows: &[FitRow]) -> Result<(), TableError> {
    let mut w = RowWriter::create(path, false)?;
    for r in rows {
        w.write(r)?;
    }
    w.finish()
}
