/*!
What the FITS readers share: opening a file, listing its HDUs, reading
header keywords, deciding which HDUs hold spectra, and the streaming
iterator that reads them one object at a time.

**Panics.** The FITS library (fitsio 0.21) panics on a few malformed inputs
(an unknown BITPIX, a TFORM it cannot parse, a non-UTF-8 path). A user file
must never bring the program down, so every call into it runs inside
[`guard`], which turns a panic into [`LoadError::Malformed`]. This is the last
resort; types and shapes are checked before reading wherever possible.
*/
use super::fits_image::{self, ImagePlan};
use super::fits_scan::ColumnForm;
use super::fits_table::{self, TablePlan};
use super::{synonyms, LoadError, Loc, ReadOptions};
use crate::spectrum::Spectrum;
use fitsio::hdu::{FitsHdu, HduInfo};
use fitsio::tables::ConcreteColumnDescription;
use fitsio::threadsafe_fitsfile::ThreadsafeFitsFile;
use fitsio::FitsFile;
use std::collections::VecDeque;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};

/// Run `f`, turning a panic inside the FITS library into an error.
pub(crate) fn guard<T>(f: impl FnOnce() -> Result<T, LoadError>) -> Result<T, LoadError> {
    match catch_unwind(AssertUnwindSafe(f)) {
        Ok(r) => r,
        Err(payload) => {
            let msg = payload
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| payload.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_else(|| "unknown failure".into());
            Err(LoadError::Malformed(msg))
        }
    }
}

/// The shape of one HDU.
#[derive(Debug, Clone)]
pub(crate) enum HduKind {
    /// An image (shape in C order: slowest axis first; empty for NAXIS = 0).
    Image { shape: Vec<usize> },
    /// An HDU the FITS library cannot describe safely (variable-length or
    /// complex columns): never handed to it.
    Unsupported { reason: String },
    /// A binary or ASCII table.
    Table {
        cols: Vec<ConcreteColumnDescription>,
        nrows: usize,
    },
}

/// One HDU as listed when the file is opened.
#[derive(Debug, Clone)]
pub(crate) struct HduSummary {
    pub index: usize,
    pub name: Option<String>,
    pub kind: HduKind,
}

impl HduSummary {
    pub(crate) fn loc(&self) -> Loc {
        Loc::hdu(self.index, self.name.clone())
    }
}

/// Facts from the primary header that extensions inherit.
#[derive(Debug, Clone, Default)]
pub(crate) struct Primary {
    pub id: Option<String>,
    pub flux_unit: Option<String>,
    pub ra: Option<f64>,
    pub dec: Option<f64>,
    /// `AIRORVAC = 'air'` (a keyword some pipelines write; common practice).
    pub air: bool,
}

/// Header access on an open file.
pub(crate) fn key_string(f: &mut FitsFile, hdu: &FitsHdu, key: &str) -> Option<String> {
    hdu.read_key::<String>(f, key)
        .ok()
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
}

pub(crate) fn key_f64(f: &mut FitsFile, hdu: &FitsHdu, key: &str) -> Option<f64> {
    hdu.read_key::<f64>(f, key).ok().filter(|v| v.is_finite())
}

pub(crate) fn key_i64(f: &mut FitsFile, hdu: &FitsHdu, key: &str) -> Option<i64> {
    hdu.read_key::<i64>(f, key).ok()
}

/// Object id, flux unit, position and medium keywords of one header.
pub(crate) fn header_facts(f: &mut FitsFile, hdu: &FitsHdu) -> Primary {
    let id = synonyms::ID_KEYWORDS.iter().find_map(|k| key_string(f, hdu, k));
    let flux_unit = key_string(f, hdu, "BUNIT");
    let ra = synonyms::RA
        .iter()
        .find_map(|k| key_f64(f, hdu, &k.to_ascii_uppercase()));
    let dec = synonyms::DEC
        .iter()
        .find_map(|k| key_f64(f, hdu, &k.to_ascii_uppercase()));
    let air = key_string(f, hdu, "AIRORVAC").is_some_and(|v| v.eq_ignore_ascii_case("air"));
    Primary {
        id,
        flux_unit,
        ra,
        dec,
        air,
    }
}

/// An open FITS file with its HDU list.
pub(crate) struct OpenFits {
    pub file: ThreadsafeFitsFile,
    pub path: PathBuf,
    pub hdus: Vec<HduSummary>,
    pub primary: Primary,
    /// File stem, the fallback object id.
    pub stem: String,
    /// The error met when looking past the last readable HDU, if any.
    pub trailing: Option<LoadError>,
}

impl OpenFits {
    /// Map a library error; when the file's length is not a multiple of the
    /// 2880-byte FITS block (FITS standard 4.0, §3.1) call it truncated.
    pub(crate) fn err(&self, e: fitsio::errors::Error, at: Loc) -> LoadError {
        let e = LoadError::fits(e, at);
        if let LoadError::Fits { at, message } = &e {
            if is_short(&self.path) {
                return LoadError::truncated_at(at, message);
            }
        }
        e
    }
}

/// True for an uncompressed file whose length is not a whole number of FITS blocks.
fn is_short(path: &Path) -> bool {
    let gz = path.to_string_lossy().to_ascii_lowercase().ends_with(".gz");
    !gz && std::fs::metadata(path).is_ok_and(|m| m.len() % 2880 != 0)
}

/// Open a FITS file: its layout read and checked
/// ([`super::fits_scan::fits_layout`]) unless the caller has it already.
fn open_checked(
    path: &Path,
    checked: Option<Vec<super::fits_scan::HduLayout>>,
) -> Result<OpenFits, LoadError> {
    // The FITS library takes the name as UTF-8 text and gives `[`, `+` at the
    // end, `!` and `-` meanings of their own (cfitsio's extended file-name
    // syntax), so such names cannot be opened as they are.
    let Some(name) = path.to_str() else {
        return Err(LoadError::BadFileName(
            "the FITS library needs a UTF-8 file name".into(),
        ));
    };
    let base = path.file_name().and_then(|n| n.to_str()).unwrap_or(name);
    if name.contains('[') || base.starts_with('!') || base.starts_with('-') {
        return Err(LoadError::BadFileName(
            "the FITS library reads '[', a leading '!' or '-' in a file name as instructions; rename the file".into(),
        ));
    }
    // Every size the headers declare, checked against the real file before
    // the FITS library sizes anything by them.
    let layout = match checked {
        Some(l) => l,
        None => super::fits_scan::fits_layout(path)?,
    };
    let mut f = match FitsFile::open(path) {
        Ok(f) => f,
        Err(e) => {
            let e = LoadError::fits(e, Loc::default());
            return Err(match e {
                LoadError::Fits { message, .. } if is_short(path) => LoadError::Truncated(message),
                e => e,
            });
        }
    };
    let short = |e: fitsio::errors::Error, at: Loc| {
        let e = LoadError::fits(e, at);
        match e {
            LoadError::Fits { at, message } if is_short(path) => LoadError::truncated_at(&at, &message),
            e => e,
        }
    };
    let n = f.num_hdus().map_err(|e| short(e, Loc::default()))?;
    let mut hdus = Vec::with_capacity(n);
    let mut primary = Primary::default();
    for i in 0..n {
        let odd = layout.get(i).and_then(|l| {
            l.columns.iter().find_map(|(name, form)| match form {
                ColumnForm::VariableLength => Some(format!(
                    "column '{name}' is a variable-length array (TFORM P or Q), which zvet does not read"
                )),
                ColumnForm::Complex => Some(format!(
                    "column '{name}' holds complex numbers (TFORM C or M), which zvet does not read"
                )),
                ColumnForm::Fixed { .. } => None,
            })
        });
        if let Some(reason) = odd {
            let name = layout[i].extname.clone();
            hdus.push(HduSummary {
                index: i,
                name,
                kind: HduKind::Unsupported { reason },
            });
            continue;
        }
        let hdu = f.hdu(i).map_err(|e| short(e, Loc::hdu(i, None)))?;
        let name = key_string(&mut f, &hdu, "EXTNAME").filter(|n| n != "_PRIMARY");
        if i == 0 {
            primary = header_facts(&mut f, &hdu);
        }
        let kind = match &hdu.info {
            HduInfo::ImageInfo { shape, .. } => HduKind::Image { shape: shape.clone() },
            HduInfo::TableInfo {
                column_descriptions,
                num_rows,
            } => HduKind::Table {
                cols: column_descriptions.clone(),
                nrows: *num_rows,
            },
            HduInfo::AnyInfo => continue,
        };
        hdus.push(HduSummary { index: i, name, kind });
    }
    // cfitsio counts HDUs up to the first one it cannot read; probe the next
    // so that a damaged extension is reported rather than silently missed.
    let trailing = match f.hdu(n) {
        Err(fitsio::errors::Error::Fits(fe)) if fe.status != 107 => {
            Some(short(fitsio::errors::Error::Fits(fe), Loc::hdu(n, None)))
        }
        _ => None,
    };
    Ok(OpenFits {
        trailing,
        file: f.threadsafe(),
        path: path.to_path_buf(),
        hdus,
        primary,
        stem: super::file_stem(path),
    })
}

/// One thing to read from the file.
pub(crate) enum Source {
    /// A 1-D image (with its companion HDUs): one spectrum.
    Image(Box<ImagePlan>),
    /// A table with one pixel per row: one spectrum.
    PixelTable(Box<TablePlan>),
    /// A table with one object per row: `nrows` spectra.
    VectorTable(Box<TablePlan>),
    /// An HDU that should hold a spectrum but cannot be read.
    Failed(LoadError),
}

impl Source {
    /// Object id of a single-spectrum source.
    fn single_id(&self) -> Option<&str> {
        match self {
            Source::Image(p) => Some(&p.id),
            Source::PixelTable(p) => Some(&p.base.id),
            _ => None,
        }
    }

    fn single_loc(&self) -> Option<Loc> {
        match self {
            Source::Image(p) => Some(p.loc.clone()),
            Source::PixelTable(p) => Some(p.loc.clone()),
            _ => None,
        }
    }

    fn push_warning(&mut self, w: String) {
        match self {
            Source::Image(p) => p.warnings.push(w),
            Source::PixelTable(p) => p.base.warnings.push(w),
            _ => {}
        }
    }
}

/// Decide which HDUs hold spectra.
///
/// With `opts.hdu` only that HDU is read. Otherwise every 1-D image that is
/// not an uncertainty/mask/wavelength companion, and every table whose
/// columns name a wavelength and a flux, is a source. Several single-spectrum
/// HDUs with the *same* object id (e.g. a combined spectrum followed by its
/// single exposures) are one object: the first is read, the others are named
/// in a warning.
fn plan(fits: &OpenFits, opts: &ReadOptions) -> Result<Vec<Source>, LoadError> {
    let mut f = fits.file.lock().map_err(|e| LoadError::fits(e, Loc::default()))?;
    let f = &mut *f;
    if let Some(want) = opts.hdu {
        let Some(h) = fits.hdus.iter().find(|h| h.index == want) else {
            return Err(LoadError::BadHdu {
                at: Loc::hdu(want, None),
                reason: format!(
                    "no such HDU (the file has HDUs 0–{})",
                    fits.hdus.len().saturating_sub(1)
                ),
            });
        };
        let src = match &h.kind {
            HduKind::Image { .. } => fits_image::plan(f, fits, h, opts, true)?,
            HduKind::Table { .. } => fits_table::plan(f, fits, h, opts, true)?,
            HduKind::Unsupported { reason } => {
                return Err(LoadError::Unsupported {
                    at: h.loc(),
                    detail: reason.clone(),
                })
            }
        };
        return src.map(|s| vec![s]).ok_or_else(|| LoadError::BadHdu {
            at: h.loc(),
            reason: "this HDU holds no spectrum".into(),
        });
    }
    let mut sources = Vec::new();
    let mut table_misses = Vec::new();
    let mut unsupported = None;
    for h in &fits.hdus {
        let src = match &h.kind {
            HduKind::Image { .. } => fits_image::plan(f, fits, h, opts, false),
            HduKind::Table { .. } => fits_table::plan(f, fits, h, opts, false),
            HduKind::Unsupported { reason } => {
                unsupported.get_or_insert_with(|| LoadError::Unsupported {
                    at: h.loc(),
                    detail: reason.clone(),
                });
                continue;
            }
        };
        match src {
            Ok(Some(s)) => sources.push(s),
            Ok(None) => {
                if matches!(h.kind, HduKind::Table { .. }) {
                    table_misses.push(h);
                }
            }
            Err(e) => sources.push(Source::Failed(e)),
        }
    }
    if sources.is_empty() {
        // Say why: a damaged or cut-off extension, else a table that lacks a
        // column (the usual case), else what the file holds.
        if let Some(e) = &fits.trailing {
            return Err(match e {
                LoadError::Truncated(m) => LoadError::Truncated(m.clone()),
                LoadError::Fits { at, message } => LoadError::Fits {
                    at: at.clone(),
                    message: message.clone(),
                },
                other => LoadError::Malformed(other.to_string()),
            });
        }
        if is_short(&fits.path) {
            return Err(LoadError::Truncated(format!(
                "the file ends inside HDU {} (its length is not a whole number of 2880-byte FITS blocks)",
                fits.hdus.len()
            )));
        }
        if let Some(e) = unsupported {
            return Err(e);
        }
        if let Some(h) = table_misses.first() {
            if let Some(e) = fits_table::explain_miss(h, opts) {
                return Err(e);
            }
        }
        let list: Vec<String> = fits
            .hdus
            .iter()
            .map(|h| match &h.kind {
                HduKind::Image { shape } => format!("{}: image {:?}", h.loc(), shape),
                HduKind::Table { nrows, cols } => {
                    format!("{}: table {} rows × {} columns", h.loc(), nrows, cols.len())
                }
                HduKind::Unsupported { reason } => format!("{}: {reason}", h.loc()),
            })
            .collect();
        return Err(LoadError::NoSpectrum(format!(
            "no 1-D image with a spectral WCS (CTYPE1 a wavelength axis, CRVAL1, a pixel step) and no table with wavelength and flux columns ({})",
            list.join("; ")
        )));
    }
    // One object per id among single-spectrum HDUs.
    let mut kept: Vec<Source> = Vec::with_capacity(sources.len());
    let mut dropped: Vec<(usize, Loc)> = Vec::new();
    for s in sources {
        if let Some(id) = s.single_id() {
            if let Some(first) = kept.iter().position(|k| k.single_id() == Some(id)) {
                if let Some(loc) = s.single_loc() {
                    dropped.push((first, loc));
                }
                continue;
            }
        }
        kept.push(s);
    }
    for (i, s) in kept.iter_mut().enumerate() {
        let others: Vec<String> = dropped
            .iter()
            .filter(|(k, _)| *k == i)
            .map(|(_, l)| l.to_string())
            .collect();
        if !others.is_empty() {
            s.push_warning(format!(
                "{} more HDU(s) hold a spectrum of the same object and were not read ({}); choose one with --hdu",
                others.len(),
                others.join("; ")
            ));
        }
    }
    Ok(kept)
}

/// Open `path` and return the iterator over its objects.
pub(crate) fn open_stream(path: &Path, opts: &ReadOptions) -> Result<FitsStream, LoadError> {
    open_stream_checked(path, opts, None)
}

/// [`open_stream`] with the file's layout already read and checked.
pub(crate) fn open_stream_checked(
    path: &Path,
    opts: &ReadOptions,
    layout: Option<Vec<super::fits_scan::HduLayout>>,
) -> Result<FitsStream, LoadError> {
    let (fits, sources) = guard(|| {
        let fits = open_checked(path, layout)?;
        let sources = plan(&fits, opts)?;
        Ok((fits, sources))
    })?;
    Ok(FitsStream {
        fits,
        opts: opts.clone(),
        sources: sources.into(),
        current: None,
    })
}

impl FitsStream {
    /// Item `k` of the stream, read without moving the stream (random
    /// access for a file kept open).
    pub(crate) fn read_item(&self, mut k: usize) -> Result<Spectrum, LoadError> {
        let (fits, opts) = (&self.fits, &self.opts);
        for src in &self.sources {
            let n = match src {
                Source::VectorTable(p) => p.nrows,
                _ => 1,
            };
            if k >= n {
                k -= n;
                continue;
            }
            return guard(|| {
                let mut f = fits.file.lock().map_err(|e| LoadError::fits(e, Loc::default()))?;
                match src {
                    Source::Failed(e) => Err(LoadError::Malformed(e.to_string())),
                    Source::Image(p) => fits_image::read(&mut f, fits, p, opts),
                    Source::PixelTable(p) => fits_table::read_pixel_table(&mut f, fits, p, opts),
                    Source::VectorTable(p) => fits_table::read_row(&mut f, fits, p, k, opts),
                }
            });
        }
        Err(LoadError::Malformed(format!(
            "object {} is no longer in the file (the file changed since it was opened)",
            k + 1
        )))
    }

    /// The id of every item of the stream, in order, reading only the id
    /// columns of multi-object tables (an HDU that cannot be read gives its
    /// message, once per item it stands for).
    pub(crate) fn ids(&self) -> Vec<Result<String, String>> {
        let mut out = Vec::new();
        let path = self.fits.path.clone();
        for src in &self.sources {
            match src {
                Source::Failed(e) => out.push(Err(format!("{}: {e}", path.display()))),
                Source::Image(p) => out.push(Ok(p.id.clone())),
                Source::PixelTable(p) => out.push(Ok(p.base.id.clone())),
                Source::VectorTable(p) => {
                    let read = guard(|| {
                        let mut f = self
                            .fits
                            .file
                            .lock()
                            .map_err(|e| LoadError::fits(e, p.loc.clone()))?;
                        fits_table::read_ids(&mut f, &self.fits, p)
                    });
                    match read {
                        Ok(ids) => out.extend(ids.into_iter().map(Ok)),
                        Err(e) => {
                            let m = format!("{}: {e}", path.display());
                            out.extend((0..p.nrows).map(|_| Err(m.clone())));
                        }
                    }
                }
            }
        }
        out
    }
}

/// Iterator over the objects of a FITS file (see [`super::stream_file`]).
pub(crate) struct FitsStream {
    fits: OpenFits,
    opts: ReadOptions,
    sources: VecDeque<Source>,
    /// The vector table being read and its next row.
    current: Option<(Box<TablePlan>, usize)>,
}

impl Iterator for FitsStream {
    type Item = Result<Spectrum, LoadError>;

    fn nth(&mut self, mut n: usize) -> Option<Self::Item> {
        // skip `n` items without reading their pixels
        loop {
            if let Some((plan, row)) = &mut self.current {
                let left = plan.nrows - *row;
                if n < left {
                    *row += n;
                    return self.next();
                }
                n -= left;
                self.current = None;
            }
            if n == 0 {
                return self.next();
            }
            match self.sources.pop_front()? {
                Source::VectorTable(p) => self.current = Some((p, 0)),
                _ => n -= 1,
            }
        }
    }

    fn next(&mut self) -> Option<Self::Item> {
        loop {
            if let Some((plan, row)) = &mut self.current {
                if *row < plan.nrows {
                    let r = *row;
                    *row += 1;
                    let (fits, opts) = (&self.fits, &self.opts);
                    return Some(guard(|| {
                        let mut f = fits
                            .file
                            .lock()
                            .map_err(|e| LoadError::fits(e, plan.loc.clone()))?;
                        fits_table::read_row(&mut f, fits, plan, r, opts)
                    }));
                }
                self.current = None;
            }
            let src = self.sources.pop_front()?;
            let (fits, opts) = (&self.fits, &self.opts);
            let one = |read: &dyn Fn(&mut FitsFile) -> Result<Spectrum, LoadError>| {
                guard(|| {
                    let mut f = fits.file.lock().map_err(|e| LoadError::fits(e, Loc::default()))?;
                    read(&mut f)
                })
            };
            match src {
                Source::Failed(e) => return Some(Err(e)),
                Source::Image(p) => {
                    return Some(one(&|f| fits_image::read(f, fits, &p, opts)));
                }
                Source::PixelTable(p) => {
                    return Some(one(&|f| fits_table::read_pixel_table(f, fits, &p, opts)));
                }
                Source::VectorTable(p) => self.current = Some((p, 0)),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_panic_in_the_library_becomes_an_error() {
        let r: Result<(), LoadError> = guard(|| panic!("Unhandled image bitpix type: 7"));
        match r {
            Err(LoadError::Malformed(m)) => assert!(m.contains("bitpix")),
            other => panic!("expected Malformed, got {other:?}"),
        }
    }

    #[test]
    fn names_the_library_would_misread_are_refused() {
        for name in ["spec[1].fits", "-x.fits", "!x.fits"] {
            let e = open_checked(Path::new(name), None).err().expect("refused");
            assert!(matches!(e, LoadError::BadFileName(_)), "{name}: {e}");
        }
    }
}
