/*!
`zvet demo --write DIR`: the demo survey as files, so the command line can be
tried on it. Spectra go one FITS file per object (a binary table with columns
WAVE, FLUX, IVAR, MASK, SKY — vacuum Å, the demo flux unit, inverse variance,
nonzero = bad, the subtracted sky — and OBJID/RA/DEC in the header), the photometric catalogue
to `catalog.csv`, and the generator's truth to `truth.csv`.
*/
use fitsio::tables::{ColumnDataType, ColumnDescription};
use fitsio::FitsFile;
use std::path::{Path, PathBuf};

use super::DemoSurvey;
use crate::catalog::BANDS;

/// A failure while writing the demo files.
#[derive(Debug, thiserror::Error)]
pub enum DemoError {
    /// A file system error.
    #[error("{path}: {source}")]
    Io {
        /// The path.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// A FITS writing error.
    #[error("{path}: {message}")]
    Fits {
        /// The path.
        path: PathBuf,
        /// What cfitsio said.
        message: String,
    },
    /// A CSV writing error.
    #[error("{path}: {message}")]
    Csv {
        /// The path.
        path: PathBuf,
        /// What went wrong.
        message: String,
    },
}

impl From<std::io::Error> for DemoError {
    fn from(source: std::io::Error) -> Self {
        DemoError::Io {
            path: PathBuf::new(),
            source,
        }
    }
}

/// What was written.
#[derive(Debug, Clone, PartialEq)]
pub struct Written {
    /// Folder of the spectrum files.
    pub spectra: PathBuf,
    /// The catalogue.
    pub catalog: PathBuf,
    /// The truth table.
    pub truth: PathBuf,
    /// Number of objects.
    pub objects: usize,
    /// Number of spectrum files.
    pub files: usize,
}

/// Write the default demo survey into `dir`.
pub fn write(dir: &Path) -> Result<Written, DemoError> {
    write_survey(&super::generate(super::DEFAULT_SEED), dir)
}

/// Write `survey` into `dir` (created if needed; existing files replaced).
pub fn write_survey(survey: &DemoSurvey, dir: &Path) -> Result<Written, DemoError> {
    let spectra = dir.join("spectra");
    std::fs::create_dir_all(&spectra).map_err(|source| DemoError::Io {
        path: spectra.clone(),
        source,
    })?;
    for o in &survey.objects {
        let path = spectra.join(format!("{}.fits", o.id()));
        write_spectrum(&o.spectrum, &path).map_err(|e| DemoError::Fits {
            path: path.clone(),
            message: e.to_string(),
        })?;
    }
    let catalog = dir.join("catalog.csv");
    write_catalog(survey, &catalog).map_err(|message| DemoError::Csv {
        path: catalog.clone(),
        message,
    })?;
    let truth = dir.join("truth.csv");
    write_truth(survey, &truth).map_err(|message| DemoError::Csv {
        path: truth.clone(),
        message,
    })?;
    Ok(Written {
        spectra,
        catalog,
        truth,
        objects: survey.objects.len(),
        files: survey.objects.len(),
    })
}

fn write_spectrum(s: &crate::Spectrum, path: &Path) -> fitsio::errors::Result<()> {
    if path.exists() {
        std::fs::remove_file(path)?;
    }
    let mut f = FitsFile::create(path).open()?;
    let col = |name: &str, t: ColumnDataType| ColumnDescription::new(name).with_type(t).create();
    let mut cols = vec![
        col("WAVE", ColumnDataType::Double)?,
        col("FLUX", ColumnDataType::Double)?,
        col("IVAR", ColumnDataType::Double)?,
        col("MASK", ColumnDataType::Int)?,
    ];
    if s.sky().is_some() {
        cols.push(col("SKY", ColumnDataType::Double)?);
    }
    let hdu = f.create_table("SPECTRUM", &cols)?;
    if let Some(sky) = s.sky() {
        hdu.write_col(&mut f, "SKY", sky)?;
    }
    hdu.write_col(&mut f, "WAVE", s.wave())?;
    hdu.write_col(&mut f, "FLUX", s.flux())?;
    hdu.write_col(&mut f, "IVAR", s.ivar())?;
    let mask: Vec<i32> = s.good().iter().map(|g| i32::from(!*g)).collect();
    hdu.write_col(&mut f, "MASK", &mask)?;
    hdu.write_key(&mut f, "OBJID", s.meta.id.as_str())?;
    if let Some(ra) = s.meta.ra {
        hdu.write_key(&mut f, "RA", ra)?;
    }
    if let Some(dec) = s.meta.dec {
        hdu.write_key(&mut f, "DEC", dec)?;
    }
    if let Some(u) = &s.meta.flux_unit {
        hdu.write_key(&mut f, "BUNIT", u.as_str())?;
    }
    hdu.write_key(&mut f, "AIRORVAC", "vac")?;
    Ok(())
}

fn opt(v: Option<f64>, digits: usize) -> String {
    v.map_or(String::new(), |x| format!("{x:.digits$}"))
}

/// The header row of `catalog.csv`.
pub(super) fn catalog_header() -> Vec<String> {
    let mut header = vec!["id".to_string(), "ra".into(), "dec".into()];
    for b in BANDS {
        header.push(format!("mag_{b}"));
        header.push(format!("magerr_{b}"));
    }
    header.extend(["phot_class".into(), "phot_class_prob".into(), "phot_z".into()]);
    header
}

/// One row of `catalog.csv`.
pub(super) fn catalog_record(r: &crate::catalog::CatalogRow) -> Vec<String> {
    let mut rec = vec![r.id.clone(), opt(r.ra, 6), opt(r.dec, 6)];
    for b in 0..BANDS.len() {
        rec.push(opt(r.mag[b], 3));
        rec.push(opt(r.mag_err[b], 3));
    }
    rec.push(r.phot_class.map_or(String::new(), |c| c.as_str().to_string()));
    rec.push(opt(r.phot_class_prob, 3));
    rec.push(opt(r.phot_z, 3));
    rec
}

/// The header row of `truth.csv`.
pub(super) fn truth_header() -> Vec<String> {
    ["id", "class", "z", "kind", "phot_wrong", "note"]
        .map(String::from)
        .to_vec()
}

/// One row of `truth.csv`.
pub(super) fn truth_record(t: &super::DemoTruth) -> Vec<String> {
    vec![
        t.id.clone(),
        t.class.map_or("", |c| c.as_str()).to_string(),
        format!("{:.6}", t.z),
        t.kind.as_str().to_string(),
        if t.phot_wrong { "1" } else { "0" }.to_string(),
        t.note.clone(),
    ]
}

fn write_catalog(survey: &DemoSurvey, path: &Path) -> Result<(), String> {
    let mut w = csv::Writer::from_path(path).map_err(|e| e.to_string())?;
    w.write_record(catalog_header()).map_err(|e| e.to_string())?;
    for o in &survey.objects {
        let Some(r) = &o.catalog else { continue };
        w.write_record(catalog_record(r)).map_err(|e| e.to_string())?;
    }
    w.flush().map_err(|e| e.to_string())
}

fn write_truth(survey: &DemoSurvey, path: &Path) -> Result<(), String> {
    let mut w = csv::Writer::from_path(path).map_err(|e| e.to_string())?;
    w.write_record(truth_header()).map_err(|e| e.to_string())?;
    for t in &survey.truth {
        w.write_record(truth_record(t)).map_err(|e| e.to_string())?;
    }
    w.flush().map_err(|e| e.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::{read_file, ReadOptions};

    #[test]
    fn written_survey_reads_back_through_the_readers() {
        let survey = crate::demo::generate_n(11, 4);
        let dir = tempfile::tempdir().unwrap();
        let w = write_survey(&survey, dir.path()).unwrap();
        assert_eq!(w.objects, 4);
        for o in &survey.objects {
            let path = w.spectra.join(format!("{}.fits", o.id()));
            let back = read_file(&path, &ReadOptions::default()).unwrap();
            assert_eq!(back.len(), 1);
            let b = &back[0];
            assert_eq!(b.meta.id, o.id());
            assert_eq!(b.wave(), o.spectrum.wave());
            assert_eq!(b.flux(), o.spectrum.flux());
            assert_eq!(b.good(), o.spectrum.good());
            assert_eq!(b.meta.ra, o.spectrum.meta.ra);
        }
        let rows = crate::catalog::read_csv(&w.catalog, &crate::catalog::ColumnMap::default()).unwrap();
        assert_eq!(rows.len(), 4);
        for (r, o) in rows.iter().zip(&survey.objects) {
            let c = o.catalog.as_ref().unwrap();
            assert_eq!(r.id, c.id);
            assert_eq!(r.phot_class, c.phot_class);
            for b in 0..5 {
                match (r.mag[b], c.mag[b]) {
                    (Some(x), Some(y)) => assert!((x - y).abs() < 6e-4),
                    (x, y) => assert_eq!(x.is_some(), y.is_some()),
                }
            }
        }
        assert!(std::fs::read_to_string(&w.truth).unwrap().lines().count() == 5);
    }
}
