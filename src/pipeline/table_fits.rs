/*!
The FITS binary-table form of the result table (extension `FITS_RESULTS`):
text columns as fixed-width strings, numbers as doubles with NaN for
missing, the warning bits and pixel counts as 64-bit integers.
*/
use super::record::{FitRow, TableError};
use fitsio::tables::{ColumnDataType, ColumnDescription};
use fitsio::FitsFile;
use std::path::Path;

/// Name of the table extension.
pub const EXTNAME: &str = "FITS_RESULTS";

fn err(path: &Path, e: impl std::fmt::Display) -> TableError {
    TableError::Format {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

type Getter<T> = fn(&FitRow) -> T;

/// Reads one text column's value from a row.
type TextGetter = fn(&FitRow) -> &str;

const TEXT: [(&str, TextGetter); 9] = [
    ("object_id", |r| &r.object_id),
    ("source", |r| &r.source),
    ("class", |r| &r.class),
    ("warning_names", |r| &r.warning_names),
    ("template", |r| &r.template),
    ("class_2", |r| &r.class_2),
    ("class_3", |r| &r.class_3),
    ("method", |r| &r.method),
    ("per_class", |r| &r.per_class),
];

const NUM: [(&str, Getter<Option<f64>>); 11] = [
    ("z", |r| r.z),
    ("z_err", |r| r.z_err),
    ("chi2", |r| r.chi2),
    ("chi2_reduced", |r| r.chi2_reduced),
    ("delta_chi2", |r| r.delta_chi2),
    ("snr_median", |r| r.snr_median),
    ("z_2", |r| r.z_2),
    ("chi2_2", |r| r.chi2_2),
    ("z_3", |r| r.z_3),
    ("chi2_3", |r| r.chi2_3),
    ("n_good", |r| r.n_good.map(|v| v as f64)),
];

/// Write `rows` to `path` through the one atomic output path: a temporary
/// file whose every write and close is checked, renamed into place; on any
/// failure an error and the old file stays.
pub fn write(path: &Path, rows: &[FitRow]) -> Result<(), TableError> {
    let result = crate::io::atomic::atomic_create(path, ".fits", |tmp: &Path| -> Result<(), Step> {
        let mut f = FitsFile::create(tmp).open()?;
        let mut cols = Vec::new();
        let text_cols: Vec<(&str, Vec<String>)> = TEXT
            .iter()
            .map(|(n, g)| (*n, rows.iter().map(|r| g(r).to_string()).collect()))
            .chain(std::iter::once((
                "error",
                rows.iter().map(|r| r.error.clone()).collect(),
            )))
            .collect();
        for (name, vals) in &text_cols {
            let width = vals.iter().map(|v| v.len()).max().unwrap_or(1).max(1);
            cols.push(
                ColumnDescription::new(*name)
                    .with_type(ColumnDataType::String)
                    .that_repeats(width)
                    .create()?,
            );
        }
        for (name, _) in NUM {
            cols.push(
                ColumnDescription::new(name)
                    .with_type(ColumnDataType::Double)
                    .create()?,
            );
        }
        cols.push(
            ColumnDescription::new("warnings")
                .with_type(ColumnDataType::LongLong)
                .create()?,
        );
        let hdu = f.create_table(EXTNAME.to_string(), &cols)?;
        if rows.is_empty() {
            return Ok(crate::campaign::close_fits(f, 0)?);
        }
        for (name, vals) in &text_cols {
            hdu.write_col(&mut f, *name, vals)?;
        }
        for (name, g) in NUM {
            let v: Vec<f64> = rows.iter().map(|r| g(r).unwrap_or(f64::NAN)).collect();
            hdu.write_col(&mut f, name, &v)?;
        }
        let w: Vec<i64> = rows.iter().map(|r| i64::from(r.warnings)).collect();
        hdu.write_col(&mut f, "warnings", &w)?;
        Ok(crate::campaign::close_fits(f, rows.len())?)
    });
    result.map_err(|e| match e {
        Step::Io(source) => TableError::Io {
            path: path.to_path_buf(),
            source,
        },
        Step::Fits(e) => err(path, e),
    })
}

/// A failure of one step of writing the FITS table.
enum Step {
    Io(std::io::Error),
    Fits(fitsio::errors::Error),
}

impl From<std::io::Error> for Step {
    fn from(e: std::io::Error) -> Self {
        Step::Io(e)
    }
}

impl From<fitsio::errors::Error> for Step {
    fn from(e: fitsio::errors::Error) -> Self {
        Step::Fits(e)
    }
}

/// Read the rows of the `FITS_RESULTS` table of `path`.
pub fn read(path: &Path) -> Result<Vec<FitRow>, TableError> {
    // Sizes the headers declare are checked before the library allocates by them.
    crate::io::fits_layout(path).map_err(|e| err(path, e))?;
    let mut f = FitsFile::open(path).map_err(|e| err(path, e))?;
    let hdu = f.hdu(EXTNAME).map_err(|e| err(path, e))?;
    let ids: Vec<String> = hdu.read_col(&mut f, "object_id").map_err(|e| err(path, e))?;
    let ids: Vec<String> = ids.into_iter().map(|s| s.trim_end().to_string()).collect();
    let mut rows: Vec<FitRow> = ids
        .into_iter()
        .map(|id| FitRow {
            object_id: id,
            ..FitRow::default()
        })
        .collect();
    let n = rows.len();
    let mut text = |name: &str| -> Result<Vec<String>, TableError> {
        let v: Vec<String> = hdu.read_col(&mut f, name).map_err(|e| err(path, e))?;
        // FITS pads strings with blanks; an empty value comes back as " "
        let v: Vec<String> = v.into_iter().map(|s| s.trim_end().to_string()).collect();
        (v.len() == n)
            .then_some(v)
            .ok_or_else(|| err(path, format!("column {name} is short")))
    };
    let cols: Vec<Vec<String>> = [
        "source",
        "class",
        "warning_names",
        "template",
        "class_2",
        "class_3",
        "method",
        "error",
    ]
    .iter()
    .map(|c| text(c))
    .collect::<Result<_, _>>()?;
    for (i, r) in rows.iter_mut().enumerate() {
        r.source = cols[0][i].clone();
        r.class = cols[1][i].clone();
        r.warning_names = cols[2][i].clone();
        r.template = cols[3][i].clone();
        r.class_2 = cols[4][i].clone();
        r.class_3 = cols[5][i].clone();
        r.method = cols[6][i].clone();
        r.error = cols[7][i].clone();
    }
    // absent in tables written before the column existed
    if let Ok(v) = text("per_class") {
        for (r, s) in rows.iter_mut().zip(v) {
            r.per_class = s;
        }
    }
    let mut num = |name: &str| -> Result<Vec<Option<f64>>, TableError> {
        let v: Vec<f64> = hdu.read_col(&mut f, name).map_err(|e| err(path, e))?;
        if v.len() != n {
            return Err(err(path, format!("column {name} is short")));
        }
        Ok(v.into_iter().map(|x| x.is_finite().then_some(x)).collect())
    };
    let z = num("z")?;
    let z_err = num("z_err")?;
    let chi2 = num("chi2")?;
    let chi2r = num("chi2_reduced")?;
    let dchi2 = num("delta_chi2")?;
    let snr = num("snr_median")?;
    let z2 = num("z_2")?;
    let c2 = num("chi2_2")?;
    let z3 = num("z_3")?;
    let c3 = num("chi2_3")?;
    let ng = num("n_good")?;
    let warn: Vec<i64> = hdu.read_col(&mut f, "warnings").map_err(|e| err(path, e))?;
    for (i, r) in rows.iter_mut().enumerate() {
        r.z = z[i];
        r.z_err = z_err[i];
        r.chi2 = chi2[i];
        r.chi2_reduced = chi2r[i];
        r.delta_chi2 = dchi2[i];
        r.snr_median = snr[i];
        r.z_2 = z2[i];
        r.chi2_2 = c2[i];
        r.z_3 = z3[i];
        r.chi2_3 = c3[i];
        r.n_good = ng[i].map(|v| v as u64);
        r.warnings = warn.get(i).copied().unwrap_or(0).clamp(0, i64::from(u32::MAX)) as u32;
    }
    Ok(rows)
}
