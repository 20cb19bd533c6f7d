/*!
The catalogue as a FITS binary table (extension `ZVET_CATALOG`): text columns
as fixed-width ASCII strings (`nA`), floats as `D` with NaN for missing
values, small integers as `I` with `TNULLn = 0`; units in `TUNITn` (deg, mag);
provenance as header keywords of the table.

FITS strings are ASCII (FITS standard 4.0, §7.3.3.1: characters 0x20–0x7E),
so any other character of a note or id is written as `\u{hex}` and a
backslash as `\\`; [`read_fits`] undoes this.
*/
use super::columns::{Cell, Kind, COLUMNS};
use super::{ExportError, ExportRow, Provenance};
use crate::campaign::{atomic_create, EngineSettings};
use crate::review::{Confidence, Flag};
use crate::ObjectClass;
use fitsio::tables::{ColumnDataType, ColumnDescription};
use fitsio::FitsFile;
use std::path::Path;

/// Name of the table extension.
pub const FITS_EXTNAME: &str = "ZVET_CATALOG";

/// Escape text to printable ASCII.
pub fn to_ascii(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '\\' => out.push_str("\\\\"),
            ' '..='~' => out.push(c),
            _ => out.push_str(&format!("\\u{{{:x}}}", c as u32)),
        }
    }
    out
}

/// Undo [`to_ascii`] (unknown escapes are kept as they are).
pub fn from_ascii(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    let mut rest = s;
    while let Some(pos) = rest.find('\\') {
        out.push_str(&rest[..pos]);
        let tail = &rest[pos..];
        if let Some(t) = tail.strip_prefix("\\\\") {
            out.push('\\');
            rest = t;
            continue;
        }
        let decoded = tail.strip_prefix("\\u{").and_then(|t| {
            let end = t.find('}')?;
            let c = char::from_u32(u32::from_str_radix(&t[..end], 16).ok()?)?;
            Some((c, &t[end + 1..]))
        });
        match decoded {
            Some((c, t)) => {
                out.push(c);
                rest = t;
            }
            None => {
                out.push('\\');
                rest = &tail[1..];
            }
        }
    }
    out.push_str(rest);
    out
}

fn fits_err(path: &Path) -> impl Fn(fitsio::errors::Error) -> ExportError + '_ {
    move |e| ExportError::Fits {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

/// Write the catalogue as a FITS binary table through the one atomic output
/// path (every write and the close checked; on failure the old file stays).
pub fn write_fits(path: &Path, rows: &[ExportRow], prov: &Provenance) -> Result<(), ExportError> {
    let cells: Vec<Vec<Cell>> = rows.iter().map(|r| r.cells()).collect();
    // Column-major data.
    let strings = |j: usize| -> Vec<String> {
        cells
            .iter()
            .map(|r| match &r[j] {
                Cell::Str(s) => to_ascii(s),
                _ => String::new(),
            })
            .collect()
    };
    let mut descs = Vec::new();
    for (j, c) in COLUMNS.iter().enumerate() {
        let mut d = ColumnDescription::new(c.name);
        match c.kind() {
            Kind::Str => {
                let width = strings(j).iter().map(|s| s.len()).max().unwrap_or(0).max(1);
                d.with_type(ColumnDataType::String).that_repeats(width);
            }
            Kind::F64 => {
                d.with_type(ColumnDataType::Double);
            }
            Kind::I16 => {
                d.with_type(ColumnDataType::Short);
            }
        }
        descs.push(d.create().map_err(fits_err(path))?);
    }
    let written = atomic_create(path, ".fits", |tmp: &Path| {
        let fe = |e| Step::Export(fits_err(path)(e));
        let mut f = FitsFile::create(tmp).open().map_err(&fe)?;
        let hdu = f.create_table(FITS_EXTNAME, &descs).map_err(&fe)?;
        for (j, c) in COLUMNS.iter().enumerate() {
            match c.kind() {
                Kind::Str => {
                    hdu.write_col(&mut f, c.name, &strings(j)).map_err(&fe)?;
                }
                Kind::F64 => {
                    let v: Vec<f64> = cells
                        .iter()
                        .map(|r| match r[j] {
                            Cell::F64(x) => x.unwrap_or(f64::NAN),
                            _ => f64::NAN,
                        })
                        .collect();
                    hdu.write_col(&mut f, c.name, &v).map_err(&fe)?;
                }
                Kind::I16 => {
                    let v: Vec<i16> = cells
                        .iter()
                        .map(|r| match r[j] {
                            Cell::I16(x) => x.unwrap_or(0),
                            _ => 0,
                        })
                        .collect();
                    hdu.write_col(&mut f, c.name, &v).map_err(&fe)?;
                    hdu.write_key(&mut f, &format!("TNULL{}", j + 1), 0i64)
                        .map_err(&fe)?;
                }
            }
            if let Some(u) = c.unit {
                hdu.write_key(&mut f, &format!("TUNIT{}", j + 1), u)
                    .map_err(&fe)?;
            }
        }
        let e = &prov.engine;
        let classes: Vec<&str> = e.classes.iter().map(|c| c.as_str()).collect();
        let flags: Vec<&str> = prov.exclude_flags.iter().map(|f| f.as_str()).collect();
        let date = prov.date.format("%Y-%m-%dT%H:%M:%S").to_string();
        let str_keys: [(&str, String, &str); 9] = [
            (
                "CREATOR",
                format!("zvet {}", prov.zvet_version),
                "program that wrote the file",
            ),
            ("ZVETVER", prov.zvet_version.clone(), "zvet version"),
            ("DATE", date, "UTC date the file was written"),
            ("CAMPAIGN", to_ascii(&prov.campaign), "campaign name"),
            ("TEMPLSET", to_ascii(&prov.template_set), "template set"),
            ("ZMETHOD", e.method.as_str().to_string(), "redshift engine method"),
            ("ZCLASSES", classes.join(","), "classes fitted"),
            (
                "MINCONF",
                prov.min_confidence.map_or("none".into(), |c| c.as_str().into()),
                "lowest confidence kept",
            ),
            ("EXCLFLAG", flags.join(","), "flags excluded"),
        ];
        for (k, v, comment) in str_keys {
            hdu.write_key(&mut f, k, (v.as_str(), comment)).map_err(&fe)?;
        }
        let f64_keys: [(&str, f64, &str); 9] = [
            ("DLOGLAM", e.dloglam, "log10 wavelength step of the fit grid"),
            ("ZGALMIN", e.z_galaxy.0, "galaxy redshift range, low"),
            ("ZGALMAX", e.z_galaxy.1, "galaxy redshift range, high"),
            ("ZQSOMIN", e.z_quasar.0, "quasar redshift range, low"),
            ("ZQSOMAX", e.z_quasar.1, "quasar redshift range, high"),
            ("ZSTARMIN", e.z_star.0, "star redshift range, low"),
            ("ZSTARMAX", e.z_star.1, "star redshift range, high"),
            ("ZTOL", prov.tolerance, "merge tolerance on |dz|/(1+z)"),
            (
                "SYSFLOOR",
                e.sys_floor,
                "systematic error floor, fraction of flux",
            ),
        ];
        for (k, v, comment) in f64_keys {
            hdu.write_key(&mut f, k, (v, comment)).map_err(&fe)?;
        }
        hdu.write_key(
            &mut f,
            "MINSEPKM",
            (e.min_separation_kms, "candidate separation, km/s"),
        )
        .map_err(&fe)?;
        hdu.write_key(
            &mut f,
            "NPOLY",
            (e.poly_terms as i64, "continuum polynomial terms"),
        )
        .map_err(&fe)?;
        hdu.write_key(&mut f, "NCAND", (e.n_candidates as i64, "candidates per class"))
            .map_err(&fe)?;
        hdu.write_key(
            &mut f,
            "MASKSKY",
            (i64::from(e.mask_sky), "sky lines masked (1/0)"),
        )
        .map_err(&fe)?;
        hdu.write_key(
            &mut f,
            "NONNEG",
            (i64::from(e.nonnegative), "template amplitudes >= 0 (1/0)"),
        )
        .map_err(&fe)?;
        hdu.write_key(
            &mut f,
            "STARWIN",
            (
                i64::from(e.star_window_prefers_stars),
                "stars first below 800 km/s (1/0)",
            ),
        )
        .map_err(&fe)?;
        hdu.write_key(
            &mut f,
            "TPUTTERM",
            (
                i64::from(e.throughput_terms),
                "template x throughput-tilt terms (1/0)",
            ),
        )
        .map_err(&fe)?;
        hdu.write_key(
            &mut f,
            "STARTPUT",
            (
                i64::from(e.star_throughput_terms),
                "star template x throughput-tilt term (1/0)",
            ),
        )
        .map_err(&fe)?;
        hdu.write_key(
            &mut f,
            "TELLFLR",
            (i64::from(e.telluric_floor), "telluric-band error floor (1/0)"),
        )
        .map_err(&fe)?;
        hdu.write_key(
            &mut f,
            "STARBIC",
            (
                i64::from(e.stars_priced_by_bic),
                "stars first within the BIC price (1/0)",
            ),
        )
        .map_err(&fe)?;
        // What the library's close wrote is checked too.
        crate::campaign::close_fits(f, rows.len()).map_err(Step::Io)
    });
    written.map_err(|e| match e {
        Step::Io(source) => ExportError::Io {
            path: path.to_path_buf(),
            source,
        },
        Step::Export(e) => e,
    })
}

/// Errors inside the atomic write: its own I/O, or the FITS library's.
enum Step {
    Io(std::io::Error),
    Export(ExportError),
}

impl From<std::io::Error> for Step {
    fn from(e: std::io::Error) -> Self {
        Step::Io(e)
    }
}

/// Read a catalogue written by [`write_fits`].
pub fn read_fits(path: &Path) -> Result<(Vec<ExportRow>, Provenance), ExportError> {
    let fe = fits_err(path);
    // Sizes the headers declare are checked before the library allocates by them.
    crate::io::fits_layout(path).map_err(|e| ExportError::Fits {
        path: path.to_path_buf(),
        message: e.to_string(),
    })?;
    let mut f = FitsFile::open(path).map_err(&fe)?;
    let hdu = f.hdu(FITS_EXTNAME).map_err(&fe)?;
    let mut columns: Vec<Vec<Cell>> = Vec::new();
    for c in COLUMNS.iter() {
        let col: Vec<Cell> = match c.kind() {
            Kind::Str => hdu
                .read_col::<String>(&mut f, c.name)
                .map_err(&fe)?
                .into_iter()
                .map(|s| Cell::Str(from_ascii(s.trim_end())))
                .collect(),
            Kind::F64 => hdu
                .read_col::<f64>(&mut f, c.name)
                .map_err(&fe)?
                .into_iter()
                .map(|x| Cell::F64(x.is_finite().then_some(x)))
                .collect(),
            Kind::I16 => hdu
                .read_col::<i16>(&mut f, c.name)
                .map_err(&fe)?
                .into_iter()
                .map(|x| Cell::I16((x != 0).then_some(x)))
                .collect(),
        };
        columns.push(col);
    }
    let n = columns.first().map_or(0, Vec::len);
    let mut rows = Vec::with_capacity(n);
    for i in 0..n {
        let cells = COLUMNS.iter().zip(&columns).map(|(c, v)| (c.name, v[i].clone()));
        rows.push(
            ExportRow::from_named(cells)
                .map_err(|e| ExportError::Format(format!("{} row {}: {e}", path.display(), i + 1)))?,
        );
    }
    let s = |f: &mut FitsFile, k: &str| hdu.read_key::<String>(f, k).map_err(&fe);
    let x = |f: &mut FitsFile, k: &str| hdu.read_key::<f64>(f, k).map_err(&fe);
    let i = |f: &mut FitsFile, k: &str| hdu.read_key::<i64>(f, k).map_err(&fe);
    let word = |w: &str| format!("\"{w}\"");
    let engine = EngineSettings {
        dloglam: x(&mut f, "DLOGLAM")?,
        classes: s(&mut f, "ZCLASSES")?
            .split(',')
            .filter(|c| !c.is_empty())
            .map(|c| {
                c.parse::<ObjectClass>()
                    .map_err(|e| ExportError::Format(e.to_string()))
            })
            .collect::<Result<_, _>>()?,
        z_galaxy: (x(&mut f, "ZGALMIN")?, x(&mut f, "ZGALMAX")?),
        z_quasar: (x(&mut f, "ZQSOMIN")?, x(&mut f, "ZQSOMAX")?),
        z_star: (x(&mut f, "ZSTARMIN")?, x(&mut f, "ZSTARMAX")?),
        poly_terms: i(&mut f, "NPOLY")?.max(0) as usize,
        n_candidates: i(&mut f, "NCAND")?.max(0) as usize,
        min_separation_kms: x(&mut f, "MINSEPKM")?,
        mask_sky: i(&mut f, "MASKSKY")? != 0,
        nonnegative: i(&mut f, "NONNEG")? != 0,
        method: s(&mut f, "ZMETHOD")?.parse().map_err(ExportError::Format)?,
        sys_floor: x(&mut f, "SYSFLOOR")?,
        star_window_prefers_stars: i(&mut f, "STARWIN")? != 0,
        throughput_terms: i(&mut f, "TPUTTERM")? != 0,
        // exports written before the keyword existed were fitted without it
        star_throughput_terms: hdu.read_key::<i64>(&mut f, "STARTPUT").is_ok_and(|v| v != 0),
        // the same for the telluric floor
        telluric_floor: hdu.read_key::<i64>(&mut f, "TELLFLR").is_ok_and(|v| v != 0),
        // and for the star preference at every redshift
        stars_priced_by_bic: hdu.read_key::<i64>(&mut f, "STARBIC").is_ok_and(|v| v != 0),
    };
    let minconf = s(&mut f, "MINCONF")?;
    let min_confidence = match minconf.as_str() {
        "none" | "" => None,
        w => Some(
            serde_json::from_str::<Confidence>(&word(w))
                .map_err(|_| ExportError::Format(format!("MINCONF: unknown level {w}")))?,
        ),
    };
    let exclude_flags = s(&mut f, "EXCLFLAG")?
        .split(',')
        .filter(|w| !w.is_empty())
        .map(|w| {
            serde_json::from_str::<Flag>(&word(w))
                .map_err(|_| ExportError::Format(format!("EXCLFLAG: unknown flag {w}")))
        })
        .collect::<Result<_, _>>()?;
    let date_text = s(&mut f, "DATE")?;
    let date = chrono::NaiveDateTime::parse_from_str(&date_text, "%Y-%m-%dT%H:%M:%S")
        .map_err(|e| ExportError::Format(format!("DATE '{date_text}': {e}")))?
        .and_utc();
    let prov = Provenance {
        zvet_version: s(&mut f, "ZVETVER")?,
        campaign: from_ascii(&s(&mut f, "CAMPAIGN")?),
        template_set: from_ascii(&s(&mut f, "TEMPLSET")?),
        engine,
        date,
        tolerance: x(&mut f, "ZTOL")?,
        min_confidence,
        exclude_flags,
    };
    Ok((rows, prov))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ascii_escape_round_trips() {
        for s in ["plain", "Hα and [O III] λ5008", "back\\slash \\u{41}", "", "日本"] {
            let a = to_ascii(s);
            assert!(a.bytes().all(|b| (0x20..=0x7e).contains(&b)), "{a}");
            assert_eq!(from_ascii(&a), s);
        }
    }
}
