/*!
The catalogue as CSV: provenance as `# key: value` lines at the top, then a
header row and one row per object (RFC 4180 quoting, UTF-8, empty field =
missing value, floats written in their shortest exact form).
*/
use super::columns::{Cell, Kind, COLUMNS};
use super::{ExportError, ExportRow, Provenance};
use crate::campaign::{atomic_write, EngineSettings};
use crate::review::{Confidence, Flag};
use std::path::Path;

fn provenance_lines(p: &Provenance) -> Result<Vec<(String, String)>, ExportError> {
    let engine =
        serde_json::to_string(&p.engine).map_err(|e| ExportError::Format(format!("engine settings: {e}")))?;
    let units: Vec<String> = COLUMNS
        .iter()
        .filter_map(|c| c.unit.map(|u| format!("{}={u}", c.name)))
        .collect();
    Ok(vec![
        ("format".into(), "zvet training catalogue".into()),
        ("zvet_version".into(), p.zvet_version.clone()),
        ("campaign".into(), p.campaign.clone()),
        ("template_set".into(), p.template_set.clone()),
        ("engine".into(), engine),
        ("date".into(), p.date.to_rfc3339()),
        ("merge_tolerance".into(), p.tolerance.to_string()),
        (
            "min_confidence".into(),
            p.min_confidence.map_or("none".into(), |c| c.as_str().into()),
        ),
        (
            "exclude_flags".into(),
            p.exclude_flags
                .iter()
                .map(|f| f.as_str())
                .collect::<Vec<_>>()
                .join(","),
        ),
        ("units".into(), units.join(" ")),
    ])
}

/// Write the catalogue as CSV (atomically).
pub fn write_csv(path: &Path, rows: &[ExportRow], prov: &Provenance) -> Result<(), ExportError> {
    let header = provenance_lines(prov)?;
    let io = |source| ExportError::Io {
        path: path.to_path_buf(),
        source,
    };
    atomic_write(path, |w| {
        for (k, v) in &header {
            // One line each: a value never contains a newline.
            writeln!(w, "# {k}: {}", v.replace(['\n', '\r'], " "))?;
        }
        let mut cw = ::csv::Writer::from_writer(w);
        cw.write_record(COLUMNS.iter().map(|c| c.name))?;
        for r in rows {
            let fields: Vec<String> = r
                .cells()
                .into_iter()
                .map(|c| match c {
                    Cell::Str(s) => s,
                    Cell::F64(x) => x.map_or(String::new(), |x| format!("{x:?}")),
                    Cell::I16(x) => x.map_or(String::new(), |x| x.to_string()),
                })
                .collect();
            cw.write_record(&fields)?;
        }
        cw.flush()?;
        Ok(())
    })
    .map_err(io)
}

/// Read a catalogue CSV written by [`write_csv`].
pub fn read_csv(path: &Path) -> Result<(Vec<ExportRow>, Provenance), ExportError> {
    let text = std::fs::read_to_string(path).map_err(|source| ExportError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let bad =
        |line: usize, msg: String| ExportError::Format(format!("{} line {line}: {msg}", path.display()));
    let mut meta = std::collections::BTreeMap::new();
    let mut body_start = 0;
    let mut n_header = 0;
    for line in text.split_inclusive('\n') {
        let Some(rest) = line.strip_prefix('#') else { break };
        body_start += line.len();
        n_header += 1;
        if let Some((k, v)) = rest.trim().split_once(':') {
            meta.insert(k.trim().to_string(), v.trim().to_string());
        }
    }
    let get = |k: &str| meta.get(k).cloned().unwrap_or_default();
    let engine: EngineSettings =
        serde_json::from_str(&get("engine")).map_err(|e| bad(0, format!("provenance 'engine': {e}")))?;
    let min_confidence = match get("min_confidence").as_str() {
        "" | "none" => None,
        s => Some(
            serde_json::from_str::<Confidence>(&format!("\"{s}\""))
                .map_err(|e| bad(0, format!("min_confidence: {e}")))?,
        ),
    };
    let exclude_flags = get("exclude_flags")
        .split(',')
        .filter(|s| !s.is_empty())
        .map(|s| {
            serde_json::from_str::<Flag>(&format!("\"{s}\""))
                .map_err(|e| bad(0, format!("exclude_flags: {e}")))
        })
        .collect::<Result<Vec<_>, _>>()?;
    let prov = Provenance {
        zvet_version: get("zvet_version"),
        campaign: get("campaign"),
        template_set: get("template_set"),
        engine,
        date: chrono::DateTime::parse_from_rfc3339(&get("date"))
            .map_err(|e| bad(0, format!("date: {e}")))?
            .with_timezone(&chrono::Utc),
        tolerance: get("merge_tolerance")
            .parse()
            .map_err(|e| bad(0, format!("merge_tolerance: {e}")))?,
        min_confidence,
        exclude_flags,
    };

    let mut rd = ::csv::Reader::from_reader(&text.as_bytes()[body_start..]);
    let names: Vec<String> = rd
        .headers()
        .map_err(|e| bad(n_header + 1, e.to_string()))?
        .iter()
        .map(String::from)
        .collect();
    let want: Vec<&str> = COLUMNS.iter().map(|c| c.name).collect();
    if names != want {
        return Err(bad(
            n_header + 1,
            "not the columns of a zvet training catalogue".into(),
        ));
    }
    let mut rows = Vec::new();
    for (i, rec) in rd.records().enumerate() {
        let line = n_header + 2 + i;
        let rec = rec.map_err(|e| bad(line, e.to_string()))?;
        let cells = COLUMNS
            .iter()
            .zip(rec.iter())
            .map(|(c, s)| {
                Ok(match c.kind {
                    Kind::Str => Cell::Str(s.to_string()),
                    Kind::F64 if s.is_empty() => Cell::F64(None),
                    Kind::F64 => Cell::F64(Some(
                        s.parse()
                            .map_err(|_| bad(line, format!("{}: '{s}' is not a number", c.name)))?,
                    )),
                    Kind::I16 if s.is_empty() => Cell::I16(None),
                    Kind::I16 => {
                        Cell::I16(Some(s.parse().map_err(|_| {
                            bad(line, format!("{}: '{s}' is not an integer", c.name))
                        })?))
                    }
                })
            })
            .collect::<Result<Vec<_>, ExportError>>()?;
        rows.push(ExportRow::from_cells(&cells).map_err(|e| bad(line, e.to_string()))?);
    }
    Ok((rows, prov))
}
