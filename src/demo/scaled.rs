/*!
`zvet demo --write DIR --objects N` for any N (10⁶ and more): the demo
survey written as it is generated, so memory does not grow with N.

- Spectra go into multi-object FITS binary tables of `chunk` objects each,
  `spectra/demo-00001.fits`, `demo-00002.fits`, …: one row per object, with
  vector columns WAVE, FLUX, IVAR, SKY (single precision, vacuum Å and the
  demo flux unit) and MASK (16-bit, nonzero = bad), and the scalar columns
  OBJID, RA, DEC. Each chunk is written into a temporary file and renamed
  into place when whole ([`crate::io::atomic::atomic_create`]), so a stopped
  run never leaves a torn table.
- `catalog.csv` and `truth.csv` are written row by row.
- Objects are generated in batches of [`BATCH`] in parallel; only a batch of
  spectra is ever in memory (about 64 × 130 KB), plus the ids, positions
  of the chunk in hand.

Object k is the same as object k of [`super::generate_n`] (same seed, same
cast, same random stream), whatever N; ids are `TERN-0001` … `TERN-1000000`.
*/
use fitsio::tables::{ColumnDataType, ColumnDescription};
use fitsio::FitsFile;
use rayon::prelude::*;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};

use super::write::{catalog_header, catalog_record, truth_header, truth_record};
use super::{build, plan, synth, DemoError, Written};

/// Objects per spectrum file unless told otherwise.
pub const DEFAULT_CHUNK: usize = 1000;

/// Objects generated at once (in parallel) before they are written.
pub const BATCH: usize = 64;

/// EXTNAME of the table HDU of a chunk file.
pub const SPECTRA_EXTNAME: &str = "SPECTRA";

/// What [`write_scaled`] writes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ScaleOptions {
    /// Generator seed.
    pub seed: u64,
    /// Number of objects.
    pub objects: usize,
    /// Objects per spectrum file (at least 1).
    pub chunk: usize,
}

impl Default for ScaleOptions {
    fn default() -> Self {
        ScaleOptions {
            seed: super::DEFAULT_SEED,
            objects: plan::full_size(),
            chunk: DEFAULT_CHUNK,
        }
    }
}

fn io(path: &Path) -> impl Fn(std::io::Error) -> DemoError + '_ {
    move |source| DemoError::Io {
        path: path.to_path_buf(),
        source,
    }
}

fn csv_err(path: &Path) -> impl Fn(csv::Error) -> DemoError + '_ {
    move |e| DemoError::Csv {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

/// A CSV table written row by row into `NAME.partial`, renamed into place
/// when finished.
struct CsvOut {
    path: PathBuf,
    partial: PathBuf,
    w: csv::Writer<std::io::BufWriter<std::fs::File>>,
}

impl CsvOut {
    fn create(path: PathBuf) -> Result<CsvOut, DemoError> {
        let mut partial = path.clone().into_os_string();
        partial.push(".partial");
        let partial = PathBuf::from(partial);
        let f = std::fs::File::create(&partial).map_err(io(&partial))?;
        Ok(CsvOut {
            path,
            w: csv::Writer::from_writer(std::io::BufWriter::new(f)),
            partial,
        })
    }

    fn row(&mut self, rec: &[String]) -> Result<(), DemoError> {
        self.w.write_record(rec).map_err(csv_err(&self.partial))
    }

    fn finish(self) -> Result<(), DemoError> {
        let CsvOut { path, partial, w } = self;
        let buf = w.into_inner().map_err(|e| DemoError::Csv {
            path: partial.clone(),
            message: e.to_string(),
        })?;
        let f = buf.into_inner().map_err(|e| io(&partial)(e.into_error()))?;
        f.sync_all().map_err(io(&partial))?;
        drop(f);
        crate::io::atomic::commit_partial(&partial, &path).map_err(io(&path))
    }
}

/// The table of one chunk file: columns and the rows written so far.
struct Chunk {
    file: FitsFile,
    hdu: fitsio::hdu::FitsHdu,
    ids: Vec<String>,
    ra: Vec<f64>,
    dec: Vec<f64>,
}

fn fits_err(path: &Path) -> impl Fn(fitsio::errors::Error) -> DemoError + '_ {
    move |e| DemoError::Fits {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

impl Chunk {
    fn create(tmp: &Path, id_width: usize) -> Result<Chunk, fitsio::errors::Error> {
        let vec_col = |name: &str, t: ColumnDataType| {
            ColumnDescription::new(name)
                .with_type(t)
                .that_repeats(synth::N_PIX)
                .create()
        };
        let cols = vec![
            ColumnDescription::new("OBJID")
                .with_type(ColumnDataType::String)
                .that_repeats(id_width)
                .create()?,
            ColumnDescription::new("RA")
                .with_type(ColumnDataType::Double)
                .create()?,
            ColumnDescription::new("DEC")
                .with_type(ColumnDataType::Double)
                .create()?,
            vec_col("WAVE", ColumnDataType::Float)?,
            vec_col("FLUX", ColumnDataType::Float)?,
            vec_col("IVAR", ColumnDataType::Float)?,
            vec_col("MASK", ColumnDataType::Short)?,
            vec_col("SKY", ColumnDataType::Float)?,
        ];
        let mut file = FitsFile::create(tmp).open()?;
        let hdu = file.create_table(SPECTRA_EXTNAME, &cols)?;
        Ok(Chunk {
            file,
            hdu,
            ids: Vec::new(),
            ra: Vec::new(),
            dec: Vec::new(),
        })
    }

    /// Append one object as the next row.
    fn push(&mut self, s: &crate::Spectrum) -> Result<(), fitsio::errors::Error> {
        let row = self.ids.len();
        let n = s.len();
        // cfitsio writes `n` elements from element 1 of row `row`: a vector
        // column of length n is filled for that row exactly (the range's
        // length is the element count, not a row count).
        let span = row..row + n;
        let f32s = |x: &[f64]| x.iter().map(|&v| v as f32).collect::<Vec<f32>>();
        let (file, hdu) = (&mut self.file, &self.hdu);
        hdu.write_col_range(file, "WAVE", &f32s(s.wave()), &span)?;
        hdu.write_col_range(file, "FLUX", &f32s(s.flux()), &span)?;
        hdu.write_col_range(file, "IVAR", &f32s(s.ivar()), &span)?;
        let mask: Vec<i16> = s.good().iter().map(|g| i16::from(!*g)).collect();
        hdu.write_col_range(file, "MASK", &mask, &span)?;
        let sky = s.sky().map_or_else(|| vec![0f32; n], f32s);
        hdu.write_col_range(file, "SKY", &sky, &span)?;
        self.ids.push(s.meta.id.clone());
        self.ra.push(s.meta.ra.unwrap_or(f64::NAN));
        self.dec.push(s.meta.dec.unwrap_or(f64::NAN));
        Ok(())
    }

    /// Write the scalar columns and the header, close and check the file.
    fn finish(self) -> Result<(), fitsio::errors::Error> {
        let Chunk {
            mut file,
            hdu,
            ids,
            ra,
            dec,
        } = self;
        hdu.write_col(&mut file, "OBJID", &ids)?;
        hdu.write_col(&mut file, "RA", &ra)?;
        hdu.write_col(&mut file, "DEC", &dec)?;
        hdu.write_key(&mut file, "BUNIT", "1e-17 erg/s/cm2/Angstrom")?;
        hdu.write_key(&mut file, "AIRORVAC", "vac")?;
        hdu.write_key(&mut file, "ORIGIN", "zvet demo (invented survey)")?;
        let rows = ids.len();
        crate::campaign::close_fits(file, rows).map_err(|e| fitsio::errors::Error::Message(e.to_string()))
    }
}

/// Name of chunk file `k` (from 1).
pub fn chunk_name(k: usize) -> String {
    format!("demo-{k:05}.fits")
}

/// Write the first `opts.objects` objects of the demo survey into `dir`
/// (see the module documentation): spectra in chunk files, catalogue and
/// truth row by row. `progress` is told how many objects are written after
/// each batch; when `cancel` is set the run stops after the batch in hand,
/// keeps the chunk files already complete and returns an error (the
/// catalogue and truth are not left half-written under their names).
pub fn write_scaled(
    dir: &Path,
    opts: &ScaleOptions,
    progress: &mut dyn FnMut(usize),
    cancel: Option<&AtomicBool>,
) -> Result<Written, DemoError> {
    let chunk = opts.chunk.max(1);
    let spectra = dir.join("spectra");
    std::fs::create_dir_all(&spectra).map_err(io(&spectra))?;
    let catalog = dir.join("catalog.csv");
    let truth = dir.join("truth.csv");
    let mut cat = CsvOut::create(catalog.clone())?;
    cat.row(&catalog_header())?;
    let mut tru = CsvOut::create(truth.clone())?;
    tru.row(&truth_header())?;
    let wave = synth::wave_grid();
    let sky = synth::sky_profile(&wave);
    let id_width = format!("TERN-{:04}", opts.objects.max(1)).len();
    let mut cast = plan::cast(opts.seed).take(opts.objects).peekable();
    let mut done = 0usize;
    let mut files = 0usize;
    while cast.peek().is_some() {
        files += 1;
        let path = spectra.join(chunk_name(files));
        let fe = fits_err(&path);
        let mut in_chunk = 0usize;
        crate::io::atomic::atomic_create(&path, ".fits", |tmp: &Path| -> Result<(), DemoError> {
            let mut table = Chunk::create(tmp, id_width).map_err(&fe)?;
            while in_chunk < chunk {
                let batch: Vec<_> = cast.by_ref().take(BATCH.min(chunk - in_chunk)).collect();
                if batch.is_empty() {
                    break;
                }
                let made: Vec<_> = batch
                    .par_iter()
                    .map(|&(i, kind, ordinal)| {
                        let mut rng = plan::object_rng(opts.seed, i);
                        build::object(i, kind, ordinal, &wave, &sky, &mut rng)
                    })
                    .collect();
                for (o, t) in &made {
                    table.push(&o.spectrum).map_err(&fe)?;
                    if let Some(r) = &o.catalog {
                        cat.row(&catalog_record(r))?;
                    }
                    tru.row(&truth_record(t))?;
                }
                in_chunk += made.len();
                done += made.len();
                progress(done);
                if cancel.is_some_and(|c| c.load(Ordering::Relaxed)) {
                    break;
                }
            }
            table.finish().map_err(&fe)
        })?;
        if cancel.is_some_and(|c| c.load(Ordering::Relaxed)) && done < opts.objects {
            return Err(DemoError::Io {
                path: dir.to_path_buf(),
                source: std::io::Error::new(
                    std::io::ErrorKind::Interrupted,
                    format!(
                        "stopped after {done} of {} objects ({files} complete spectrum file(s) kept; \
                         catalog.csv.partial and truth.csv.partial hold their rows)",
                        opts.objects
                    ),
                ),
            });
        }
    }
    cat.finish()?;
    tru.finish()?;
    Ok(Written {
        spectra,
        catalog,
        truth,
        objects: done,
        files,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::ReadOptions;

    #[test]
    fn chunks_read_back_as_the_generated_objects() {
        let dir = tempfile::tempdir().unwrap();
        let opts = ScaleOptions {
            seed: 11,
            objects: 7,
            chunk: 3,
        };
        let mut seen = Vec::new();
        let w = write_scaled(dir.path(), &opts, &mut |n| seen.push(n), None).unwrap();
        assert_eq!((w.objects, w.files), (7, 3));
        assert_eq!(seen.last(), Some(&7));
        let survey = crate::demo::generate_n(11, 7);
        let files: Vec<PathBuf> = (1..=3).map(|k| w.spectra.join(chunk_name(k))).collect();
        let back: Vec<crate::Spectrum> = crate::pipeline::stream(files, ReadOptions::default())
            .map(|r| r.unwrap())
            .collect();
        assert_eq!(back.len(), 7);
        for (b, o) in back.iter().zip(&survey.objects) {
            assert_eq!(b.meta.id, o.id());
            assert_eq!(b.good(), o.spectrum.good());
            assert_eq!(b.meta.ra, o.spectrum.meta.ra);
            // single precision on disk: 2⁻²⁴ relative (IEEE 754 binary32)
            for (x, y) in b.wave().iter().zip(o.spectrum.wave()) {
                assert!((x - y).abs() <= 1e-6 * y.abs(), "{x} {y}");
            }
            for (x, y) in b.flux().iter().zip(o.spectrum.flux()) {
                assert!((x - y).abs() <= 1e-6 * y.abs() + 1e-30, "{x} {y}");
            }
        }
        let rows = crate::catalog::read_csv(&w.catalog, &crate::catalog::ColumnMap::default()).unwrap();
        assert_eq!(rows.len(), 7);
        assert_eq!(std::fs::read_to_string(&w.truth).unwrap().lines().count(), 8);
    }
}
