/*!
Result tables: one [`FitRecord`] per object, written as JSON Lines (the whole
record, see [`super::record`]), or as CSV or a FITS binary table (its flat
summary, [`FitRow`]), chosen by the file extension; read back for
`--resume`, `--merge` and importing into a campaign.

CSV and JSON Lines are written row by row and flushed, every write checked,
so an interrupted run (a kill, a full disk) loses at most the row being
written; that torn row is cut off when `--resume` reopens the file
([`repair_tail`]) and the run carries on. A fresh table grows in a hidden
partial file beside its output (`campaign::partial_path`) and is renamed
over the output only when every row is written and fsynced, so a fresh run
that is killed or fails never truncates an older good table; `--resume`
carries on the partial file when there is one, else appends to the output
itself ([`resume_source`]). A FITS table is written once at the end through
the one atomic output path (`io::atomic::atomic_create`): a temporary file,
checked, renamed into place — or an error, and the old file stays.
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

/// Read every record of a result table (CSV and FITS rows give their
/// summary, see [`FitRecord::from_flat`]). A torn last row of a CSV or JSON
/// Lines table (see [`complete_len`]) is not read; any other bad row is an
/// error naming its line.
pub fn read_records(path: &Path) -> Result<Vec<FitRecord>, TableError> {
    match TableFormat::from_path(path)? {
        TableFormat::Csv => {
            let bytes = std::fs::read(path).map_err(io_err(path))?;
            let bytes = &bytes[..complete_len(&bytes)];
            let mut rd = csv::Reader::from_reader(bytes);
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
            let bytes = &bytes[..complete_len(&bytes)];
            let mut out = Vec::new();
            for (i, raw) in bytes.split(|&b| b == b'\n').enumerate() {
                let Ok(line) = std::str::from_utf8(raw) else {
                    return Err(fmt_err(path, format!("line {}: not UTF-8 text", i + 1)));
                };
                if line.trim().is_empty() {
                    continue;
                }
                match FitRecord::from_json_line(line) {
                    Ok(r) => out.push(r),
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

/// The existing file whose rows a resumed run (`RowWriter::create(path,
/// true)`) keeps and carries on: the partial file of a fresh run that was
/// killed or failed (see [`RowWriter::create`]) when there is one, else
/// `path` itself when it exists, else `None`.
pub fn resume_source(path: &Path) -> Option<PathBuf> {
    if TableFormat::from_path(path).ok() != Some(TableFormat::Fits) {
        let partial = crate::campaign::partial_path(path);
        if partial.is_file() {
            return Some(partial);
        }
    }
    path.exists().then(|| path.to_path_buf())
}

/// Writes rows to a result table as they come.
pub struct RowWriter {
    /// The output table.
    path: PathBuf,
    /// The file written now: `path`, or its partial file for a fresh CSV or
    /// JSON Lines table (renamed over `path` by [`RowWriter::finish`]).
    target: PathBuf,
    kind: WriterKind,
}

enum WriterKind {
    Csv(Box<csv::Writer<File>>),
    Jsonl(BufWriter<File>),
    Fits(Vec<FitRow>),
}

impl RowWriter {
    /// Start writing the table `path`.
    ///
    /// Fresh (`append` false): a CSV or JSON Lines table is written into its
    /// partial file (`campaign::partial_path`, truncated first) and renamed
    /// over `path` by [`RowWriter::finish`]; until then an existing `path`
    /// is left exactly as it was, and a writer dropped without `finish` (a
    /// failed run) or a killed process leaves its rows in the partial file.
    ///
    /// With `append`, the rows of [`resume_source`] are kept and new rows
    /// added after them (a torn last row is cut off first, see
    /// [`repair_tail`]): a partial file is carried on and renamed over `path`
    /// at the end; otherwise `path` is appended to in place (created when
    /// missing). A FITS table is always written whole at the end.
    pub fn create(path: &Path, append: bool) -> Result<RowWriter, TableError> {
        let format = TableFormat::from_path(path)?;
        let source = if append { resume_source(path) } else { None };
        let exists = source.is_some();
        let target = match (format, source) {
            (TableFormat::Fits, _) => path.to_path_buf(),
            (_, Some(s)) => s,
            // `--resume` with nothing to resume: grow the output in place,
            // there is no older table to keep.
            (_, None) if append => path.to_path_buf(),
            (_, None) => crate::campaign::partial_path(path),
        };
        if exists {
            repair_tail(&target)?;
        }
        let open = |target: &Path| {
            std::fs::OpenOptions::new()
                .create(true)
                .append(exists)
                .write(true)
                .truncate(!exists)
                .open(target)
                .map_err(io_err(path))
        };
        let kind = match format {
            TableFormat::Csv => {
                let f = open(&target)?;
                let has_rows = exists && f.metadata().map(|m| m.len() > 0).unwrap_or(false);
                WriterKind::Csv(Box::new(
                    csv::WriterBuilder::new().has_headers(!has_rows).from_writer(f),
                ))
            }
            TableFormat::Jsonl => WriterKind::Jsonl(BufWriter::new(open(&target)?)),
            TableFormat::Fits => WriterKind::Fits(if exists {
                super::table_fits::read(path)?
            } else {
                Vec::new()
            }),
        };
        Ok(RowWriter {
            path: path.to_path_buf(),
            target,
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

    /// Finish the file: CSV and JSON Lines are flushed and fsynced, a
    /// partial file renamed over the output, and the folder fsynced; a FITS
    /// table is written now, atomically. Every error is returned (and the
    /// old output stays).
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
        drop(file);
        if self.target != *path {
            return crate::campaign::commit_partial(&self.target, path).map_err(io_err(path));
        }
        let dir = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p,
            _ => Path::new("."),
        };
        crate::campaign::sync_dir(dir).map_err(io_err(dir))
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
