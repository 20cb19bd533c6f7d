/*!
The catalogue as ECSV, astropy's Enhanced Character Separated Values (ECSV
1.0, astropy APE 6): `# ` lines of YAML before the CSV body declare each
column's name, `datatype` (string, float64, int16), `unit` and
`description`, and `meta` holds the provenance. `astropy.table.Table.read`
gives real units and the provenance in `Table.meta`.

The YAML is written in flow style with JSON-compatible values (double-quoted
strings, numbers with a decimal point and a signed exponent so that YAML 1.1
readers such as PyYAML take them as floats), and read back here with
serde_json line by line; this reader takes the files this writer makes, not
any ECSV.
*/
use super::columns::{Kind, COLUMNS};
use super::csv::{read_table, write_table};
use super::{ExportError, ExportRow, Provenance};
use crate::io::atomic::atomic_write;
use serde_json::Value;
use std::path::Path;

/// ECSV datatype of a column kind.
pub(crate) fn datatype(k: Kind) -> &'static str {
    match k {
        Kind::Str => "string",
        Kind::F64 => "float64",
        Kind::I16 => "int16",
    }
}

/// A string as a YAML double-quoted scalar (JSON escapes, plus the
/// characters YAML does not allow unescaped: DEL, C1 controls, BOM).
fn yaml_str(s: &str) -> String {
    let json = serde_json::to_string(s).unwrap_or_else(|_| "\"\"".into());
    let mut out = String::with_capacity(json.len());
    for c in json.chars() {
        let u = c as u32;
        if u == 0x7f || (0x80..=0x9f).contains(&u) || u == 0xfeff || (0xfff0..=0xffff).contains(&u) {
            out.push_str(&format!("\\u{u:04x}"));
        } else {
            out.push(c);
        }
    }
    out
}

/// A JSON number as a YAML 1.1 float/int: `1e-7` → `1.0e-7`, `3e20` → `3.0e+20`.
fn yaml_number(n: &serde_json::Number) -> String {
    let s = n.to_string();
    if !n.is_f64() {
        return s;
    }
    let (mant, exp) = match s.split_once(['e', 'E']) {
        Some((m, e)) => (m.to_string(), Some(e.to_string())),
        None => (s.clone(), None),
    };
    let mant = if mant.contains('.') {
        mant
    } else {
        format!("{mant}.0")
    };
    match exp {
        None => mant,
        Some(e) if e.starts_with(['-', '+']) => format!("{mant}e{e}"),
        Some(e) => format!("{mant}e+{e}"),
    }
}

/// A JSON value as a one-line YAML flow value that is also JSON.
fn yaml_flow(v: &Value) -> String {
    match v {
        Value::Null => "null".into(),
        Value::Bool(b) => b.to_string(),
        Value::Number(n) => yaml_number(n),
        Value::String(s) => yaml_str(s),
        Value::Array(a) => format!("[{}]", a.iter().map(yaml_flow).collect::<Vec<_>>().join(", ")),
        Value::Object(o) => format!(
            "{{{}}}",
            o.iter()
                .map(|(k, v)| format!("{}: {}", yaml_str(k), yaml_flow(v)))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// The `# ` header lines (without the CSV header row).
fn header(prov: &Provenance) -> Result<Vec<String>, ExportError> {
    let mut h = vec!["%ECSV 1.0".to_string(), "---".into(), "delimiter: ','".into()];
    h.push("datatype:".into());
    for c in &COLUMNS {
        let unit = c
            .unit
            .map_or(String::new(), |u| format!("\"unit\": {}, ", yaml_str(u)));
        h.push(format!(
            "- {{\"name\": {}, {unit}\"datatype\": \"{}\", \"description\": {}}}",
            yaml_str(c.name),
            datatype(c.kind()),
            yaml_str(c.doc)
        ));
    }
    h.push("meta:".into());
    let Value::Object(meta) = prov.to_json()? else {
        return Err(ExportError::Format("provenance is not a mapping".into()));
    };
    for (k, v) in &meta {
        h.push(format!("  {}: {}", yaml_str(k), yaml_flow(v)));
    }
    Ok(h)
}

/// Write the catalogue as ECSV (atomically).
pub fn write_ecsv(path: &Path, rows: &[ExportRow], prov: &Provenance) -> Result<(), ExportError> {
    let head = header(prov)?;
    atomic_write(path, |w| {
        for line in &head {
            writeln!(w, "# {line}")?;
        }
        write_table(w, rows)
    })
    .map_err(|source| ExportError::Io {
        path: path.to_path_buf(),
        source,
    })
}

/// Read a catalogue written by [`write_ecsv`].
pub fn read_ecsv(path: &Path) -> Result<(Vec<ExportRow>, Provenance), ExportError> {
    let bytes = std::fs::read(path).map_err(|source| ExportError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let bad =
        |line: usize, msg: String| ExportError::Format(format!("{} line {line}: {msg}", path.display()));
    let mut meta = serde_json::Map::new();
    let mut in_meta = false;
    let mut body_start = 0;
    let mut n_header = 0;
    if !bytes.starts_with(b"# %ECSV 1.") {
        return Err(bad(1, "not an ECSV file (no '# %ECSV 1.0' line)".into()));
    }
    for line in bytes.split_inclusive(|&b| b == b'\n') {
        let Some(rest) = line.strip_prefix(b"#") else {
            break;
        };
        body_start += line.len();
        n_header += 1;
        let text = std::str::from_utf8(rest).map_err(|_| bad(n_header, "not UTF-8".into()))?;
        let text = text.trim_end_matches(['\n', '\r']);
        let text = text.strip_prefix(' ').unwrap_or(text);
        if n_header == 1 {
            continue;
        }
        if !text.starts_with(' ') {
            in_meta = text == "meta:";
            continue;
        }
        if in_meta {
            // `  "key": value`
            let t = text.trim();
            let (k, v) = t
                .split_once(": ")
                .ok_or_else(|| bad(n_header, "meta entry without ': '".into()))?;
            let k: String = serde_json::from_str(k).map_err(|e| bad(n_header, format!("meta key: {e}")))?;
            let v: Value = serde_json::from_str(v).map_err(|e| bad(n_header, format!("meta '{k}': {e}")))?;
            meta.insert(k, v);
        }
    }
    let prov = Provenance::from_json(&Value::Object(meta)).map_err(|m| bad(0, m))?;
    let rows = read_table(path, &bytes[body_start..], n_header + 1)?;
    Ok((rows, prov))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn yaml_numbers_keep_their_float_type() {
        let n = |x: f64| yaml_number(&serde_json::Number::from_f64(x).unwrap());
        assert_eq!(n(1e-7), "1.0e-7");
        assert_eq!(n(3e20), "3.0e+20");
        assert_eq!(n(0.0015), "0.0015");
        assert_eq!(n(2.0), "2.0");
        assert_eq!(yaml_number(&serde_json::Number::from(3)), "3");
        // Both are still JSON.
        assert_eq!(
            serde_json::from_str::<f64>(&n(3e20)).unwrap().to_bits(),
            3e20f64.to_bits()
        );
    }

    #[test]
    fn yaml_strings_escape_what_yaml_forbids() {
        assert_eq!(yaml_str("a\"b\nc"), "\"a\\\"b\\nc\"");
        assert_eq!(yaml_str("x\u{7f}y"), "\"x\\u007fy\"");
        assert_eq!(yaml_str("Δχ²"), "\"Δχ²\"");
    }
}
