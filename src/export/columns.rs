/*!
The columns of the training catalogue, each defined once by name: its storage
type, unit, the precision it is written at, and how its value is taken from
and put back into an [`ExportRow`]. Every writer (CSV, ECSV, FITS) and every
reader goes through [`COLUMNS`], and readers find columns by name, so the
formats cannot drift apart and a new column is one entry here (plus its field
in [`ExportRow`]).

Floats are rounded and formatted in one place ([`Precision`]): magnitudes and
colours to 0.001 mag, their errors to 0.0001 mag, positions to 1e-7 deg,
redshifts at full (shortest round-trip) precision, so a colour reads 2.150
rather than 2.1499999999999986 in every format.
*/
use super::{ExportError, ExportRow};
use crate::catalog::CatalogRow;
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

/// How a float column is rounded and written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Precision {
    /// Shortest text that reads back as the same double (redshifts).
    Full,
    /// A fixed number of decimals (magnitudes: 3).
    Decimals(u8),
    /// A number of significant digits (fluxes, errors).
    Significant(u8),
}

impl Precision {
    /// The value as written to text; `None` and non-finite values are empty.
    pub fn text(self, x: Option<f64>) -> String {
        let Some(x) = x.filter(|x| x.is_finite()) else {
            return String::new();
        };
        match self {
            Precision::Full => format!("{x:?}"),
            Precision::Decimals(d) => {
                let d = usize::from(d);
                let s = format!("{x:.d$}");
                // No "-0.000": a value that rounds to zero is written as zero.
                if s.starts_with('-') && s.bytes().all(|b| matches!(b, b'-' | b'0' | b'.')) {
                    s[1..].to_string()
                } else {
                    s
                }
            }
            Precision::Significant(n) => {
                let n = usize::from(n.max(1));
                let e = format!("{:.*e}", n - 1, x);
                let r: f64 = e.parse().unwrap_or(x);
                if r == 0.0 {
                    return "0".into();
                }
                let exp = r.abs().log10().floor() as i32;
                if (-4..6).contains(&exp) {
                    let d = (n as i32 - 1 - exp).max(0) as usize;
                    format!("{r:.d$}")
                } else {
                    e
                }
            }
        }
    }

    /// The value rounded to this precision (the nearest double of its text),
    /// so binary formats hold what the text formats show.
    pub fn round(self, x: Option<f64>) -> Option<f64> {
        let x = x.filter(|x| x.is_finite())?;
        match self {
            Precision::Full => Some(x),
            _ => self.text(Some(x)).parse().ok(),
        }
    }
}

type Get<T> = fn(&ExportRow) -> T;
type Set<T> = fn(&mut ExportRow, T) -> Result<(), String>;
type SetStr = for<'a> fn(&mut ExportRow, &'a str) -> Result<(), String>;

/// How a column's value is taken from a row and put back.
#[derive(Clone, Copy)]
pub enum Access {
    /// A text column.
    Str(Get<String>, SetStr),
    /// A float column and the precision it is written at.
    F64(Get<Option<f64>>, Set<Option<f64>>, Precision),
    /// A small-integer column.
    I16(Get<Option<i16>>, Set<Option<i16>>),
}

impl std::fmt::Debug for Access {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Access::Str(..) => f.write_str("Str"),
            Access::F64(_, _, p) => write!(f, "F64({p:?})"),
            Access::I16(..) => f.write_str("I16"),
        }
    }
}

/// One column of the catalogue.
#[derive(Debug, Clone, Copy)]
pub struct ColumnSpec {
    /// Column name.
    pub name: &'static str,
    /// Unit (FITS TUNITn, ECSV unit), if any.
    pub unit: Option<&'static str>,
    /// What it holds.
    pub doc: &'static str,
    /// Getter and setter.
    pub access: Access,
}

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

impl ColumnSpec {
    /// Storage type.
    pub fn kind(&self) -> Kind {
        match self.access {
            Access::Str(..) => Kind::Str,
            Access::F64(..) => Kind::F64,
            Access::I16(..) => Kind::I16,
        }
    }

    /// Precision of a float column (`Full` for the others).
    pub fn precision(&self) -> Precision {
        match self.access {
            Access::F64(_, _, p) => p,
            _ => Precision::Full,
        }
    }

    /// The row's value of this column (floats rounded to the column's precision).
    pub fn value(&self, row: &ExportRow) -> Cell {
        match self.access {
            Access::Str(g, _) => Cell::Str(g(row)),
            Access::F64(g, _, p) => Cell::F64(p.round(g(row))),
            Access::I16(g, _) => Cell::I16(g(row)),
        }
    }

    /// The row's value as CSV/ECSV text (empty = missing).
    pub fn text(&self, row: &ExportRow) -> String {
        match self.access {
            Access::Str(g, _) => g(row),
            Access::F64(g, _, p) => p.text(g(row)),
            Access::I16(g, _) => g(row).map_or(String::new(), |x| x.to_string()),
        }
    }

    /// Parse this column's text (as [`ColumnSpec::text`] writes it).
    pub fn parse(&self, s: &str) -> Result<Cell, String> {
        let t = s.trim();
        Ok(match self.kind() {
            Kind::Str => Cell::Str(s.to_string()),
            Kind::F64 if t.is_empty() || t.eq_ignore_ascii_case("nan") => Cell::F64(None),
            Kind::F64 => Cell::F64(Some(
                t.parse()
                    .map_err(|_| format!("{}: '{s}' is not a number", self.name))?,
            )),
            Kind::I16 if t.is_empty() => Cell::I16(None),
            Kind::I16 => Cell::I16(Some(
                t.parse()
                    .map_err(|_| format!("{}: '{s}' is not an integer", self.name))?,
            )),
        })
    }

    /// Put a value back into `row`.
    pub fn store(&self, row: &mut ExportRow, cell: Cell) -> Result<(), String> {
        let wrong = |c: &Cell| format!("{}: a {:?} column cannot hold {c:?}", self.name, self.kind());
        match (self.access, cell) {
            (Access::Str(_, s), Cell::Str(v)) => s(row, &v),
            (Access::F64(_, s, _), Cell::F64(v)) => s(row, v.filter(|x| x.is_finite())),
            (Access::I16(_, s), Cell::I16(v)) => s(row, v),
            (_, c) => Err(wrong(&c)),
        }
    }
}

/// Find a column by name.
pub fn column(name: &str) -> Option<&'static ColumnSpec> {
    COLUMNS.iter().find(|c| c.name == name)
}

/// Parse a lower-case word through its serde spelling; empty = `None`.
fn word<T: serde::de::DeserializeOwned>(name: &str, s: &str) -> Result<Option<T>, String> {
    let w = s.trim();
    if w.is_empty() {
        return Ok(None);
    }
    serde_json::from_str(&format!("\"{w}\""))
        .map(Some)
        .map_err(|_| format!("{name}: unknown value '{w}'"))
}

fn diff(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    Some(a? - b?)
}

/// Derived columns are not stored back.
fn derived<T>(_: &mut ExportRow, _: T) -> Result<(), String> {
    Ok(())
}

const fn col(
    name: &'static str,
    unit: Option<&'static str>,
    doc: &'static str,
    access: Access,
) -> ColumnSpec {
    ColumnSpec {
        name,
        unit,
        doc,
        access,
    }
}

const DEG: Option<&str> = Some("deg");
const MAG: Option<&str> = Some("mag");
/// Positions: 1e-7 deg = 0.36 mas (common practice: well below astrometric errors).
const POS: Precision = Precision::Decimals(7);
/// Magnitudes and colours: 0.001 mag (common practice for catalogue photometry).
const MAGP: Precision = Precision::Decimals(3);
/// Magnitude errors: 0.0001 mag.
const MAGE: Precision = Precision::Decimals(4);
/// Redshift errors: three significant digits.
const ZERR: Precision = Precision::Significant(3);

macro_rules! mag {
    ($name:literal, $b:literal, $doc:literal) => {
        col(
            $name,
            MAG,
            $doc,
            Access::F64(
                |r| r.catalog.mag[$b],
                |r, v| {
                    r.catalog.mag[$b] = v;
                    Ok(())
                },
                MAGP,
            ),
        )
    };
}
macro_rules! mag_err {
    ($name:literal, $b:literal, $doc:literal) => {
        col(
            $name,
            MAG,
            $doc,
            Access::F64(
                |r| r.catalog.mag_err[$b],
                |r, v| {
                    r.catalog.mag_err[$b] = v;
                    Ok(())
                },
                MAGE,
            ),
        )
    };
}
macro_rules! colour {
    ($name:literal, $b:literal, $doc:literal) => {
        col($name, MAG, $doc, Access::F64(|r| r.colours()[$b], derived, MAGP))
    };
}
/// A float field of the row (`$($f).+` is its path).
macro_rules! float {
    ($name:literal, $unit:expr, $p:expr, $doc:literal, $($f:ident).+) => {
        col(
            $name,
            $unit,
            $doc,
            Access::F64(
                |r| r.$($f).+,
                |r, v| {
                    r.$($f).+ = v;
                    Ok(())
                },
                $p,
            ),
        )
    };
}
/// An optional vocabulary word of the row.
macro_rules! vocab {
    ($name:literal, $doc:literal, $ty:ty, $($f:ident).+) => {
        col(
            $name,
            None,
            $doc,
            Access::Str(
                |r| r.$($f).+.map_or(String::new(), |x| x.as_str().to_string()),
                |r, s| {
                    r.$($f).+ = word::<$ty>($name, s)?;
                    Ok(())
                },
            ),
        )
    };
}

/// Emission-line fluxes and errors: four significant digits (common practice:
/// finer than any line flux is known).
const LINEP: Precision = Precision::Significant(4);
/// Ångström (FITS TUNIT and ECSV unit, as astropy spells it).
const ANGSTROM: Option<&str> = Some("Angstrom");

/// The three columns of exported line `$i` ([`super::EXPORT_LINES`]).
macro_rules! line {
    ($i:literal, $flux:literal, $err:literal, $ew:literal, $what:literal) => {
        [
            col(
                $flux,
                None,
                concat!($what, " flux (spectra's flux unit × Å), automatic fit"),
                Access::F64(
                    |r| r.lines[$i].flux,
                    |r, v| {
                        r.lines[$i].flux = v;
                        Ok(())
                    },
                    LINEP,
                ),
            ),
            col(
                $err,
                None,
                "its 1σ error",
                Access::F64(
                    |r| r.lines[$i].flux_err,
                    |r, v| {
                        r.lines[$i].flux_err = v;
                        Ok(())
                    },
                    LINEP,
                ),
            ),
            col(
                $ew,
                ANGSTROM,
                concat!($what, " rest-frame equivalent width, positive for emission"),
                Access::F64(
                    |r| r.lines[$i].ew,
                    |r, v| {
                        r.lines[$i].ew = v;
                        Ok(())
                    },
                    LINEP,
                ),
            ),
        ]
    };
}

/// The line columns, in [`super::EXPORT_LINES`] order.
const LINE_COLUMNS: [[ColumnSpec; 3]; 8] = [
    line!(
        0,
        "line_halpha_flux",
        "line_halpha_flux_err",
        "line_halpha_ew",
        "Hα 6565"
    ),
    line!(
        1,
        "line_hbeta_flux",
        "line_hbeta_flux_err",
        "line_hbeta_ew",
        "Hβ 4863"
    ),
    line!(
        2,
        "line_hgamma_flux",
        "line_hgamma_flux_err",
        "line_hgamma_ew",
        "Hγ 4342"
    ),
    line!(
        3,
        "line_hdelta_flux",
        "line_hdelta_flux_err",
        "line_hdelta_ew",
        "Hδ 4103"
    ),
    line!(
        4,
        "line_oiii_5008_flux",
        "line_oiii_5008_flux_err",
        "line_oiii_5008_ew",
        "[O III] 5008"
    ),
    line!(
        5,
        "line_nii_6585_flux",
        "line_nii_6585_flux_err",
        "line_nii_6585_ew",
        "[N II] 6585"
    ),
    line!(
        6,
        "line_oii_3727_3730_flux",
        "line_oii_3727_3730_flux_err",
        "line_oii_3727_3730_ew",
        "[O II] 3727+3730 doublet"
    ),
    line!(
        7,
        "line_sii_6718_6733_flux",
        "line_sii_6718_6733_flux_err",
        "line_sii_6718_6733_ew",
        "[S II] 6718+6733 doublet"
    ),
];

/// Number of catalogue columns before the line columns.
const N_BASE: usize = 38;

/// All columns, in file order: the catalogue, fit and verdict columns, then
/// the emission-line columns ([`LINE_COLUMNS`]).
pub const COLUMNS: [ColumnSpec; N_BASE + 3 * LINE_COLUMNS.len()] = {
    let mut out = [BASE_COLUMNS[0]; N_BASE + 3 * LINE_COLUMNS.len()];
    let mut i = 0;
    while i < N_BASE {
        out[i] = BASE_COLUMNS[i];
        i += 1;
    }
    let mut l = 0;
    while l < LINE_COLUMNS.len() {
        let mut c = 0;
        while c < 3 {
            out[N_BASE + 3 * l + c] = LINE_COLUMNS[l][c];
            c += 1;
        }
        l += 1;
    }
    out
};

/// The catalogue, fit and verdict columns.
const BASE_COLUMNS: [ColumnSpec; N_BASE] = [
    col(
        "id",
        None,
        "object id",
        Access::Str(
            |r| r.catalog.id.clone(),
            |r, s| {
                r.catalog.id = s.to_string();
                Ok(())
            },
        ),
    ),
    float!("ra", DEG, POS, "right ascension (catalogue)", catalog.ra),
    float!("dec", DEG, POS, "declination (catalogue)", catalog.dec),
    mag!("mag_u", 0, "u AB magnitude"),
    mag!("mag_g", 1, "g AB magnitude"),
    mag!("mag_r", 2, "r AB magnitude"),
    mag!("mag_i", 3, "i AB magnitude"),
    mag!("mag_z", 4, "z AB magnitude"),
    mag_err!("mag_u_err", 0, "u magnitude error"),
    mag_err!("mag_g_err", 1, "g magnitude error"),
    mag_err!("mag_r_err", 2, "r magnitude error"),
    mag_err!("mag_i_err", 3, "i magnitude error"),
    mag_err!("mag_z_err", 4, "z magnitude error"),
    colour!("u_g", 0, "colour u − g"),
    colour!("g_r", 1, "colour g − r"),
    colour!("r_i", 2, "colour r − i"),
    colour!("i_z", 3, "colour i − z"),
    vocab!(
        "phot_class",
        "photometric classifier's class",
        ObjectClass,
        catalog.phot_class
    ),
    float!(
        "phot_class_prob",
        None,
        Precision::Decimals(4),
        "its probability",
        catalog.phot_class_prob
    ),
    float!(
        "phot_z",
        None,
        Precision::Full,
        "photometric redshift",
        catalog.phot_z
    ),
    vocab!("auto_class", "automatic (engine) class", ObjectClass, auto_class),
    float!("auto_z", None, Precision::Full, "automatic redshift", auto_z),
    float!("auto_z_err", None, ZERR, "its 1σ error", auto_z_err),
    float!(
        "auto_delta_chi2",
        None,
        Precision::Decimals(2),
        "Δχ² to the runner-up (NaN/empty: none)",
        auto_delta_chi2
    ),
    col(
        "auto_warnings",
        None,
        "engine warnings, `|`-separated",
        Access::Str(
            |r| r.auto_warnings.clone(),
            |r, s| {
                r.auto_warnings = s.to_string();
                Ok(())
            },
        ),
    ),
    col(
        "vetted_class",
        None,
        "vetted class: galaxy, quasar, star, unclear",
        Access::Str(
            |r| r.vetted_class.as_str().to_string(),
            |r, s| {
                r.vetted_class = word::<VerdictClass>("vetted_class", s)?
                    .ok_or_else(|| "vetted_class is empty".to_string())?;
                Ok(())
            },
        ),
    ),
    float!("vetted_z", None, Precision::Full, "vetted redshift", vetted_z),
    float!("vetted_z_err", None, ZERR, "its 1σ error", vetted_z_err),
    vocab!(
        "z_source",
        "automatic, candidate, refit or typed",
        ZSource,
        z_source
    ),
    vocab!(
        "confidence",
        "certainty: guess, probable, secure",
        Confidence,
        confidence
    ),
    col(
        "confidence_level",
        None,
        "certainty 1–3: 1 guess, 2 probable, 3 secure (FITS: 0 = none)",
        Access::I16(|r| r.confidence.map(|x| i16::from(x.level())), derived),
    ),
    col(
        "flags",
        None,
        "inspector flags, `,`-separated",
        Access::Str(
            |r| r.flags.iter().map(|f| f.as_str()).collect::<Vec<_>>().join(","),
            |r, s| {
                r.flags = s
                    .split(',')
                    .filter_map(|x| word::<Flag>("flags", x).transpose())
                    .collect::<Result<BTreeSet<_>, _>>()?;
                Ok(())
            },
        ),
    ),
    col(
        "note",
        None,
        "inspectors' notes",
        Access::Str(
            |r| r.note.clone(),
            |r, s| {
                r.note = s.to_string();
                Ok(())
            },
        ),
    ),
    col(
        "inspectors",
        None,
        "inspectors whose verdicts counted, `,`-separated",
        Access::Str(
            |r| r.inspectors.join(","),
            |r, s| {
                r.inspectors = s.split(',').filter(|x| !x.is_empty()).map(String::from).collect();
                Ok(())
            },
        ),
    ),
    col(
        "n_inspectors",
        None,
        "their number",
        Access::I16(
            |r| Some(r.inspectors.len().min(i16::MAX as usize) as i16),
            derived,
        ),
    ),
    col(
        "consensus",
        None,
        "single, agreed or adjudicated",
        Access::Str(
            |r| r.consensus.as_str().to_string(),
            |r, s| {
                r.consensus = word::<ConsensusState>("consensus", s)?
                    .ok_or_else(|| "consensus is empty".to_string())?;
                Ok(())
            },
        ),
    ),
    col(
        "in_audit_sample",
        None,
        "true when the object was drawn into the campaign's audit sample",
        Access::Str(
            |r| if r.in_audit_sample { "true" } else { "false" }.to_string(),
            |r, s| {
                r.in_audit_sample = match s.trim() {
                    "true" | "True" | "TRUE" => true,
                    "false" | "False" | "FALSE" | "" => false,
                    other => return Err(format!("in_audit_sample: '{other}' is not true or false")),
                };
                Ok(())
            },
        ),
    ),
    float!(
        "weight",
        None,
        Precision::Significant(6),
        "weight for catalogue-wide estimates: N_h / vetted audit-sample objects of the stratum in the sample; 1 outside it (queue-chosen objects stand only for themselves)",
        weight
    ),
];

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

    /// The row's values in [`COLUMNS`] order (floats at their precision).
    pub fn cells(&self) -> Vec<Cell> {
        COLUMNS.iter().map(|c| c.value(self)).collect()
    }

    /// Rebuild a row from `(column name, value)` pairs, found by name in
    /// any order. Names that are not columns of the catalogue are ignored
    /// (a user may add columns); a missing column is an error.
    pub fn from_named<'a>(
        cells: impl IntoIterator<Item = (&'a str, Cell)>,
    ) -> Result<ExportRow, ExportError> {
        let mut row = ExportRow {
            catalog: CatalogRow::default(),
            auto_class: None,
            auto_z: None,
            auto_z_err: None,
            auto_delta_chi2: None,
            auto_warnings: String::new(),
            vetted_class: VerdictClass::Unclear,
            vetted_z: None,
            vetted_z_err: None,
            z_source: None,
            confidence: None,
            flags: BTreeSet::new(),
            note: String::new(),
            inspectors: Vec::new(),
            consensus: ConsensusState::Single,
            lines: Default::default(),
            in_audit_sample: false,
            weight: None,
        };
        let mut seen = [false; COLUMNS.len()];
        for (name, cell) in cells {
            let Some(j) = COLUMNS.iter().position(|c| c.name == name) else {
                continue;
            };
            COLUMNS[j].store(&mut row, cell).map_err(ExportError::Format)?;
            seen[j] = true;
        }
        missing_check(&seen)?;
        Ok(row)
    }
}

/// Error naming the columns not seen.
pub(super) fn missing_check(seen: &[bool]) -> Result<(), ExportError> {
    let missing: Vec<&str> = COLUMNS
        .iter()
        .zip(seen)
        .filter(|(_, s)| !**s)
        .map(|(c, _)| c.name)
        .collect();
    if missing.is_empty() {
        Ok(())
    } else {
        Err(ExportError::Format(format!(
            "not a zvet training catalogue: missing column(s) {}",
            missing.join(", ")
        )))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique() {
        let mut names: Vec<&str> = COLUMNS.iter().map(|c| c.name).collect();
        names.sort_unstable();
        names.dedup();
        assert_eq!(names.len(), COLUMNS.len());
    }

    #[test]
    fn precision_text() {
        // 21.03 − 18.88 in binary is 2.1499999999999986 (IEEE 754 double).
        let colour = 21.03 - 18.88;
        assert_eq!(Precision::Decimals(3).text(Some(colour)), "2.150");
        assert_eq!(Precision::Decimals(3).round(Some(colour)), Some(2.15));
        assert_eq!(Precision::Decimals(3).text(Some(-0.0001)), "0.000");
        assert_eq!(
            Precision::Full.text(Some(0.3123456789012345)),
            "0.3123456789012345"
        );
        assert_eq!(Precision::Significant(3).text(Some(1.2345e-4)), "0.000123");
        assert_eq!(Precision::Significant(3).text(Some(1.2345e-7)), "1.23e-7");
        assert_eq!(Precision::Significant(3).text(Some(812.46)), "812");
        assert_eq!(Precision::Significant(3).text(Some(3.0e9)), "3.00e9");
        assert_eq!(Precision::Significant(3).text(Some(0.0)), "0");
        assert_eq!(Precision::Full.text(None), "");
        assert_eq!(Precision::Full.text(Some(f64::NAN)), "");
    }
}
