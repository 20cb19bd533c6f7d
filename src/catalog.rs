/*!
The photometric catalogue: one row per object with position, u g r i z
magnitudes and errors, and a photometric classifier's class, probability and
redshift. Any of these may be missing.

[`read_csv`] reads a CSV (comma or tab separated, `#` comment lines, a header
line) whose columns are found through a [`ColumnMap`]: for every field a list
of case-insensitive header names, tried in order. The defaults are documented
on [`ColumnMap::default`]; any field can be overridden
([`ColumnMap::set`], or `field=column` strings through
[`ColumnMap::apply_overrides`]). [`join`] pairs spectra with rows by id and
reports the ids found on one side only.

Missing values: an empty field, `nan`, `null`, `NA`, `--`; magnitudes and
their errors at or beyond ±90 (the 99/−99 "not detected" placeholders, common
practice) are missing too.
*/
use crate::ObjectClass;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// The five broad bands, in order.
pub const BANDS: [&str; 5] = ["u", "g", "r", "i", "z"];

/// One catalogue row.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct CatalogRow {
    /// Object id (joins with the spectrum's id).
    pub id: String,
    /// Right ascension, degrees.
    pub ra: Option<f64>,
    /// Declination, degrees.
    pub dec: Option<f64>,
    /// AB magnitudes in [`BANDS`] order.
    pub mag: [Option<f64>; 5],
    /// Magnitude errors in [`BANDS`] order.
    pub mag_err: [Option<f64>; 5],
    /// Class assigned by the photometric classifier.
    pub phot_class: Option<ObjectClass>,
    /// Its probability (0–1).
    pub phot_class_prob: Option<f64>,
    /// Photometric redshift.
    pub phot_z: Option<f64>,
}

/// Why a catalogue could not be read.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CatalogError {
    /// The file could not be opened or read.
    #[error("{}: cannot read: {source}", path.display())]
    Io {
        /// the file
        path: PathBuf,
        /// the cause
        source: std::io::Error,
    },
    /// Malformed CSV.
    #[error("{}: line {line}: {message}", path.display())]
    Csv {
        /// the file
        path: PathBuf,
        /// 1-based line
        line: u64,
        /// what is wrong
        message: String,
    },
    /// No id column.
    #[error("{}: no id column (tried: {tried}; name it in the column mapping, e.g. id=MYID)", path.display())]
    MissingId {
        /// the file
        path: PathBuf,
        /// names tried
        tried: String,
    },
    /// A column named explicitly in the mapping is not in the header.
    #[error("{}: column '{column}' given for {field} is not in the header", path.display())]
    MissingColumn {
        /// the file
        path: PathBuf,
        /// field of [`ColumnMap`]
        field: String,
        /// the name given
        column: String,
    },
    /// A value that cannot be read.
    #[error("{}: line {line}, column '{column}': cannot read '{value}' as {expected}", path.display())]
    BadValue {
        /// the file
        path: PathBuf,
        /// 1-based line
        line: u64,
        /// column name as in the header
        column: String,
        /// the text found
        value: String,
        /// what was expected
        expected: &'static str,
    },
    /// An empty id, or the same id twice.
    #[error("{}: line {line}: {message}", path.display())]
    BadId {
        /// the file
        path: PathBuf,
        /// 1-based line
        line: u64,
        /// what is wrong
        message: String,
    },
    /// A value outside the range it can physically take.
    #[error("{}: line {line}, column '{column}': {value} is outside {range}", path.display())]
    OutOfRange {
        /// the file
        path: PathBuf,
        /// 1-based line
        line: u64,
        /// column name as in the header
        column: String,
        /// the value found
        value: f64,
        /// the allowed range, in words
        range: &'static str,
    },
    /// A catalogue without any row, or without positions.
    #[error("{}: {message}", path.display())]
    Unusable {
        /// the file
        path: PathBuf,
        /// what is missing
        message: String,
    },
    /// An unknown field name in a `field=column` override.
    #[error("unknown catalogue field '{0}' (fields: {1})")]
    UnknownField(String, String),
}

/// For each catalogue field, the header names to look for (case-insensitive,
/// first match wins).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ColumnMap {
    /// Object id.
    pub id: Vec<String>,
    /// Right ascension (degrees).
    pub ra: Vec<String>,
    /// Declination (degrees).
    pub dec: Vec<String>,
    /// Magnitudes, in [`BANDS`] order.
    pub mag: [Vec<String>; 5],
    /// Magnitude errors, in [`BANDS`] order.
    pub mag_err: [Vec<String>; 5],
    /// Photometric class.
    pub phot_class: Vec<String>,
    /// Probability of the photometric class.
    pub phot_class_prob: Vec<String>,
    /// Photometric redshift.
    pub phot_z: Vec<String>,
    /// (field, column) given explicitly; these columns must exist.
    explicit: Vec<(String, String)>,
}

fn names(list: &[&str]) -> Vec<String> {
    list.iter().map(|s| s.to_string()).collect()
}

impl Default for ColumnMap {
    /// The default names:
    /// - id: `id objid obj_id object_id objectid object name targetid target_id source_id specid`
    /// - ra: `ra ra_deg raj2000 ra_j2000`; dec: `dec dec_deg dej2000 decj2000 dec_j2000`
    /// - magnitude in band b (u g r i z): `b mag_b bmag b_mag mag_b_ab b_ab`
    /// - its error: `b_err err_b e_b berr bmag_err b_mag_err mag_b_err magerr_b e_bmag sigma_b`
    /// - photometric class: `phot_class photclass class_phot photo_class class`
    /// - its probability: `phot_class_prob phot_prob class_prob prob_class p_class class_probability`
    /// - photometric redshift: `phot_z photo_z photoz zphot z_phot photz z_photo`
    ///
    /// A bare `z` is the z-band magnitude, never a redshift.
    fn default() -> Self {
        let band =
            |b: &str, pats: &[&str]| -> Vec<String> { pats.iter().map(|p| p.replace("{b}", b)).collect() };
        let mag_pats = ["{b}", "mag_{b}", "{b}mag", "{b}_mag", "mag_{b}_ab", "{b}_ab"];
        let err_pats = [
            "{b}_err",
            "err_{b}",
            "e_{b}",
            "{b}err",
            "{b}mag_err",
            "{b}_mag_err",
            "mag_{b}_err",
            "magerr_{b}",
            "e_{b}mag",
            "sigma_{b}",
        ];
        ColumnMap {
            id: names(&[
                "id",
                "objid",
                "obj_id",
                "object_id",
                "objectid",
                "object",
                "name",
                "targetid",
                "target_id",
                "source_id",
                "specid",
            ]),
            ra: names(&["ra", "ra_deg", "raj2000", "ra_j2000"]),
            dec: names(&["dec", "dec_deg", "dej2000", "decj2000", "dec_j2000"]),
            mag: BANDS.map(|b| band(b, &mag_pats)),
            mag_err: BANDS.map(|b| band(b, &err_pats)),
            phot_class: names(&["phot_class", "photclass", "class_phot", "photo_class", "class"]),
            phot_class_prob: names(&[
                "phot_class_prob",
                "phot_prob",
                "class_prob",
                "prob_class",
                "p_class",
                "class_probability",
            ]),
            phot_z: names(&[
                "phot_z", "photo_z", "photoz", "zphot", "z_phot", "photz", "z_photo",
            ]),
            explicit: Vec::new(),
        }
    }
}

/// The field names [`ColumnMap::set`] accepts.
pub const FIELDS: &[&str] = &[
    "id",
    "ra",
    "dec",
    "u",
    "g",
    "r",
    "i",
    "z",
    "u_err",
    "g_err",
    "r_err",
    "i_err",
    "z_err",
    "phot_class",
    "phot_class_prob",
    "phot_z",
];

impl ColumnMap {
    /// Use exactly `column` for `field` (one of [`FIELDS`]); the column must
    /// then exist in the file.
    pub fn set(&mut self, field: &str, column: &str) -> Result<(), CatalogError> {
        let f = field.trim().to_ascii_lowercase();
        let slot = match f.as_str() {
            "id" => &mut self.id,
            "ra" => &mut self.ra,
            "dec" => &mut self.dec,
            "phot_class" => &mut self.phot_class,
            "phot_class_prob" => &mut self.phot_class_prob,
            "phot_z" => &mut self.phot_z,
            other => {
                let (band, err) = match other.strip_suffix("_err") {
                    Some(b) => (b, true),
                    None => (other, false),
                };
                match BANDS.iter().position(|b| *b == band) {
                    Some(k) if err => &mut self.mag_err[k],
                    Some(k) => &mut self.mag[k],
                    None => return Err(CatalogError::UnknownField(field.to_string(), FIELDS.join(", "))),
                }
            }
        };
        *slot = vec![column.to_string()];
        self.explicit.push((f, column.to_string()));
        Ok(())
    }

    /// Apply `field=column` overrides (as typed on a command line).
    pub fn apply_overrides<S: AsRef<str>>(&mut self, overrides: &[S]) -> Result<(), CatalogError> {
        for o in overrides {
            let o = o.as_ref();
            let Some((field, column)) = o.split_once('=') else {
                return Err(CatalogError::UnknownField(
                    o.to_string(),
                    "expected field=column".into(),
                ));
            };
            self.set(field, column.trim())?;
        }
        Ok(())
    }
}

fn find(header: &[String], wanted: &[String]) -> Option<usize> {
    wanted.iter().find_map(|w| {
        let w = w.trim().to_ascii_lowercase();
        header.iter().position(|h| h.trim().to_ascii_lowercase() == w)
    })
}

fn is_missing(s: &str) -> bool {
    let t = s.trim();
    t.is_empty()
        || ["nan", "null", "na", "n/a", "--", "none"]
            .iter()
            .any(|m| t.eq_ignore_ascii_case(m))
}

/// Read a catalogue CSV.
pub fn read_csv(path: &Path, map: &ColumnMap) -> Result<Vec<CatalogRow>, CatalogError> {
    let io = |source| CatalogError::Io {
        path: path.to_path_buf(),
        source,
    };
    let bytes = std::fs::read(path).map_err(io)?;
    // A UTF-8 byte-order mark (spreadsheet exports) is not part of the first name.
    let bytes = bytes.strip_prefix("\u{feff}".as_bytes()).unwrap_or(&bytes);
    // Tab-separated when the first non-comment line has tabs and no commas.
    let first = String::from_utf8_lossy(bytes)
        .lines()
        .find(|l| !l.trim().is_empty() && !l.trim_start().starts_with('#'))
        .unwrap_or_default()
        .to_string();
    let delim = if first.contains('\t') && !first.contains(',') {
        b'\t'
    } else {
        b','
    };
    let mut rdr = csv::ReaderBuilder::new()
        .delimiter(delim)
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .flexible(false)
        .from_reader(bytes);
    let csv_err = |e: csv::Error| CatalogError::Csv {
        path: path.to_path_buf(),
        line: e.position().map_or(0, |p| p.line()),
        message: e.to_string(),
    };
    let header: Vec<String> = rdr
        .headers()
        .map_err(csv_err)?
        .iter()
        .map(|s| s.to_string())
        .collect();
    for (field, c) in &map.explicit {
        if find(&header, std::slice::from_ref(c)).is_none() {
            return Err(CatalogError::MissingColumn {
                path: path.to_path_buf(),
                field: field.clone(),
                column: c.clone(),
            });
        }
    }
    let Some(id_col) = find(&header, &map.id) else {
        return Err(CatalogError::MissingId {
            path: path.to_path_buf(),
            tried: map.id.join(", "),
        });
    };
    let ra = find(&header, &map.ra);
    let dec = find(&header, &map.dec);
    if ra.is_none() || dec.is_none() {
        return Err(CatalogError::Unusable {
            path: path.to_path_buf(),
            message: format!(
                "no {} column (tried: {}; name it in the column mapping, e.g. ra=RA_DEG)",
                if ra.is_none() {
                    "right ascension"
                } else {
                    "declination"
                },
                if ra.is_none() {
                    map.ra.join(", ")
                } else {
                    map.dec.join(", ")
                }
            ),
        });
    }
    let mag = map.mag.clone().map(|m| find(&header, &m));
    let mag_err = map.mag_err.clone().map(|m| find(&header, &m));
    let class = find(&header, &map.phot_class);
    let prob = find(&header, &map.phot_class_prob);
    let pz = find(&header, &map.phot_z);

    let mut rows = Vec::new();
    let mut seen: HashMap<String, u64> = HashMap::new();
    for rec in rdr.records() {
        let rec = rec.map_err(csv_err)?;
        let line = rec.position().map_or(0, |p| p.line());
        let num = |col: Option<usize>| -> Result<Option<f64>, CatalogError> {
            let Some(c) = col else { return Ok(None) };
            let v = rec.get(c).unwrap_or("");
            if is_missing(v) {
                return Ok(None);
            }
            match v.parse::<f64>() {
                Ok(x) if x.is_finite() => Ok(Some(x)),
                Ok(_) => Ok(None),
                Err(_) => Err(CatalogError::BadValue {
                    path: path.to_path_buf(),
                    line,
                    column: header[c].clone(),
                    value: v.to_string(),
                    expected: "a number",
                }),
            }
        };
        let magnitude =
            |col| -> Result<Option<f64>, CatalogError> { Ok(num(col)?.filter(|m| m.abs() < 90.0)) };
        let id = rec.get(id_col).unwrap_or("").trim().to_string();
        if id.is_empty() {
            return Err(CatalogError::BadId {
                path: path.to_path_buf(),
                line,
                message: "empty object id".into(),
            });
        }
        if let Some(prev) = seen.insert(id.clone(), line) {
            return Err(CatalogError::BadId {
                path: path.to_path_buf(),
                line,
                message: format!("object id '{id}' already on line {prev}"),
            });
        }
        let phot_class = match class.map(|c| rec.get(c).unwrap_or("")) {
            Some(v) if !is_missing(v) => {
                Some(v.parse::<ObjectClass>().map_err(|_| CatalogError::BadValue {
                    path: path.to_path_buf(),
                    line,
                    column: header[class.unwrap_or(0)].clone(),
                    value: v.to_string(),
                    expected: "a class (galaxy, quasar or star)",
                })?)
            }
            _ => None,
        };
        let within = |col: Option<usize>, lo: f64, hi: f64, hi_open: bool, range: &'static str| {
            let v = num(col)?;
            match v {
                Some(x) if x < lo || x > hi || (hi_open && x >= hi) => Err(CatalogError::OutOfRange {
                    path: path.to_path_buf(),
                    line,
                    column: header[col.unwrap_or(0)].clone(),
                    value: x,
                    range,
                }),
                _ => Ok(v),
            }
        };
        // Ranges: RA in [0, 360) degrees, Dec in [−90, +90] degrees (the
        // equatorial system, common practice), a probability in [0, 1], a
        // redshift above −1 (1 + z > 0 by definition).
        let mut row = CatalogRow {
            id,
            ra: within(ra, 0.0, 360.0, true, "0 ≤ RA < 360 degrees")?,
            dec: within(dec, -90.0, 90.0, false, "−90 ≤ Dec ≤ +90 degrees")?,
            phot_class,
            phot_class_prob: within(prob, 0.0, 1.0, false, "0 ≤ probability ≤ 1")?,
            phot_z: match num(pz)? {
                Some(z) if z <= -1.0 => {
                    return Err(CatalogError::OutOfRange {
                        path: path.to_path_buf(),
                        line,
                        column: header[pz.unwrap_or(0)].clone(),
                        value: z,
                        range: "z > −1",
                    })
                }
                v => v,
            },
            ..Default::default()
        };
        for k in 0..5 {
            row.mag[k] = magnitude(mag[k])?;
            row.mag_err[k] = magnitude(mag_err[k])?;
        }
        rows.push(row);
    }
    if rows.is_empty() {
        return Err(CatalogError::Unusable {
            path: path.to_path_buf(),
            message: "no rows below the header".into(),
        });
    }
    Ok(rows)
}

/// One line on how the catalogue ids match the spectra ids, for every
/// command that joins them: `None` when every spectrum has a row. Names up
/// to three unmatched spectrum ids, and says when ids differ only in letter
/// case (ids are compared exactly).
pub fn match_summary<S: AsRef<str>, C: AsRef<str>>(spectra_ids: &[S], catalog_ids: &[C]) -> Option<String> {
    let cat: std::collections::HashSet<&str> = catalog_ids.iter().map(|c| c.as_ref().trim()).collect();
    let lower: HashMap<String, &str> = catalog_ids
        .iter()
        .map(|c| (c.as_ref().trim().to_lowercase(), c.as_ref().trim()))
        .collect();
    let missing: Vec<&str> = spectra_ids
        .iter()
        .map(|s| s.as_ref().trim())
        .filter(|s| !cat.contains(s))
        .collect();
    if missing.is_empty() {
        return None;
    }
    let n = spectra_ids.len();
    let matched = n - missing.len();
    let mut msg =
        format!(
        "catalogue: {matched} of {n} spectra have a catalogue row ({} catalogue rows in all); no row for {}",
        catalog_ids.len(),
        missing.iter().take(3).map(|s| format!("'{s}'")).collect::<Vec<_>>().join(", ")
    );
    if missing.len() > 3 {
        msg.push_str(&format!(" and {} more", missing.len() - 3));
    }
    let by_case: Vec<(&str, &str)> = missing
        .iter()
        .filter_map(|s| lower.get(&s.to_lowercase()).map(|c| (*s, *c)))
        .collect();
    if let Some((s, c)) = by_case.first() {
        msg.push_str(&format!(
            "; {} id(s) differ from a catalogue id only in letter case (e.g. spectrum '{s}', catalogue '{c}'): ids are compared exactly",
            by_case.len()
        ));
    }
    Some(msg)
}

/// Spectra paired with catalogue rows.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Join {
    /// (index into the spectrum ids, index into the rows) for every match.
    pub matched: Vec<(usize, usize)>,
    /// Spectrum ids with no catalogue row, in input order.
    pub spectra_only: Vec<String>,
    /// Catalogue ids with no spectrum, in catalogue order.
    pub catalog_only: Vec<String>,
}

/// Pair spectra and catalogue rows by id (exact match after trimming white space).
pub fn join<S: AsRef<str>>(spectra_ids: &[S], rows: &[CatalogRow]) -> Join {
    let index: HashMap<&str, usize> = rows.iter().enumerate().map(|(i, r)| (r.id.trim(), i)).collect();
    let mut used = vec![false; rows.len()];
    let mut out = Join::default();
    for (si, id) in spectra_ids.iter().enumerate() {
        match index.get(id.as_ref().trim()) {
            Some(&ri) => {
                out.matched.push((si, ri));
                used[ri] = true;
            }
            None => out.spectra_only.push(id.as_ref().to_string()),
        }
    }
    out.catalog_only = rows
        .iter()
        .zip(&used)
        .filter(|(_, u)| !**u)
        .map(|(r, _)| r.id.clone())
        .collect();
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn write(name: &str, text: &str) -> PathBuf {
        let dir = std::env::temp_dir().join(format!("zvet-catalog-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join(name);
        std::fs::write(&p, text).unwrap();
        p
    }

    #[test]
    fn default_names_and_missing_values() {
        let p = write(
            "a.csv",
            "# invented test catalogue\nObjID,RA,Dec,u,g,r,i,z,g_err,r_err,phot_class,class_prob,photo_z\n\
             a1,10.5,-3.25,21.0,20.1,19.5,19.2,19.0,0.03,0.02,galaxy,0.9,0.31\n\
             a2,11.0,,99.0,,18.0,,,,nan,QSO,,\n",
        );
        let rows = read_csv(&p, &ColumnMap::default()).unwrap();
        assert_eq!(rows.len(), 2);
        let a = &rows[0];
        assert_eq!(a.id, "a1");
        assert_eq!((a.ra, a.dec), (Some(10.5), Some(-3.25)));
        assert_eq!(
            a.mag,
            [Some(21.0), Some(20.1), Some(19.5), Some(19.2), Some(19.0)]
        );
        assert_eq!(a.mag_err[1], Some(0.03));
        assert_eq!(a.phot_class, Some(ObjectClass::Galaxy));
        assert_eq!(a.phot_class_prob, Some(0.9));
        assert_eq!(a.phot_z, Some(0.31));
        let b = &rows[1];
        assert_eq!(b.dec, None);
        assert_eq!(b.mag[0], None, "99 is the not-detected placeholder");
        assert_eq!(b.mag[2], Some(18.0));
        assert_eq!(b.mag_err[2], None);
        assert_eq!(b.phot_class, Some(ObjectClass::Quasar));
        assert_eq!(b.phot_z, None);
    }

    #[test]
    fn overrides_and_errors() {
        let p = write(
            "b.tsv",
            "SRC\tra\tdec\trmag\tzp\nx\t1\t2\t18.5\t0.7\ny\t1\t2\t19.5\tbad\n",
        );
        let mut map = ColumnMap::default();
        map.apply_overrides(&["id=SRC", "r=rmag", "phot_z=zp"]).unwrap();
        let e = read_csv(&p, &map).unwrap_err();
        assert!(matches!(e, CatalogError::BadValue { line: 3, .. }), "{e}");
        let p = write("c.tsv", "SRC\tra\tdec\trmag\tzp\nx\t1\t2\t18.5\t0.7\n");
        let rows = read_csv(&p, &map).unwrap();
        assert_eq!(rows[0].mag[2], Some(18.5));
        assert_eq!(rows[0].phot_z, Some(0.7));
        assert!(matches!(
            read_csv(&p, &ColumnMap::default()),
            Err(CatalogError::MissingId { .. })
        ));
        let mut m = ColumnMap::default();
        m.set("ra", "RA_NOT_THERE").unwrap();
        assert!(matches!(
            read_csv(&p, &m),
            Err(CatalogError::MissingColumn { .. })
        ));
        assert!(m.set("y", "Y").is_err());
        let p = write("d.csv", "id,ra,dec,r\nq,1,2,1\nq,1,2,2\n");
        assert!(matches!(
            read_csv(&p, &ColumnMap::default()),
            Err(CatalogError::BadId { line: 3, .. })
        ));
    }

    #[test]
    fn band_names_expand() {
        let m = ColumnMap::default();
        assert!(m.mag[2].contains(&"mag_r_ab".to_string()));
        assert!(m.mag_err[0].contains(&"e_umag".to_string()));
        assert!(m.mag[4].contains(&"z".to_string()));
        assert!(!m.phot_z.contains(&"z".to_string()));
    }

    #[test]
    fn join_reports_both_sides() {
        let rows: Vec<CatalogRow> = ["a", "b", "c"]
            .iter()
            .map(|id| CatalogRow {
                id: id.to_string(),
                ..Default::default()
            })
            .collect();
        let j = join(&["c", "x", "a "], &rows);
        assert_eq!(j.matched, vec![(0, 2), (2, 0)]);
        assert_eq!(j.spectra_only, vec!["x"]);
        assert_eq!(j.catalog_only, vec!["b"]);
    }
}
