/*!
The columns of the training catalogue: one list drives the CSV and the FITS
writers and readers, so the two formats cannot drift apart.
*/
use super::{ExportError, ExportRow};
use crate::catalog::CatalogRow;
use crate::catalog::BANDS;
use crate::review::merge::ConsensusState;
use crate::review::{Confidence, Flag, VerdictClass, ZSource};
use crate::ObjectClass;
use std::collections::BTreeSet;

/// Storage type of a column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// Text (FITS: fixed-width ASCII string).
    Str,
    /// 64-bit float (missing: empty in CSV, NaN in FITS).
    F64,
    /// 16-bit integer (missing: empty in CSV, 0 = TNULL in FITS).
    I16,
}

/// One column of the catalogue.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ColumnSpec {
    /// Column name.
    pub name: &'static str,
    /// Storage type.
    pub kind: Kind,
    /// Unit (FITS TUNITn), if any.
    pub unit: Option<&'static str>,
    /// What it holds.
    pub doc: &'static str,
}

const fn col(name: &'static str, kind: Kind, unit: Option<&'static str>, doc: &'static str) -> ColumnSpec {
    ColumnSpec {
        name,
        kind,
        unit,
        doc,
    }
}

use Kind::*;
const DEG: Option<&str> = Some("deg");
const MAG: Option<&str> = Some("mag");

/// All columns, in file order.
pub const COLUMNS: [ColumnSpec; 36] = [
    col("id", Str, None, "object id"),
    col("ra", F64, DEG, "right ascension (catalogue)"),
    col("dec", F64, DEG, "declination (catalogue)"),
    col("mag_u", F64, MAG, "u AB magnitude"),
    col("mag_g", F64, MAG, "g AB magnitude"),
    col("mag_r", F64, MAG, "r AB magnitude"),
    col("mag_i", F64, MAG, "i AB magnitude"),
    col("mag_z", F64, MAG, "z AB magnitude"),
    col("mag_u_err", F64, MAG, "u magnitude error"),
    col("mag_g_err", F64, MAG, "g magnitude error"),
    col("mag_r_err", F64, MAG, "r magnitude error"),
    col("mag_i_err", F64, MAG, "i magnitude error"),
    col("mag_z_err", F64, MAG, "z magnitude error"),
    col("u_g", F64, MAG, "colour u − g"),
    col("g_r", F64, MAG, "colour g − r"),
    col("r_i", F64, MAG, "colour r − i"),
    col("i_z", F64, MAG, "colour i − z"),
    col("phot_class", Str, None, "photometric classifier's class"),
    col("phot_class_prob", F64, None, "its probability"),
    col("phot_z", F64, None, "photometric redshift"),
    col("auto_class", Str, None, "automatic (engine) class"),
    col("auto_z", F64, None, "automatic redshift"),
    col("auto_z_err", F64, None, "its 1σ error"),
    col(
        "auto_delta_chi2",
        F64,
        None,
        "Δχ² to the runner-up (NaN/empty: none)",
    ),
    col("auto_warnings", Str, None, "engine warnings, `|`-separated"),
    col(
        "vetted_class",
        Str,
        None,
        "vetted class: galaxy, quasar, star, unclear",
    ),
    col("vetted_z", F64, None, "vetted redshift"),
    col("vetted_z_err", F64, None, "its 1σ error"),
    col("z_source", Str, None, "automatic, candidate, refit or typed"),
    col("confidence", Str, None, "certainty: guess, probable, secure"),
    col(
        "confidence_level",
        I16,
        None,
        "certainty 1–3: 1 guess, 2 probable, 3 secure (FITS: 0 = none)",
    ),
    col("flags", Str, None, "inspector flags, `,`-separated"),
    col("note", Str, None, "inspectors' notes"),
    col(
        "inspectors",
        Str,
        None,
        "inspectors whose verdicts counted, `,`-separated",
    ),
    col("n_inspectors", I16, None, "their number"),
    col("consensus", Str, None, "single, agreed or adjudicated"),
];

/// One value of a row.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    /// Text.
    Str(String),
    /// Float.
    F64(Option<f64>),
    /// Integer.
    I16(Option<i16>),
}

fn diff(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    Some(a? - b?)
}

fn join<T>(items: impl IntoIterator<Item = T>, f: impl Fn(T) -> String, sep: &str) -> String {
    items.into_iter().map(f).collect::<Vec<_>>().join(sep)
}

impl ExportRow {
    /// Colours u−g, g−r, r−i, i−z (missing when a magnitude is).
    pub fn colours(&self) -> [Option<f64>; 4] {
        let m = &self.catalog.mag;
        [
            diff(m[0], m[1]),
            diff(m[1], m[2]),
            diff(m[2], m[3]),
            diff(m[3], m[4]),
        ]
    }

    /// The row's values in [`COLUMNS`] order.
    pub fn cells(&self) -> Vec<Cell> {
        let s = |x: &str| Cell::Str(x.to_string());
        let cat = &self.catalog;
        let mut c = vec![s(&cat.id), Cell::F64(cat.ra), Cell::F64(cat.dec)];
        c.extend(cat.mag.iter().map(|&m| Cell::F64(m)));
        c.extend(cat.mag_err.iter().map(|&m| Cell::F64(m)));
        c.extend(self.colours().iter().map(|&m| Cell::F64(m)));
        c.extend([
            s(cat.phot_class.map_or("", |x| x.as_str())),
            Cell::F64(cat.phot_class_prob),
            Cell::F64(cat.phot_z),
            s(self.auto_class.map_or("", |x| x.as_str())),
            Cell::F64(self.auto_z),
            Cell::F64(self.auto_z_err),
            Cell::F64(self.auto_delta_chi2),
            s(&self.auto_warnings),
            s(self.vetted_class.as_str()),
            Cell::F64(self.vetted_z),
            Cell::F64(self.vetted_z_err),
            s(self.z_source.map_or("", |x| x.as_str())),
            s(self.confidence.map_or("", |x| x.as_str())),
            Cell::I16(self.confidence.map(|x| x.level() as i16)),
            Cell::Str(join(&self.flags, |f| f.as_str().to_string(), ",")),
            s(&self.note),
            Cell::Str(self.inspectors.join(",")),
            Cell::I16(Some(self.inspectors.len().min(i16::MAX as usize) as i16)),
            s(self.consensus.as_str()),
        ]);
        c
    }

    /// Rebuild a row from values in [`COLUMNS`] order (the readers' side).
    pub fn from_cells(cells: &[Cell]) -> Result<ExportRow, ExportError> {
        if cells.len() != COLUMNS.len() {
            return Err(ExportError::Format(format!(
                "{} values for {} columns",
                cells.len(),
                COLUMNS.len()
            )));
        }
        let f = |i: usize| match &cells[i] {
            Cell::F64(x) => Ok(*x),
            other => Err(ExportError::Format(format!(
                "{}: not a number: {other:?}",
                COLUMNS[i].name
            ))),
        };
        let st = |i: usize| match &cells[i] {
            Cell::Str(x) => Ok(x.as_str()),
            other => Err(ExportError::Format(format!(
                "{}: not text: {other:?}",
                COLUMNS[i].name
            ))),
        };
        let word = |i: usize| -> Result<Option<String>, ExportError> {
            let s = st(i)?.trim();
            Ok((!s.is_empty()).then(|| format!("\"{s}\"")))
        };
        // Parse the lower-case names through their serde spelling.
        fn parse<T: serde::de::DeserializeOwned>(
            name: &str,
            w: Option<String>,
        ) -> Result<Option<T>, ExportError> {
            w.map(|w| {
                serde_json::from_str(&w)
                    .map_err(|_| ExportError::Format(format!("{name}: unknown value {w}")))
            })
            .transpose()
        }
        let name = |i: usize| COLUMNS[i].name;
        let mut mag = [None; 5];
        let mut mag_err = [None; 5];
        for b in 0..BANDS.len() {
            mag[b] = f(3 + b)?;
            mag_err[b] = f(8 + b)?;
        }
        let flags: BTreeSet<Flag> = st(31)?
            .split(',')
            .filter(|x| !x.trim().is_empty())
            .map(|x| parse::<Flag>(name(31), Some(format!("\"{}\"", x.trim()))).map(|o| o.into_iter()))
            .collect::<Result<Vec<_>, _>>()?
            .into_iter()
            .flatten()
            .collect();
        Ok(ExportRow {
            catalog: CatalogRow {
                id: st(0)?.to_string(),
                ra: f(1)?,
                dec: f(2)?,
                mag,
                mag_err,
                phot_class: parse::<ObjectClass>(name(17), word(17)?)?,
                phot_class_prob: f(18)?,
                phot_z: f(19)?,
            },
            auto_class: parse::<ObjectClass>(name(20), word(20)?)?,
            auto_z: f(21)?,
            auto_z_err: f(22)?,
            auto_delta_chi2: f(23)?,
            auto_warnings: st(24)?.to_string(),
            vetted_class: parse::<VerdictClass>(name(25), word(25)?)?
                .ok_or_else(|| ExportError::Format("vetted_class is empty".into()))?,
            vetted_z: f(26)?,
            vetted_z_err: f(27)?,
            z_source: parse::<ZSource>(name(28), word(28)?)?,
            confidence: parse::<Confidence>(name(29), word(29)?)?,
            flags,
            note: st(32)?.to_string(),
            inspectors: st(33)?
                .split(',')
                .filter(|x| !x.is_empty())
                .map(String::from)
                .collect(),
            consensus: parse::<ConsensusState>(name(35), word(35)?)?
                .ok_or_else(|| ExportError::Format("consensus is empty".into()))?,
        })
    }
}
