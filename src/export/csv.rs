/*!
The catalogue as plain CSV: a header row of column names, then one row per
object (RFC 4180 quoting, UTF-8 without byte-order mark, empty field =
missing value, floats at their column's [`Precision`](super::Precision)).
Nothing else is in the file, so any CSV reader takes it with no options.

Provenance, units, types and column descriptions go to a JSON sidecar next to
it, named by appending `.json` to the whole file name (`cat.csv` →
`cat.csv.json`).
*/
use super::columns::{ColumnSpec, COLUMNS};
use super::{columns_json, ExportError, ExportRow, Provenance};
use crate::io::atomic::atomic_write;
use std::path::{Path, PathBuf};

/// The sidecar of a CSV catalogue: `F.csv` → `F.csv.json`.
pub fn sidecar_path(path: &Path) -> PathBuf {
    let mut name = path.as_os_str().to_os_string();
    name.push(".json");
    PathBuf::from(name)
}

/// Write the catalogue as CSV and its provenance sidecar (each atomically;
/// the sidecar first, so a CSV on disk always has its provenance).
pub fn write_csv(path: &Path, rows: &[ExportRow], prov: &Provenance) -> Result<(), ExportError> {
    let mut side = prov.to_json()?;
    side["table"] = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
        .into();
    side["columns"] = columns_json();
    let side_text =
        serde_json::to_string_pretty(&side).map_err(|e| ExportError::Format(format!("provenance: {e}")))?;
    let side_path = sidecar_path(path);
    atomic_write(&side_path, |w| {
        w.write_all(side_text.as_bytes())?;
        w.write_all(b"\n")
    })
    .map_err(|source| ExportError::Io {
        path: side_path.clone(),
        source,
    })?;
    atomic_write(path, |w| write_table(w, rows)).map_err(|source| ExportError::Io {
        path: path.to_path_buf(),
        source,
    })
}

/// The header row and the data rows (shared with the ECSV writer).
pub(super) fn write_table(w: &mut dyn std::io::Write, rows: &[ExportRow]) -> std::io::Result<()> {
    let mut cw = ::csv::Writer::from_writer(w);
    cw.write_record(COLUMNS.iter().map(|c| c.name))?;
    for r in rows {
        cw.write_record(COLUMNS.iter().map(|c| c.text(r)))?;
    }
    cw.flush()
}

/// Rows of a header-first CSV body, columns found by name. `first_line` is
/// the file line of the header row (for messages).
pub(super) fn read_table(path: &Path, body: &[u8], first_line: usize) -> Result<Vec<ExportRow>, ExportError> {
    let bad =
        |line: usize, msg: String| ExportError::Format(format!("{} line {line}: {msg}", path.display()));
    let mut rd = ::csv::Reader::from_reader(body);
    let names: Vec<String> = rd
        .headers()
        .map_err(|e| bad(first_line, e.to_string()))?
        .iter()
        .map(|s| s.trim().to_string())
        .collect();
    let specs: Vec<Option<&ColumnSpec>> = names.iter().map(|n| super::column(n)).collect();
    let seen: Vec<bool> = COLUMNS
        .iter()
        .map(|c| names.iter().any(|n| n == c.name))
        .collect();
    super::columns::missing_check(&seen).map_err(|e| bad(first_line, e.to_string()))?;
    let mut rows = Vec::new();
    for rec in rd.records() {
        let rec = rec.map_err(|e| {
            let line = e
                .position()
                .map_or(first_line, |p| first_line + p.line() as usize - 1);
            bad(line, e.to_string())
        })?;
        let line = rec
            .position()
            .map_or(first_line, |p| first_line + p.line() as usize - 1);
        let cells = specs
            .iter()
            .zip(rec.iter())
            .filter_map(|(spec, text)| spec.map(|c| c.parse(text).map(|v| (c.name, v))))
            .collect::<Result<Vec<_>, String>>()
            .map_err(|m| bad(line, m))?;
        rows.push(ExportRow::from_named(cells).map_err(|e| bad(line, e.to_string()))?);
    }
    Ok(rows)
}

/// Read a catalogue CSV written by [`write_csv`] with its sidecar.
pub fn read_csv(path: &Path) -> Result<(Vec<ExportRow>, Provenance), ExportError> {
    let io = |p: &Path| {
        let p = p.to_path_buf();
        move |source| ExportError::Io { path: p, source }
    };
    let body = std::fs::read(path).map_err(io(path))?;
    let side_path = sidecar_path(path);
    let side = std::fs::read_to_string(&side_path).map_err(|e| {
        if e.kind() == std::io::ErrorKind::NotFound {
            ExportError::Format(format!(
                "{}: the provenance sidecar {} is missing (it is written next to the CSV)",
                path.display(),
                side_path.display()
            ))
        } else {
            io(&side_path)(e)
        }
    })?;
    let side: serde_json::Value = serde_json::from_str(&side)
        .map_err(|e| ExportError::Format(format!("{}: {e}", side_path.display())))?;
    let prov = Provenance::from_json(&side)
        .map_err(|m| ExportError::Format(format!("{}: {m}", side_path.display())))?;
    let rows = read_table(path, &body, 1)?;
    Ok((rows, prov))
}
