/*!
Result tables: one [`FitRecord`] per object, written as JSON Lines (the whole
record, see [`super::record`]), or as CSV or a FITS binary table (its flat
summary, [`FitRow`]), chosen by the file extension; read back for
`--resume`, `--merge` and importing into a campaign.

CSV and JSON Lines are written row by row and flushed, so an interrupted run
loses at most the row being written and `--resume` carries on; a FITS table
is written once at the end through a temporary file that is then renamed.
Missing numbers are empty (CSV), `null` (JSON) or NaN (FITS).
*/
use super::record::{FitRecord, FitRow, TableError};
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

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

/// Read every record of a result table (CSV and FITS rows give their
/// summary, see [`FitRecord::from_flat`]). A torn last JSON line is skipped.
pub fn read_records(path: &Path) -> Result<Vec<FitRecord>, TableError> {
    match TableFormat::from_path(path)? {
        TableFormat::Csv => {
            let mut rd = csv::Reader::from_path(path).map_err(|e| fmt_err(path, e))?;
            let mut out = Vec::new();
            for (i, rec) in rd.deserialize::<FitRow>().enumerate() {
                match rec {
                    Ok(r) => out.push(FitRecord::from_flat(&r)),
                    Err(e) => return Err(fmt_err(path, format!("row {}: {e}", i + 1))),
                }
            }
            Ok(out)
        }
        TableFormat::Jsonl => {
            let bytes = std::fs::read(path).map_err(io_err(path))?;
            let n_lines = bytes.split(|&b| b == b'\n').count();
            let torn_tail = !bytes.is_empty() && !bytes.ends_with(b"\n");
            let mut out = Vec::new();
            for (i, raw) in bytes.split(|&b| b == b'\n').enumerate() {
                let last = i + 1 == n_lines;
                let line = match std::str::from_utf8(raw) {
                    Ok(l) => l,
                    // an interrupted writer can leave a torn last line: ignore only that one
                    Err(_) if last && torn_tail => continue,
                    Err(_) => return Err(fmt_err(path, format!("line {}: not UTF-8 text", i + 1))),
                };
                if line.trim().is_empty() {
                    continue;
                }
                match FitRecord::from_json_line(line) {
                    Ok(r) => out.push(r),
                    Err(_) if last && torn_tail => {}
                    Err(e) => return Err(fmt_err(path, format!("line {}: {e}", i + 1))),
                }
            }
            Ok(out)
        }
        TableFormat::Fits => Ok(super::table_fits::read(path)?
            .iter()
            .map(FitRecord::from_flat)
            .collect()),
    }
}

/// Read the flat summary rows of a result table.
pub fn read_rows(path: &Path) -> Result<Vec<FitRow>, TableError> {
    Ok(read_records(path)?.iter().map(FitRecord::flat).collect())
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
    /// Create `path` (or, with `append`, add to it: existing rows are kept).
    pub fn create(path: &Path, append: bool) -> Result<RowWriter, TableError> {
        let exists = append && path.exists();
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
            TableFormat::Fits => WriterKind::Fits(if exists {
                super::table_fits::read(path)?
            } else {
                Vec::new()
            }),
        };
        Ok(RowWriter {
            path: path.to_path_buf(),
            kind,
        })
    }

    /// Write one record (flushed for CSV and JSON Lines).
    pub fn write(&mut self, rec: &FitRecord) -> Result<(), TableError> {
        let path = self.path.clone();
        match &mut self.kind {
            WriterKind::Csv(w) => {
                w.serialize(rec.flat()).map_err(|e| fmt_err(&path, e))?;
                w.flush().map_err(io_err(&path))
            }
            WriterKind::Jsonl(w) => {
                let line = rec.to_json_line().map_err(|e| fmt_err(&path, e))?;
                writeln!(w, "{line}").map_err(io_err(&path))?;
                w.flush().map_err(io_err(&path))
            }
            WriterKind::Fits(rows) => {
                rows.push(rec.flat());
                Ok(())
            }
        }
    }

    /// Finish the file (FITS: written now, atomically).
    pub fn finish(self) -> Result<(), TableError> {
        match self.kind {
            WriterKind::Csv(mut w) => w.flush().map_err(io_err(&self.path)),
            WriterKind::Jsonl(mut w) => w.flush().map_err(io_err(&self.path)),
            WriterKind::Fits(rows) => super::table_fits::write(&self.path, &rows),
        }
    }
}

/// Write `records` to `path` (replacing it).
pub fn write_records(path: &Path, records: &[FitRecord]) -> Result<(), TableError> {
    let mut w = RowWriter::create(path, false)?;
    for r in records {
        w.write(r)?;
    }
    w.finish()
}

/// Join result tables (e.g. shard outputs) into `out`: records in the order
/// given, the first record of each id kept. Returns the number written.
pub fn merge_tables(inputs: &[PathBuf], out: &Path) -> Result<usize, TableError> {
    let mut seen = std::collections::HashSet::new();
    let mut records = Vec::new();
    for p in inputs {
        for r in read_records(p)? {
            if seen.insert(r.object_id.clone()) {
                records.push(r);
            }
        }
    }
    write_records(out, &records)?;
    Ok(records.len())
}
