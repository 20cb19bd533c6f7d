/*!
Multi-object frames: one 2-D FITS image with one spectrum per row (a fibre or
a slit; NAXIS1 = pixels, NAXIS2 = rows) and a binary table with one row per
image row that says what each row is — the usual delivery of multi-object
spectrographs.

What is recognised:
- **flux**: the first 2-D image (≥ 2 rows) that is not a companion by EXTNAME
  and not a stack of bands named by `BANDIDn` (those are one spectrum, see
  `fits_image`);
- **row table**: the first binary/ASCII table with as many rows as the image
  that has an object-id column ([`super::synonyms::ID`]) or a use column
  ([`USE_COLUMNS`]) and is not itself a spectrum table; table row k describes
  image row k. Its use column says `target` (also object, science), `sky` or
  `unused` (also empty, broken, parked, …; [`RowUse::parse`]); sky and unused
  rows are skipped. Without a use column, rows with an empty id are unused;
- **companions**: 2-D images of the same shape named like inverse variance,
  uncertainty, variance, mask or wavelength (the synonym lists of
  [`super::synonyms`]);
- **wavelengths**, first found of: a 2-D wavelength image (`WAVE`, unit in
  BUNIT/CUNIT1); the row's own WCS in table columns `CRVAL1` and `CDELT1` or
  `CD1_1` (`CRPIX1` optional, default 1), with `CTYPE1`/`CUNIT1` from the
  image header; one WCS in the image header for every row. The WCS follows
  the FITS WCS standard, Paper III (Greisen et al. 2006, A&A 446, 747):
  linear `WAVE`/`AWAV`, `WAVE-LOG`/`AWAV-LOG` (eq. 5), plus `DC-FLAG = 1`
  (log10 λ linear in pixels, a convention of long-slit reduction packages).

Rows are read one at a time (a section of each image), so memory stays
bounded by one row whatever the size of the frame.
*/
use super::fits_common::{guard, key_f64, key_i64, key_string};
use super::{synonyms, unit_to_angstrom, ErrKind, LoadError, Loc, RawSpectrum, ReadOptions, WaveScale};
use crate::spectrum::{Spectrum, SpectrumMeta};
use fitsio::hdu::HduInfo;
use fitsio::tables::{ColumnDataType, ConcreteColumnDescription};
use fitsio::threadsafe_fitsfile::ThreadsafeFitsFile;
use fitsio::FitsFile;
use std::fmt;
use std::path::{Path, PathBuf};

/// Column names (case-insensitive) that say what a row is used for.
pub const USE_COLUMNS: &[&str] = &[
    "type",
    "objtype",
    "obj_type",
    "target_type",
    "targettype",
    "fibre_type",
    "fiber_type",
    "fibretype",
    "fibertype",
    "slit_type",
    "slittype",
    "role",
    "use",
    "usage",
];

/// What one row of a frame holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RowUse {
    /// An object's spectrum: read.
    Target,
    /// A sky spectrum: skipped.
    Sky,
    /// Nothing (an unused, broken or parked fibre, an empty slit): skipped.
    Unused,
}

impl RowUse {
    /// From a use-column value (case-insensitive); `None` when unknown.
    pub fn parse(s: &str) -> Option<RowUse> {
        let l = s.trim().to_ascii_lowercase();
        match l.as_str() {
            "target" | "object" | "obj" | "science" | "sci" | "program" | "programme" => Some(RowUse::Target),
            "" | "unused" | "empty" | "none" | "broken" | "dead" | "parked" | "blocked" | "unassigned"
            | "spare" | "off" => Some(RowUse::Unused),
            s if s.starts_with("sky") || s == "background" || s == "blank" => Some(RowUse::Sky),
            _ => None,
        }
    }
}

/// Where the wavelengths of a frame come from.
#[derive(Debug, Clone, PartialEq)]
enum WaveSource {
    /// A 2-D wavelength image (HDU index, scale, factor to Å).
    Image(usize, WaveScale, f64),
    /// Per-row WCS in the table: columns CRVAL1, step (CDELT1 or CD1_1), CRPIX1.
    RowWcs(Box<Wcs1>, Vec<f64>, Vec<f64>, Vec<f64>),
    /// One WCS in the image header.
    Header(Box<Wcs1>),
}

/// A 1-D spectral WCS (FITS WCS Paper III).
#[derive(Debug, Clone, PartialEq)]
struct Wcs1 {
    crval: f64,
    step: f64,
    crpix: f64,
    to_aa: f64,
    log: bool,
    dc_log: bool,
    air: bool,
}

impl Wcs1 {
    /// λ (Å) of pixels 1..=n.
    fn wave(&self, n: usize) -> Vec<f64> {
        (1..=n)
            .map(|p| {
                let x = p as f64 - self.crpix;
                let v = if self.log {
                    self.crval * (self.step * x / self.crval).exp()
                } else if self.dc_log {
                    10f64.powf(self.crval + self.step * x)
                } else {
                    self.crval + self.step * x
                };
                v * self.to_aa
            })
            .collect()
    }
}

/// What was found in a frame (printed by `zvet inspect`).
#[derive(Debug, Clone, PartialEq)]
pub struct FrameLayout {
    /// The flux image.
    pub flux: Loc,
    /// Rows (fibres or slits).
    pub rows: usize,
    /// Pixels per row.
    pub pixels: usize,
    /// The row table.
    pub table: Loc,
    /// Its id column.
    pub id_column: Option<String>,
    /// Its use column.
    pub use_column: Option<String>,
    /// Its RA and Dec columns.
    pub position_columns: Option<(String, String)>,
    /// How the wavelengths are given.
    pub wavelengths: String,
    /// The uncertainty image, if any, and what it holds.
    pub uncertainty: Option<(Loc, &'static str)>,
    /// The mask image, if any.
    pub mask: Option<Loc>,
    /// Rows read as targets.
    pub targets: usize,
    /// Sky rows skipped.
    pub sky: usize,
    /// Unused rows skipped.
    pub unused: usize,
    /// Rows whose use value is not understood (each read gives an error).
    pub unknown: usize,
}

impl fmt::Display for FrameLayout {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(
            f,
            "multi-object frame: {} rows × {} pixels in {}",
            self.rows, self.pixels, self.flux
        )?;
        let mut cols = Vec::new();
        if let Some(c) = &self.id_column {
            cols.push(format!("id {c}"));
        }
        if let Some((r, d)) = &self.position_columns {
            cols.push(format!("position {r}/{d}"));
        }
        if let Some(c) = &self.use_column {
            cols.push(format!("use {c}"));
        }
        writeln!(f, "  row table   {} ({})", self.table, cols.join(", "))?;
        writeln!(f, "  wavelength  {}", self.wavelengths)?;
        match &self.uncertainty {
            Some((l, what)) => writeln!(f, "  noise       {what} from {l}")?,
            None => writeln!(f, "  noise       none in the file (estimated per row)")?,
        }
        if let Some(m) = &self.mask {
            writeln!(f, "  mask        {m}")?;
        }
        write!(
            f,
            "  rows        {} target(s) read; {} sky and {} unused skipped",
            self.targets, self.sky, self.unused
        )?;
        if self.unknown > 0 {
            write!(f, "; {} with an unknown use value", self.unknown)?;
        }
        Ok(())
    }
}

/// Everything needed to read the rows.
struct Plan {
    layout: FrameLayout,
    flux_hdu: usize,
    err: Option<(usize, ErrKind)>,
    mask: Option<usize>,
    wave: WaveSource,
    ids: Vec<String>,
    ra: Vec<Option<f64>>,
    dec: Vec<Option<f64>>,
    uses: Vec<Result<RowUse, String>>,
    flux_unit: Option<String>,
    air: bool,
}

fn role(name: Option<&str>) -> Option<&'static str> {
    let l = name?.trim().to_ascii_lowercase();
    let l = l.as_str();
    if synonyms::IVAR.contains(&l) {
        Some("ivar")
    } else if synonyms::ERR.contains(&l) || ["errors", "errs", "sigma_flux", "uncert"].contains(&l) {
        Some("sigma")
    } else if synonyms::VAR.contains(&l) {
        Some("variance")
    } else if synonyms::MASK.contains(&l) {
        Some("mask")
    } else if synonyms::WAVE.contains(&l) {
        Some("wave")
    } else if synonyms::LOG10_WAVE.contains(&l) {
        Some("log10 wave")
    } else if synonyms::LN_WAVE.contains(&l) {
        Some("ln wave")
    } else {
        None
    }
}

fn fits_err(at: &Loc) -> impl Fn(fitsio::errors::Error) -> LoadError + '_ {
    move |e| LoadError::fits(e, at.clone())
}

fn find_col<'a>(
    cols: &'a [ConcreteColumnDescription],
    user: Option<&str>,
    names: &[&[&str]],
) -> Option<&'a ConcreteColumnDescription> {
    let list: Vec<String> = cols.iter().map(|c| c.name.clone()).collect();
    super::find_name(&list, user, names).map(|i| &cols[i])
}

fn is_text(c: &ConcreteColumnDescription) -> bool {
    matches!(c.data_type.typ, ColumnDataType::String | ColumnDataType::Text)
}

/// A table column as text, one value per row (numbers formatted).
fn text_col(
    f: &mut FitsFile,
    hdu: &fitsio::hdu::FitsHdu,
    c: &ConcreteColumnDescription,
    at: &Loc,
) -> Result<Vec<String>, LoadError> {
    if is_text(c) {
        Ok(hdu
            .read_col::<String>(f, &c.name)
            .map_err(fits_err(at))?
            .into_iter()
            .map(|s| s.trim().to_string())
            .collect())
    } else {
        Ok(hdu
            .read_col::<i64>(f, &c.name)
            .map_err(fits_err(at))?
            .into_iter()
            .map(|v| v.to_string())
            .collect())
    }
}

fn f64_col(
    f: &mut FitsFile,
    hdu: &fitsio::hdu::FitsHdu,
    c: &ConcreteColumnDescription,
    at: &Loc,
) -> Result<Vec<f64>, LoadError> {
    if is_text(c) || c.data_type.repeat > 1 {
        return Err(LoadError::ColumnType {
            at: at.clone(),
            column: c.name.clone(),
            role: "per-row value",
            found: format!("{:?} × {}", c.data_type.typ, c.data_type.repeat),
        });
    }
    hdu.read_col::<f64>(f, &c.name).map_err(fits_err(at))
}

/// Header WCS of the flux image; `Ok(None)` when it has no CRVAL1 or step.
fn header_wcs(
    f: &mut FitsFile,
    hdu: &fitsio::hdu::FitsHdu,
    at: &Loc,
    need_values: bool,
) -> Result<Option<Wcs1>, LoadError> {
    let bad = |reason: String| LoadError::BadWcs {
        at: at.clone(),
        reason,
    };
    let ctype = key_string(f, hdu, "CTYPE1")
        .unwrap_or_default()
        .to_ascii_uppercase();
    let (air, log) = super::fits_image::wavelength_axis(&ctype).map_err(bad)?;
    let unit = key_string(f, hdu, "CUNIT1").unwrap_or_default();
    let Some(to_aa) = unit_to_angstrom(&unit) else {
        return Err(LoadError::UnknownUnit {
            at: at.clone(),
            keyword: "CUNIT1".into(),
            unit,
        });
    };
    let crval = key_f64(f, hdu, "CRVAL1");
    let step = key_f64(f, hdu, "CD1_1")
        .or_else(|| key_f64(f, hdu, "CDELT1").map(|d| d * key_f64(f, hdu, "PC1_1").unwrap_or(1.0)));
    let (crval, step) = match (crval, step) {
        (Some(c), Some(s)) => (c, s),
        _ if need_values => return Ok(None),
        _ => (f64::NAN, f64::NAN),
    };
    Ok(Some(Wcs1 {
        crval,
        step,
        crpix: key_f64(f, hdu, "CRPIX1").unwrap_or(1.0),
        to_aa,
        log,
        dc_log: key_i64(f, hdu, "DC-FLAG") == Some(1),
        air,
    }))
}

/// Look at the file; `Ok(None)` when it is not a multi-object frame.
fn plan(f: &mut FitsFile, opts: &ReadOptions) -> Result<Option<Plan>, LoadError> {
    let n = match f.num_hdus() {
        Ok(n) => n,
        Err(_) => return Ok(None),
    };
    struct Img {
        index: usize,
        name: Option<String>,
        shape: Vec<usize>,
    }
    let mut images = Vec::new();
    let mut tables = Vec::new();
    for i in 0..n {
        let Ok(hdu) = f.hdu(i) else { return Ok(None) };
        let name = key_string(f, &hdu, "EXTNAME");
        match &hdu.info {
            HduInfo::ImageInfo { shape, .. } => images.push(Img {
                index: i,
                name,
                shape: shape.clone(),
            }),
            HduInfo::TableInfo {
                column_descriptions,
                num_rows,
            } => tables.push((i, name, column_descriptions.clone(), *num_rows)),
            HduInfo::AnyInfo => {}
        }
    }
    // The flux image.
    let mut flux = None;
    for im in &images {
        if im.shape.len() != 2 || im.shape[0] < 2 || im.shape[1] < 2 || role(im.name.as_deref()).is_some() {
            continue;
        }
        if opts.hdu.is_some_and(|h| h != im.index) {
            continue;
        }
        let hdu = f
            .hdu(im.index)
            .map_err(fits_err(&Loc::hdu(im.index, im.name.clone())))?;
        if key_string(f, &hdu, "BANDID1").is_some() {
            continue;
        }
        flux = Some(im);
        break;
    }
    let Some(flux) = flux else { return Ok(None) };
    let (rows, pixels) = (flux.shape[0], flux.shape[1]);
    let flux_loc = Loc::hdu(flux.index, flux.name.clone());
    // The row table: has an id or a use column and is not a spectrum table.
    let mut table = None;
    for (i, name, cols, nrows) in &tables {
        let names: Vec<String> = cols.iter().map(|c| c.name.clone()).collect();
        let spectrum_table = super::find_name(
            &names,
            None,
            &[synonyms::WAVE, synonyms::LOG10_WAVE, synonyms::LN_WAVE],
        )
        .is_some()
            && super::find_name(&names, None, &[synonyms::FLUX]).is_some();
        let id = find_col(cols, opts.id_col.as_deref(), &[synonyms::ID]);
        let use_col = find_col(cols, None, &[USE_COLUMNS]);
        if spectrum_table || (id.is_none() && use_col.is_none()) {
            continue;
        }
        table = Some((*i, name.clone(), cols.clone(), *nrows));
        break;
    }
    let Some((t_index, t_name, cols, t_rows)) = table else {
        return Ok(None);
    };
    let t_loc = Loc::hdu(t_index, t_name);
    if t_rows != rows {
        return Err(LoadError::BadHdu {
            at: t_loc,
            reason: format!(
                "this table looks like the row table of the multi-object frame in {flux_loc} but describes {t_rows} rows; the image has {rows}"
            ),
        });
    }
    let thdu = f.hdu(t_index).map_err(fits_err(&t_loc))?;
    let id_c = find_col(&cols, opts.id_col.as_deref(), &[synonyms::ID]);
    let use_c = find_col(&cols, None, &[USE_COLUMNS]);
    let ra_c = find_col(&cols, None, &[synonyms::RA]).filter(|c| !is_text(c));
    let dec_c = find_col(&cols, None, &[synonyms::DEC]).filter(|c| !is_text(c));
    let ids = match id_c {
        Some(c) => text_col(f, &thdu, c, &t_loc)?,
        None => vec![String::new(); rows],
    };
    let pos =
        |f: &mut FitsFile, c: Option<&ConcreteColumnDescription>| -> Result<Vec<Option<f64>>, LoadError> {
            Ok(match c {
                Some(c) => f64_col(f, &thdu, c, &t_loc)?
                    .into_iter()
                    .map(|v| v.is_finite().then_some(v))
                    .collect(),
                None => vec![None; rows],
            })
        };
    let (ra, dec) = (pos(f, ra_c)?, pos(f, dec_c)?);
    let uses: Vec<Result<RowUse, String>> = match use_c {
        Some(c) => text_col(f, &thdu, c, &t_loc)?
            .into_iter()
            .map(|v| {
                RowUse::parse(&v).ok_or_else(|| {
                    format!("{} = '{v}' is not a known row use (target, object, science; sky; unused, empty, broken, parked)", c.name)
                })
            })
            .collect(),
        None => ids
            .iter()
            .map(|id| Ok(if id.is_empty() { RowUse::Unused } else { RowUse::Target }))
            .collect(),
    };
    // Companions of the same shape.
    let companion = |want: &[&str]| {
        images
            .iter()
            .find(|im| im.shape == flux.shape && role(im.name.as_deref()).is_some_and(|r| want.contains(&r)))
    };
    let err = companion(&["ivar", "sigma", "variance"]).map(|im| {
        let (k, what) = match role(im.name.as_deref()) {
            Some("ivar") => (ErrKind::Ivar, "inverse variance"),
            Some("variance") => (ErrKind::Variance, "variance"),
            _ => (ErrKind::Sigma, "1σ uncertainty"),
        };
        (im.index, k, Loc::hdu(im.index, im.name.clone()), what)
    });
    let mask = companion(&["mask"]).map(|im| (im.index, Loc::hdu(im.index, im.name.clone())));
    let fhdu = f.hdu(flux.index).map_err(fits_err(&flux_loc))?;
    let flux_unit = key_string(f, &fhdu, "BUNIT");
    let air_key = key_string(f, &fhdu, "AIRORVAC").is_some_and(|v| v.eq_ignore_ascii_case("air"));
    let (wave, wave_text, wcs_air) = if let Some(im) = companion(&["wave", "log10 wave", "ln wave"]) {
        let l = Loc::hdu(im.index, im.name.clone());
        let wh = f.hdu(im.index).map_err(fits_err(&l))?;
        let unit = key_string(f, &wh, "BUNIT")
            .or_else(|| key_string(f, &wh, "CUNIT1"))
            .unwrap_or_default();
        let Some(to_aa) = unit_to_angstrom(&unit) else {
            return Err(LoadError::UnknownUnit {
                at: l,
                keyword: "BUNIT".into(),
                unit,
            });
        };
        let scale = match role(im.name.as_deref()) {
            Some("log10 wave") => WaveScale::Log10,
            Some("ln wave") => WaveScale::Ln,
            _ => WaveScale::Linear,
        };
        (
            WaveSource::Image(im.index, scale, to_aa),
            format!("2-D wavelength image {l}, one solution per row"),
            false,
        )
    } else if let (Some(cv), Some(st)) = (
        find_col(&cols, None, &[&["crval1"]]),
        find_col(&cols, None, &[&["cdelt1", "cd1_1"]]),
    ) {
        let Some(base) = header_wcs(f, &fhdu, &flux_loc, false)? else {
            return Ok(None);
        };
        let crval = f64_col(f, &thdu, cv, &t_loc)?;
        let step = f64_col(f, &thdu, st, &t_loc)?;
        let crpix = match find_col(&cols, None, &[&["crpix1"]]) {
            Some(c) => f64_col(f, &thdu, c, &t_loc)?,
            None => vec![1.0; rows],
        };
        let text = format!(
            "per-row WCS in table columns {}, {}{} (axis {} in {} Å)",
            cv.name,
            st.name,
            if crpix.iter().all(|&p| (p - 1.0).abs() < 1e-12) {
                ""
            } else {
                ", CRPIX1"
            },
            if base.log { "log" } else { "linear" },
            base.to_aa
        );
        let air = base.air;
        (WaveSource::RowWcs(Box::new(base), crval, step, crpix), text, air)
    } else if let Some(w) = header_wcs(f, &fhdu, &flux_loc, true)? {
        let text = format!(
            "one WCS in the image header for every row (CRVAL1 = {}, step {}{})",
            w.crval,
            w.step,
            if w.log { ", WAVE-LOG" } else { "" }
        );
        let air = w.air;
        (WaveSource::Header(Box::new(w)), text, air)
    } else {
        return Err(LoadError::BadWcs {
            at: flux_loc,
            reason: "multi-object frame without wavelengths: no 2-D wavelength image (EXTNAME WAVE), no per-row CRVAL1/CDELT1 columns in the row table, no CRVAL1/CDELT1 in the image header".into(),
        });
    };
    let count = |u: RowUse| uses.iter().filter(|x| x.as_ref().ok() == Some(&u)).count();
    let layout = FrameLayout {
        flux: flux_loc,
        rows,
        pixels,
        table: t_loc,
        id_column: id_c.map(|c| c.name.clone()),
        use_column: use_c.map(|c| c.name.clone()),
        position_columns: ra_c.zip(dec_c).map(|(r, d)| (r.name.clone(), d.name.clone())),
        wavelengths: if wcs_air || air_key {
            format!("{wave_text}; air, converted to vacuum")
        } else {
            wave_text
        },
        uncertainty: err.as_ref().map(|(_, _, l, w)| (l.clone(), *w)),
        mask: mask.as_ref().map(|(_, l)| l.clone()),
        targets: count(RowUse::Target),
        sky: count(RowUse::Sky),
        unused: count(RowUse::Unused),
        unknown: uses.iter().filter(|u| u.is_err()).count(),
    };
    Ok(Some(Plan {
        layout,
        flux_hdu: flux.index,
        err: err.map(|(i, k, _, _)| (i, k)),
        mask: mask.map(|(i, _)| i),
        wave,
        ids,
        ra,
        dec,
        uses,
        flux_unit,
        air: wcs_air || air_key || opts.air,
    }))
}

/// Names the FITS library would misread (see `fits_common`): leave those
/// files to the general reader, which explains.
fn usable_name(path: &Path) -> bool {
    let Some(name) = path.to_str() else { return false };
    let base = path.file_name().and_then(|n| n.to_str()).unwrap_or(name);
    !(name.contains('[') || base.starts_with('!') || base.starts_with('-'))
}

fn open(path: &Path, opts: &ReadOptions) -> Result<Option<(FitsFile, Plan)>, LoadError> {
    let layout = super::fits_scan::fits_layout(path).ok();
    open_checked(path, opts, layout.as_deref())
}

/// [`open`] with the file's layout already read (None: it could not be).
fn open_checked(
    path: &Path,
    opts: &ReadOptions,
    layout: Option<&[super::fits_scan::HduLayout]>,
) -> Result<Option<(FitsFile, Plan)>, LoadError> {
    if !usable_name(path) {
        return Ok(None);
    }
    // Only a file whose checked layout holds a 2-D image can be a frame; any
    // other file (or one whose declared sizes are wrong, or whose columns the
    // FITS library cannot describe) goes to the ordinary reader, which says why.
    let Some(layout) = layout else {
        return Ok(None);
    };
    let image_2d = layout.iter().any(|h| {
        matches!(h.xtension.as_deref(), None | Some("IMAGE")) && h.naxis.len() == 2 && h.naxis[1] > 1
    });
    if !image_2d {
        return Ok(None);
    }
    guard(|| {
        let Ok(mut f) = FitsFile::open(path) else {
            return Ok(None);
        };
        Ok(plan(&mut f, opts)?.map(|p| (f, p)))
    })
}

/// The layout of `path` when it is a multi-object frame, else `None`.
pub fn frame_layout(path: &Path, opts: &ReadOptions) -> Result<Option<FrameLayout>, LoadError> {
    if super::detect_format(path)? != super::Format::Fits {
        return Ok(None);
    }
    Ok(open(path, opts)?.map(|(_, p)| p.layout))
}

/// The target rows of a multi-object frame, one spectrum at a time; `None`
/// when the file is not one.
pub(crate) fn open_stream(path: &Path, opts: &ReadOptions) -> Result<Option<FrameStream>, LoadError> {
    let layout = super::fits_scan::fits_layout(path).ok();
    open_stream_checked(path, opts, layout.as_deref())
}

/// [`open_stream`] with the file's layout already read (None: it could not be).
pub(crate) fn open_stream_checked(
    path: &Path,
    opts: &ReadOptions,
    layout: Option<&[super::fits_scan::HduLayout]>,
) -> Result<Option<FrameStream>, LoadError> {
    Ok(open_checked(path, opts, layout)?.map(|(f, plan)| FrameStream {
        file: f.threadsafe(),
        path: path.to_path_buf(),
        stem: super::file_stem(path),
        plan,
        next: 0,
    }))
}

/// Iterator over the target rows of a frame.
pub(crate) struct FrameStream {
    file: ThreadsafeFitsFile,
    path: PathBuf,
    stem: String,
    plan: Plan,
    next: usize,
}

impl FrameStream {
    fn read_row(&self, r: usize) -> Result<Spectrum, LoadError> {
        let p = &self.plan;
        let at = p.layout.flux.with_row(r);
        let mut f = self.file.lock().map_err(|e| LoadError::fits(e, at.clone()))?;
        let f = &mut *f;
        let n = p.layout.pixels;
        let section = |f: &mut FitsFile, index: usize| -> Result<Vec<f64>, LoadError> {
            let hdu = f.hdu(index).map_err(fits_err(&at))?;
            hdu.read_section::<Vec<f64>>(f, r * n, (r + 1) * n)
                .map_err(fits_err(&at))
        };
        let flux = section(f, p.flux_hdu)?;
        let ivar = match p.err {
            Some((i, k)) => Some(k.to_ivar(&section(f, i)?)),
            None => None,
        };
        let bad = match p.mask {
            Some(i) => Some(section(f, i)?.iter().map(|m| *m != 0.0).collect()),
            None => None,
        };
        let wave = match &p.wave {
            WaveSource::Image(i, scale, to_aa) => section(f, *i)?
                .into_iter()
                .map(|v| scale.apply(v) * to_aa)
                .collect(),
            WaveSource::RowWcs(base, crval, step, crpix) => {
                let w = Wcs1 {
                    crval: crval[r],
                    step: step[r],
                    crpix: crpix[r],
                    ..(**base).clone()
                };
                if !(w.crval.is_finite() && w.step.is_finite() && w.step != 0.0 && w.crpix.is_finite())
                    || (w.log && w.crval <= 0.0)
                {
                    return Err(LoadError::BadWcs {
                        at: at.clone(),
                        reason: format!(
                            "row {r}: CRVAL1 = {}, step = {}, CRPIX1 = {} is not a wavelength solution",
                            w.crval, w.step, w.crpix
                        ),
                    });
                }
                w.wave(n)
            }
            WaveSource::Header(w) => w.wave(n),
        };
        let id = match p.ids[r].trim() {
            "" => format!("{}#{r}", self.stem),
            s => s.to_string(),
        };
        let meta = SpectrumMeta {
            id,
            source: Some(self.path.clone()),
            hdu: p.layout.flux.hdu.map(|h| h as usize),
            row: Some(r),
            ra: p.ra[r],
            dec: p.dec[r],
            flux_unit: p.flux_unit.clone(),
            ..Default::default()
        };
        RawSpectrum {
            wave,
            flux,
            ivar,
            bad,
            air: p.air,
            meta,
        }
        .finish(at)
    }
}

impl Iterator for FrameStream {
    type Item = Result<Spectrum, LoadError>;

    fn next(&mut self) -> Option<Self::Item> {
        while self.next < self.plan.layout.rows {
            let r = self.next;
            self.next += 1;
            match &self.plan.uses[r] {
                Ok(RowUse::Target) => {}
                Ok(_) => continue,
                Err(m) => {
                    return Some(Err(LoadError::BadHdu {
                        at: self.plan.layout.table.with_row(r),
                        reason: m.clone(),
                    }))
                }
            }
            return Some(guard(|| self.read_row(r)));
        }
        None
    }

    fn nth(&mut self, mut n: usize) -> Option<Self::Item> {
        // skip `n` items without reading their pixels
        while n > 0 && self.next < self.plan.layout.rows {
            if !matches!(self.plan.uses[self.next], Ok(RowUse::Target) | Err(_)) {
                self.next += 1;
                continue;
            }
            self.next += 1;
            n -= 1;
        }
        self.next()
    }
}

impl FrameStream {
    /// Item `k` of the stream, read without moving the stream.
    pub(crate) fn read_item(&self, k: usize) -> Result<Spectrum, LoadError> {
        let mut left = k;
        for (r, u) in self.plan.uses.iter().enumerate() {
            match u {
                Ok(RowUse::Target) => {
                    if left == 0 {
                        return guard(|| self.read_row(r));
                    }
                }
                Ok(_) => continue,
                Err(m) => {
                    if left == 0 {
                        return Err(LoadError::BadHdu {
                            at: self.plan.layout.table.with_row(r),
                            reason: m.clone(),
                        });
                    }
                }
            }
            left -= 1;
        }
        Err(LoadError::Malformed(format!(
            "object {} is no longer in the file (the file changed since it was opened)",
            k + 1
        )))
    }

    /// The id of every item of the stream, in order, without reading pixels
    /// (an unusable row gives its message).
    pub(crate) fn ids(&self) -> Vec<Result<String, String>> {
        let mut out = Vec::new();
        for (r, u) in self.plan.uses.iter().enumerate() {
            match u {
                Ok(RowUse::Target) => out.push(Ok(match self.plan.ids[r].trim() {
                    "" => format!("{}#{r}", self.stem),
                    s => s.to_string(),
                })),
                Ok(_) => {}
                Err(m) => out.push(Err(LoadError::BadHdu {
                    at: self.plan.layout.table.with_row(r),
                    reason: m.clone(),
                }
                .with_path(&self.path)
                .to_string())),
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn row_uses() {
        assert_eq!(RowUse::parse("TARGET"), Some(RowUse::Target));
        assert_eq!(RowUse::parse(" Sky "), Some(RowUse::Sky));
        assert_eq!(RowUse::parse("SKY_FIBRE"), Some(RowUse::Sky));
        assert_eq!(RowUse::parse("parked"), Some(RowUse::Unused));
        assert_eq!(RowUse::parse(""), Some(RowUse::Unused));
        assert_eq!(RowUse::parse("guide"), None);
    }

    #[test]
    fn log_wcs_follows_paper_iii() {
        // FITS WCS Paper III eq. 5: λ = CRVAL·exp(CDELT·(p − CRPIX)/CRVAL).
        let w = Wcs1 {
            crval: 5000.0,
            step: 1.5,
            crpix: 1.0,
            to_aa: 1.0,
            log: true,
            dc_log: false,
            air: false,
        };
        let l = w.wave(3);
        assert!((l[2] - 5000.0 * (3.0f64 / 5000.0).exp()).abs() < 1e-9);
    }
}
