/*!
The one fit record: what the pipeline writes for every object, whoever runs
it (`zvet fit`, a campaign's cache `fits.jsonl`, a shard's part file, the
window's background fits).

A record is the object id, where the spectrum came from, the method, and
either the engine's [`FitResult`] (without its χ²(z) curves, which are large
and recomputed on demand) or the reason the object could not be read or
fitted. As a JSON line it holds **every field of [`FitResult`] through
serde** — a field added to the engine's result is carried without an edit
here — plus a flat summary for people and table tools (`class`, `z`,
`z_err`, `chi2`, `template`, `z_2`, `class_2`, …, the same columns as the
CSV and FITS tables, see [`FitRow`]).

JSON has no ∞ or NaN: such numbers are written as `null` and read back as
NaN, except `delta_chi2`, where `null` means "no runner-up" and reads as ∞.
Lines of the first cache format (key `id`) and flat rows of older `zvet fit`
JSON outputs (no `candidates`) are read too; a flat row gives the three
summary candidates without coefficients.
*/
use crate::fit::FitResult;
use serde::de::{DeserializeSeed, IntoDeserializer, MapAccess, SeqAccess, Visitor};
use serde::Deserializer;
use serde::{Deserialize, Serialize};
use serde_json::{Map, Value};
use std::path::PathBuf;

/// Format version written into every JSON line (`v`). Version 1 was the
/// first campaign cache (key `id`, no source or method).
pub const RECORD_FORMAT: u32 = 2;

/// One object's entry: a fit or an error.
#[derive(Debug, Clone, PartialEq)]
pub struct FitRecord {
    /// Object id.
    pub object_id: String,
    /// Input file (and HDU/row when inside a multi-object file).
    pub source: String,
    /// `chi2` or `xcorr` (empty when unknown).
    pub method: String,
    /// Why the object could not be read or fitted (empty when it was).
    pub error: String,
    /// The fit (its `curves` empty), when there is one.
    pub fit: Option<FitResult>,
}

impl FitRecord {
    /// The record of a fit; the curves are dropped.
    pub fn fitted(mut fit: FitResult, source: &str, method: &str) -> FitRecord {
        fit.curves = Vec::new();
        FitRecord {
            object_id: fit.object_id.clone(),
            source: source.to_string(),
            method: method.to_string(),
            error: String::new(),
            fit: Some(fit),
        }
    }

    /// The record of an object that could not be read or fitted.
    pub fn failed(object_id: &str, source: &str, error: &str) -> FitRecord {
        FitRecord {
            object_id: object_id.to_string(),
            source: source.to_string(),
            method: String::new(),
            error: error.replace(['\n', '\r'], " "),
            fit: None,
        }
    }

    /// The flat summary row (CSV and FITS tables).
    pub fn flat(&self) -> FitRow {
        match &self.fit {
            Some(f) => FitRow::from_result(f, &self.source, &self.method),
            None => FitRow::failed(&self.object_id, &self.source, &self.error),
        }
    }

    /// The record a flat row describes: the three summary candidates (no
    /// coefficients, no line measurements) or the error.
    pub fn from_flat(row: &FitRow) -> FitRecord {
        if !row.error.is_empty() || row.class.is_empty() {
            let mut r = FitRecord::failed(&row.object_id, &row.source, &row.error);
            r.method = row.method.clone();
            return r;
        }
        let num = |x: Option<f64>| x.map_or(Value::Null, Value::from);
        let mut cands = Vec::new();
        let picks = [
            (&row.class, row.z, row.z_err, row.chi2, row.template.as_str()),
            (&row.class_2, row.z_2, None, row.chi2_2, ""),
            (&row.class_3, row.z_3, None, row.chi2_3, ""),
        ];
        for (class, z, z_err, chi2, template) in picks {
            if class.is_empty() || z.is_none() {
                continue;
            }
            cands.push(serde_json::json!({
                "class": class, "template": template, "z": num(z), "z_err": num(z_err),
                "chi2": num(chi2), "coeffs": [],
            }));
        }
        let mut v = serde_json::json!({
            "object_id": row.object_id,
            "candidates": cands,
            "delta_chi2": row.delta_chi2.unwrap_or(f64::MAX),
            "chi2_reduced": num(row.chi2_reduced),
            "n_good": row.n_good.unwrap_or(0),
            "snr_median": num(row.snr_median),
            "warnings": row.warnings,
            "lines": [],
        });
        let fit = match v.as_object_mut().map(std::mem::take) {
            Some(m) => decode_result(m).ok(),
            None => None,
        };
        match fit {
            Some(fit) => FitRecord {
                object_id: row.object_id.clone(),
                source: row.source.clone(),
                method: row.method.clone(),
                error: String::new(),
                fit: Some(fit),
            },
            None => FitRecord::failed(&row.object_id, &row.source, "unreadable summary row"),
        }
    }

    /// The record as one JSON line (no newline).
    pub fn to_json_line(&self) -> Result<String, serde_json::Error> {
        let mut out = Map::new();
        out.insert("v".into(), RECORD_FORMAT.into());
        out.insert("object_id".into(), self.object_id.clone().into());
        out.insert("source".into(), self.source.clone().into());
        out.insert("method".into(), self.method.clone().into());
        out.insert("error".into(), self.error.clone().into());
        if let Some(fit) = &self.fit {
            // the engine's own fields (the canonical values) …
            if let Value::Object(m) = serde_json::to_value(fit)? {
                for (k, v) in m {
                    if k != "curves" {
                        out.insert(k, v);
                    }
                }
            }
            // … and the flat summary where it adds a key
            if let Value::Object(m) = serde_json::to_value(self.flat())? {
                for (k, v) in m {
                    out.entry(k).or_insert(v);
                }
            }
        }
        serde_json::to_string(&Value::Object(out))
    }

    /// Read one JSON line (any format version up to [`RECORD_FORMAT`]).
    pub fn from_json_line(line: &str) -> Result<FitRecord, String> {
        let v: Value = serde_json::from_str(line).map_err(|e| e.to_string())?;
        let Value::Object(mut m) = v else {
            return Err("not a JSON object".into());
        };
        let version = m.get("v").and_then(Value::as_u64).unwrap_or(RECORD_FORMAT as u64);
        if version > RECORD_FORMAT as u64 {
            return Err(format!(
                "format version {version} is newer than this zvet (reads up to {RECORD_FORMAT})"
            ));
        }
        if !m.contains_key("object_id") {
            if let Some(id) = m.remove("id") {
                m.insert("object_id".into(), id);
            }
        }
        let text =
            |m: &Map<String, Value>, k: &str| m.get(k).and_then(Value::as_str).unwrap_or("").to_string();
        let object_id = match m.get("object_id") {
            Some(Value::String(s)) if !s.is_empty() => s.clone(),
            _ => return Err("no object id".into()),
        };
        let (source, method, error) = (text(&m, "source"), text(&m, "method"), text(&m, "error"));
        if !error.is_empty() {
            let mut r = FitRecord::failed(&object_id, &source, &error);
            r.method = method;
            return Ok(r);
        }
        if !m.contains_key("candidates") {
            // a flat row of an older `zvet fit` JSON output
            let row: FitRow = serde_json::from_value(Value::Object(m)).map_err(|e| e.to_string())?;
            return Ok(FitRecord::from_flat(&row));
        }
        let fit = decode_result(m).map_err(|e| e.to_string())?;
        Ok(FitRecord {
            object_id,
            source,
            method,
            error,
            fit: Some(fit),
        })
    }
}

/// The engine's result from a record's keys (unknown keys ignored, `null`
/// numbers as NaN, `delta_chi2` `null` as ∞, no curves).
fn decode_result(mut m: Map<String, Value>) -> Result<FitResult, serde_json::Error> {
    m.insert("curves".into(), Value::Array(Vec::new()));
    let mut fit: FitResult = serde::Deserialize::deserialize(Lenient(Value::Object(m)))?;
    if fit.delta_chi2.is_nan() {
        fit.delta_chi2 = f64::INFINITY;
    }
    Ok(fit)
}

/// A JSON value read with `null` accepted for any floating-point number
/// (as NaN), at any depth; everything else as `serde_json` reads it.
struct Lenient(Value);

impl<'de> Deserializer<'de> for Lenient {
    type Error = serde_json::Error;

    fn deserialize_any<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, Self::Error> {
        match self.0 {
            Value::Array(a) => visitor.visit_seq(Seq(a.into_iter())),
            Value::Object(m) => visitor.visit_map(Fields {
                it: m.into_iter(),
                value: None,
            }),
            other => other.deserialize_any(visitor),
        }
    }

    fn deserialize_f64<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, Self::Error> {
        match self.0 {
            Value::Null => visitor.visit_f64(f64::NAN),
            other => other.deserialize_f64(visitor),
        }
    }

    fn deserialize_f32<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, Self::Error> {
        match self.0 {
            Value::Null => visitor.visit_f32(f32::NAN),
            other => other.deserialize_f32(visitor),
        }
    }

    fn deserialize_option<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, Self::Error> {
        match self.0 {
            Value::Null => visitor.visit_none(),
            other => visitor.visit_some(Lenient(other)),
        }
    }

    fn deserialize_newtype_struct<V: Visitor<'de>>(
        self,
        _name: &'static str,
        visitor: V,
    ) -> Result<V::Value, Self::Error> {
        visitor.visit_newtype_struct(self)
    }

    fn deserialize_enum<V: Visitor<'de>>(
        self,
        name: &'static str,
        variants: &'static [&'static str],
        visitor: V,
    ) -> Result<V::Value, Self::Error> {
        self.0.deserialize_enum(name, variants, visitor)
    }

    serde::forward_to_deserialize_any! {
        bool i8 i16 i32 i64 i128 u8 u16 u32 u64 u128 char str string bytes byte_buf unit
        unit_struct seq tuple tuple_struct map struct identifier ignored_any
    }
}

struct Seq(std::vec::IntoIter<Value>);

impl<'de> SeqAccess<'de> for Seq {
    type Error = serde_json::Error;

    fn next_element_seed<T: DeserializeSeed<'de>>(
        &mut self,
        seed: T,
    ) -> Result<Option<T::Value>, Self::Error> {
        self.0.next().map(|v| seed.deserialize(Lenient(v))).transpose()
    }

    fn size_hint(&self) -> Option<usize> {
        Some(self.0.len())
    }
}

struct Fields {
    it: serde_json::map::IntoIter,
    value: Option<Value>,
}

impl<'de> MapAccess<'de> for Fields {
    type Error = serde_json::Error;

    fn next_key_seed<K: DeserializeSeed<'de>>(&mut self, seed: K) -> Result<Option<K::Value>, Self::Error> {
        match self.it.next() {
            Some((k, v)) => {
                self.value = Some(v);
                seed.deserialize(k.into_deserializer()).map(Some)
            }
            None => Ok(None),
        }
    }

    fn next_value_seed<V: DeserializeSeed<'de>>(&mut self, seed: V) -> Result<V::Value, Self::Error> {
        seed.deserialize(Lenient(self.value.take().unwrap_or(Value::Null)))
    }
}

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

/// The flat summary of a record (the columns of the CSV and FITS tables):
/// the best answer, the next two candidates, or an error.
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
    /// (see [`ClassSolution::join`](crate::fit::ClassSolution::join);
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
            per_class: crate::fit::ClassSolution::join(&r.per_class),
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

/// Parse JSON-lines bytes into records. A line that is not UTF-8 or not a
/// record is skipped and named (`line N: …`); a torn last line (no newline
/// at the end of the file, as an interrupted writer leaves it) is skipped
/// and named the same way.
pub fn parse_lines(bytes: &[u8]) -> (Vec<FitRecord>, Vec<String>) {
    let mut out = Vec::new();
    // reading from memory cannot fail
    let problems = for_each_line(bytes, |r| out.push(r)).unwrap_or_default();
    (out, problems)
}

/// [`parse_lines`] as a stream: every record of `reader` (read line by line,
/// so memory holds one line at a time) handed to `f` in order; bad lines
/// come back as problems with the same words. Only a read error of the
/// reader itself is an error.
pub fn for_each_line(
    mut reader: impl std::io::BufRead,
    mut f: impl FnMut(FitRecord),
) -> std::io::Result<Vec<String>> {
    let mut problems = Vec::new();
    let mut raw = Vec::new();
    let mut i = 0usize;
    loop {
        raw.clear();
        if reader.read_until(b'\n', &mut raw)? == 0 {
            break;
        }
        i += 1;
        if raw.last() == Some(&b'\n') {
            raw.pop();
        }
        let Ok(line) = std::str::from_utf8(&raw) else {
            problems.push(format!("line {i}: not UTF-8 text; skipped"));
            continue;
        };
        if line.trim().is_empty() {
            continue;
        }
        match FitRecord::from_json_line(line) {
            Ok(r) => f(r),
            Err(e) => problems.push(format!("line {i}: {e}; skipped")),
        }
    }
    Ok(problems)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::{Candidate, LineMeasurement, Warnings};
    use crate::ObjectClass;

    fn sample() -> FitResult {
        FitResult {
            object_id: "o".into(),
            candidates: vec![
                Candidate {
                    class: ObjectClass::Quasar,
                    template: "qso".into(),
                    z: 2.345678901234,
                    z_err: 1e-4,
                    chi2: 1000.5,
                    coeffs: vec![1.0, f64::NAN],
                },
                Candidate {
                    class: ObjectClass::Galaxy,
                    template: "gal".into(),
                    z: 0.5,
                    z_err: 2e-4,
                    chi2: 1010.0,
                    coeffs: vec![0.5],
                },
            ],
            delta_chi2: f64::INFINITY,
            chi2_reduced: 1.1,
            n_good: 4000,
            snr_median: 5.5,
            warnings: Warnings(Warnings::AMBIGUOUS | Warnings::POOR_FIT),
            curves: vec![],
            lines: vec![LineMeasurement {
                name: "Lyα".into(),
                rest_wave: 1215.67,
                obs_wave: 4067.0,
                flux: 3.0,
                flux_err: f64::NAN,
                sigma_kms: 1500.0,
                ew_rest: 20.0,
                snr: 8.0,
                width_fitted: true,
                continuum: 1.5,
                abs_ew_rest: None,
            }],
            per_class: vec![],
            refit_kept: false,
        }
    }

    #[test]
    fn a_record_round_trips_with_its_summary_and_non_finite_numbers() {
        let rec = FitRecord::fitted(sample(), "a.fits[hdu=1]", "chi2");
        let line = rec.to_json_line().unwrap();
        // the flat summary rides along for people and table tools
        assert!(line.contains("\"class\":\"quasar\""), "{line}");
        assert!(line.contains("\"class_2\":\"galaxy\""), "{line}");
        assert!(
            line.contains("\"warning_names\":\"ambiguous|poor_fit\""),
            "{line}"
        );
        assert!(!line.contains("curves"));
        let back = FitRecord::from_json_line(&line).unwrap();
        let (a, b) = (rec.fit.as_ref().unwrap(), back.fit.as_ref().unwrap());
        assert!(b.delta_chi2.is_infinite());
        assert!(b.candidates[0].coeffs[1].is_nan());
        assert!(b.lines[0].flux_err.is_nan());
        assert_eq!(b.candidates[0].z.to_bits(), a.candidates[0].z.to_bits());
        assert_eq!(b.candidates.len(), 2);
        assert_eq!(b.warnings, a.warnings);
        assert_eq!(
            (back.source.as_str(), back.method.as_str()),
            ("a.fits[hdu=1]", "chi2")
        );
        // written again, byte for byte the same line
        assert_eq!(back.to_json_line().unwrap(), line);
    }

    #[test]
    fn first_format_cache_lines_and_flat_rows_are_read() {
        let v1 = r#"{"v":1,"id":"x","candidates":[{"class":"galaxy","template":"g","z":0.1,"z_err":null,"chi2":5.0,"coeffs":[1.0,null]}],"delta_chi2":null,"chi2_reduced":1.0,"n_good":10,"snr_median":2.0,"warnings":0,"warning_names":"","lines":[]}"#;
        let r = FitRecord::from_json_line(v1).unwrap();
        let f = r.fit.unwrap();
        assert_eq!(r.object_id, "x");
        assert!(f.candidates[0].z_err.is_nan() && f.delta_chi2.is_infinite());
        let flat = r#"{"object_id":"y","source":"y.csv","class":"star","z":0.0001,"z_err":1e-5,"chi2":9.0,"chi2_reduced":1.2,"delta_chi2":null,"warnings":0,"warning_names":"","template":"G2V","snr_median":3.0,"n_good":900,"z_2":0.5,"class_2":"galaxy","chi2_2":30.0,"z_3":null,"class_3":"","chi2_3":null,"method":"chi2","error":""}"#;
        let r = FitRecord::from_json_line(flat).unwrap();
        let f = r.fit.as_ref().unwrap();
        assert_eq!(f.candidates.len(), 2);
        assert_eq!(f.candidates[0].template, "G2V");
        assert_eq!(r.flat().class_2, "galaxy");
    }

    #[test]
    fn bad_lines_are_skipped_and_named_by_number() {
        let good = FitRecord::fitted(sample(), "s", "chi2").to_json_line().unwrap();
        let mut bytes = Vec::new();
        bytes.extend_from_slice(good.as_bytes());
        bytes.extend_from_slice(b"\n{\"object_id\":\"\xff\xfe\"}\nnot json\n");
        bytes.extend_from_slice(good.as_bytes());
        bytes.extend_from_slice(b"\n{\"v\":99,\"object_id\":\"z\"}\n");
        let (recs, problems) = parse_lines(&bytes);
        assert_eq!(recs.len(), 2);
        assert_eq!(problems.len(), 3, "{problems:?}");
        assert!(problems[0].starts_with("line 2: not UTF-8"), "{problems:?}");
        assert!(problems[1].starts_with("line 3:"), "{problems:?}");
        assert!(
            problems[2].starts_with("line 5:") && problems[2].contains("newer"),
            "{problems:?}"
        );
    }
}
