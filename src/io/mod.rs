/*!
Readers for spectrum files: FITS 1-D images with a spectral WCS, FITS binary
tables (one pixel per row, or one object per row with vector columns), and
text tables (CSV or whitespace-separated, with a header).

Every reader hands out [`Spectrum`]s on **vacuum** wavelengths in Å: units are
converted (Å, nm, µm, m), log wavelengths exponentiated, and air wavelengths
converted with [`crate::spectrum::air_to_vacuum`] when the file says they are
in air (`AWAV` in CTYPE1, the IVOA UCD `em.wl;obs.atmos` in a column's TUCDn,
`AIRORVAC = 'air'`) or the user says so ([`ReadOptions::air`]).

Columns are found by case-insensitive synonym lists ([`synonyms`]), always
overridable by [`ReadOptions`]. A file without any uncertainty gets an
inverse variance estimated from the local scatter
([`Spectrum::estimate_noise`], [`NOISE_HALF_WIDTH`] pixels each side) and a
warning on the spectrum.

[`read_file`] returns all objects of one file; [`stream_file`] yields them one
by one, reading a multi-object table row by row so memory stays bounded.
Errors are [`LoadError`]s that say where (file, HDU, row, column) and what.
*/
pub mod atomic;
mod detect;
mod error;
mod fits_common;
mod fits_image;
mod fits_scan;
mod fits_table;
mod frames;
mod text;
mod timing;

pub use detect::{detect_format, Format};
pub use error::{LoadError, Loc};
pub use fits_scan::{
    fits_layout, fits_layout_exact, layout_of_bytes, ColumnForm, HduLayout, MAX_INFLATED, MAX_PIXELS,
};
pub use frames::{frame_layout, FrameLayout, RowUse};
pub use timing::{stream_file_timed, FileReadTime, Timed};

use crate::spectrum::{air_to_vacuum, Medium, Spectrum, SpectrumMeta};
use std::path::{Path, PathBuf};

/// Half-width (pixels each side) of the running window of the noise estimate
/// used for files without uncertainties.
pub const NOISE_HALF_WIDTH: usize = 25;

/// What the user tells the readers beyond what the files say.
///
/// Stored as is in campaign manifests (`[read]`); missing fields default.
#[derive(Debug, Clone, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(default)]
pub struct ReadOptions {
    /// Wavelengths are in standard air (converted to vacuum).
    pub air: bool,
    /// Name of the wavelength column (a name starting `log` means log10 λ, `ln` natural log).
    pub wave_col: Option<String>,
    /// Name of the flux column.
    pub flux_col: Option<String>,
    /// Name of the inverse-variance column.
    pub ivar_col: Option<String>,
    /// Name of the 1σ uncertainty column.
    pub err_col: Option<String>,
    /// Name of the mask/quality column (non-zero = bad).
    pub mask_col: Option<String>,
    /// Name of the object-id column.
    pub id_col: Option<String>,
    /// Read only this HDU (0 = primary).
    pub hdu: Option<usize>,
}

/// The documented, case-insensitive column-name synonyms, in order of
/// preference. Names the user gives in [`ReadOptions`] always win.
pub mod synonyms {
    /// Linear wavelength.
    pub const WAVE: &[&str] = &[
        "wave",
        "wavelength",
        "lambda",
        "lam",
        "wavelen",
        "wl",
        "wav",
        "awav",
        "wave_vac",
        "wave_air",
    ];
    /// log10 of the wavelength.
    pub const LOG10_WAVE: &[&str] = &[
        "loglam",
        "log_lam",
        "loglambda",
        "log_lambda",
        "logwave",
        "log_wave",
        "log10lam",
        "log10_lam",
        "log_wavelength",
        "logwl",
    ];
    /// Natural log of the wavelength.
    pub const LN_WAVE: &[&str] = &["lnlam", "ln_lam", "lnwave", "ln_wave", "ln_lambda"];
    /// Flux.
    pub const FLUX: &[&str] = &[
        "flux",
        "flx",
        "f_lambda",
        "flambda",
        "flam",
        "flux_density",
        "fluxdensity",
        "spec",
        "spectrum",
        "specflux",
        "counts",
    ];
    /// Inverse variance of the flux.
    pub const IVAR: &[&str] = &[
        "ivar",
        "invvar",
        "inv_var",
        "inverse_variance",
        "flux_ivar",
        "ivar_flux",
    ];
    /// 1σ uncertainty of the flux.
    pub const ERR: &[&str] = &[
        "error",
        "err",
        "sigma",
        "sig",
        "flux_err",
        "flux_error",
        "fluxerr",
        "err_flux",
        "error_flux",
        "e_flux",
        "staterror",
        "stat_err",
        "uncertainty",
        "unc",
        "noise",
        "stddev",
    ];
    /// Variance of the flux.
    pub const VAR: &[&str] = &["var", "variance", "flux_var", "var_flux"];
    /// The subtracted sky spectrum (kept for display).
    pub const SKY: &[&str] = &["sky", "sky_flux", "skyflux", "sky_spectrum", "skyspec"];
    /// Pixel mask or quality (non-zero = bad).
    pub const MASK: &[&str] = &[
        "mask",
        "pixel_mask",
        "pixmask",
        "and_mask",
        "quality",
        "qual",
        "dq",
        "flag",
        "flags",
        "badpix",
    ];
    /// Object identifier (table column).
    pub const ID: &[&str] = &[
        "id",
        "objid",
        "obj_id",
        "object_id",
        "objectid",
        "object",
        "objname",
        "name",
        "targetid",
        "target_id",
        "specid",
        "source_id",
    ];
    /// Header keywords holding the object identifier, in order.
    pub const ID_KEYWORDS: &[&str] = &["OBJECT", "OBJNAME", "TARGNAME", "TARGETID"];
    /// Right ascension (column or header keyword).
    pub const RA: &[&str] = &["ra", "ra_obj", "plug_ra", "ra_targ"];
    /// Declination (column or header keyword).
    pub const DEC: &[&str] = &["dec", "dec_obj", "plug_dec", "dec_targ"];
}

/// How a wavelength column or axis encodes λ.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum WaveScale {
    Linear,
    Log10,
    Ln,
}

impl WaveScale {
    /// Scale implied by a column name.
    pub(crate) fn from_name(name: &str) -> WaveScale {
        let l = name.trim().to_ascii_lowercase();
        if synonyms::LN_WAVE.contains(&l.as_str()) || l.starts_with("ln") {
            WaveScale::Ln
        } else if synonyms::LOG10_WAVE.contains(&l.as_str()) || l.starts_with("log") {
            WaveScale::Log10
        } else {
            WaveScale::Linear
        }
    }

    pub(crate) fn apply(self, v: f64) -> f64 {
        match self {
            WaveScale::Linear => v,
            WaveScale::Log10 => 10f64.powf(v),
            WaveScale::Ln => v.exp(),
        }
    }
}

/// Factor from a wavelength unit string to Å; `None` when unknown.
/// An empty unit means Å (common practice for optical spectra, although the
/// WCS standard's default for WAVE is m).
pub(crate) fn unit_to_angstrom(unit: &str) -> Option<f64> {
    let u = unit.trim();
    let l = u.to_lowercase();
    let l = l.trim_start_matches("log(").trim_end_matches(')');
    match l {
        "" | "a" | "aa" | "å" | "ångström" | "angstrom" | "angstroms" | "angstroem" | "ang" | "0.1nm"
        | "0.1 nm" | "1e-10 m" | "10**-10 m" | "1e-10m" => Some(1.0),
        "nm" | "nanometer" | "nanometers" | "nanometre" | "nanometres" => Some(10.0),
        "um" | "µm" | "μm" | "micron" | "microns" | "micrometer" | "micrometers" | "micrometre" => {
            Some(1.0e4)
        }
        "m" | "meter" | "meters" | "metre" | "metres" => Some(1.0e10),
        _ => None,
    }
}

/// Case-insensitive lookup of `wanted` (user name first, else synonyms in
/// order) among `names`; returns the index into `names`.
pub(crate) fn find_name(names: &[String], user: Option<&str>, syn: &[&[&str]]) -> Option<usize> {
    let norm = |s: &str| s.trim().to_ascii_lowercase();
    if let Some(u) = user {
        let u = norm(u);
        return names.iter().position(|n| norm(n) == u);
    }
    for list in syn {
        for s in *list {
            if let Some(i) = names.iter().position(|n| norm(n) == *s) {
                return Some(i);
            }
        }
    }
    None
}

/// The names tried for a role, for error messages.
pub(crate) fn tried(user: Option<&str>, syn: &[&[&str]]) -> String {
    match user {
        Some(u) => format!("'{u}' (given)"),
        None => syn
            .iter()
            .flat_map(|l| l.iter())
            .copied()
            .collect::<Vec<_>>()
            .join(", "),
    }
}

/// The kind of uncertainty array a file gives.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum ErrKind {
    Ivar,
    Sigma,
    Variance,
}

impl ErrKind {
    /// Convert to inverse variance (0 where the input is unusable, so the
    /// pixel is masked by [`Spectrum::new`]; −1 where it is negative, which
    /// [`RawSpectrum::finish`] masks with a warning).
    pub(crate) fn to_ivar(self, v: &[f64]) -> Vec<f64> {
        v.iter()
            .map(|&x| {
                if x < 0.0 {
                    return NEGATIVE_ERR;
                }
                let iv = match self {
                    ErrKind::Ivar => x,
                    ErrKind::Sigma => 1.0 / (x * x),
                    ErrKind::Variance => 1.0 / x,
                };
                if iv.is_finite() && iv > 0.0 && x.is_finite() {
                    iv
                } else {
                    0.0
                }
            })
            .collect()
    }
}

/// Marks a pixel whose uncertainty (σ, variance or inverse variance) is negative.
const NEGATIVE_ERR: f64 = -1.0;

/// Shortest and longest wavelength (Å, after unit conversion) of a
/// physically meaningful spectrum: 1 Å (hard X-rays) to 10⁸ Å (1 cm, the
/// radio). A wavelength solution outside this range (a CDELT1 of 10³⁰, a
/// unit off by 10¹⁰) is an error, not a spectrum.
pub const WAVELENGTH_RANGE: (f64, f64) = (1.0, 1.0e8);

/// Raw arrays as a reader found them, before conversion to a [`Spectrum`].
#[derive(Debug, Default)]
pub(crate) struct RawSpectrum {
    /// Wavelengths in Å in the file's medium (already unit-converted and exponentiated).
    pub wave: Vec<f64>,
    pub flux: Vec<f64>,
    /// Uncertainty already converted to inverse variance, if any.
    pub ivar: Option<Vec<f64>>,
    /// Mask (true = bad), if any.
    pub bad: Option<Vec<bool>>,
    pub air: bool,
    pub meta: SpectrumMeta,
}

impl RawSpectrum {
    /// Convert to vacuum, check invariants, estimate the noise when absent.
    pub(crate) fn finish(self, at: Loc) -> Result<Spectrum, LoadError> {
        let RawSpectrum {
            mut wave,
            flux,
            ivar,
            bad,
            air,
            mut meta,
        } = self;
        if air {
            for w in wave.iter_mut() {
                *w = air_to_vacuum(*w);
            }
            meta.medium_as_read = Medium::Air;
        } else {
            meta.medium_as_read = Medium::Vacuum;
        }
        if flux.iter().all(|f| !f.is_finite()) {
            return Err(LoadError::NoGoodPixels { at });
        }
        // (non-finite and non-positive values are named by `Spectrum::new`)
        let (lo, hi) = wave
            .iter()
            .filter(|w| w.is_finite() && **w > 0.0)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &w| {
                (a.min(w), b.max(w))
            });
        if lo < WAVELENGTH_RANGE.0 || hi > WAVELENGTH_RANGE.1 {
            return Err(LoadError::BadWcs {
                at,
                reason: format!(
                    "wavelengths span {lo:.4e}–{hi:.4e} Å, outside any physical range ({:e}–{:e} Å); is the wavelength solution or its unit right?",
                    WAVELENGTH_RANGE.0, WAVELENGTH_RANGE.1
                ),
            });
        }
        let mut ivar = ivar;
        let mut negative = 0usize;
        if let Some(iv) = ivar.as_mut() {
            for v in iv.iter_mut().filter(|v| **v < 0.0) {
                *v = 0.0;
                negative += 1;
            }
        }
        if negative > 0 {
            meta.warnings.push(format!(
                "{negative} pixel(s) with a negative uncertainty were masked"
            ));
        }
        let good = bad.map(|b| b.into_iter().map(|x| !x).collect());
        let no_err = ivar.is_none();
        let mut s = Spectrum::new(wave, flux, ivar, good, meta)
            .map_err(|e| LoadError::from_spectrum(e, at.clone()))?;
        if no_err {
            s.estimate_noise(NOISE_HALF_WIDTH);
            s.meta.warnings.push(format!(
                "no uncertainty in the file: inverse variance estimated from the local scatter of the flux (±{NOISE_HALF_WIDTH} pixels)"
            ));
            if s.n_good() == 0 {
                return Err(LoadError::NoGoodPixels { at });
            }
        }
        Ok(s)
    }
}

/// Extensions (lower case) taken as spectrum files when a folder is expanded.
pub const SPECTRUM_EXTENSIONS: &[&str] = &[
    "fits", "fit", "fts", "fits.gz", "fit.gz", "fts.gz", "csv", "txt", "dat", "tsv", "ascii",
];

/// True when `p`'s name ends with one of [`SPECTRUM_EXTENSIONS`].
pub fn has_spectrum_extension(p: &Path) -> bool {
    let Some(name) = p.file_name().and_then(|n| n.to_str()) else {
        return false;
    };
    let l = name.to_ascii_lowercase();
    SPECTRUM_EXTENSIONS.iter().any(|e| l.ends_with(&format!(".{e}")))
}

/// Expand folders into the spectrum files below them (recursively, by
/// [`SPECTRUM_EXTENSIONS`], hidden entries skipped), sorted by path so the
/// order is stable. Paths that are files are kept as given (whatever their
/// extension), in the order given; paths that do not exist are kept too so
/// that reading them reports the error.
pub fn expand_inputs(paths: &[PathBuf]) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for p in paths {
        if p.is_dir() {
            let mut found = Vec::new();
            walk(p, &mut found);
            found.sort();
            out.extend(found);
        } else {
            out.push(p.clone());
        }
    }
    out
}

fn walk(dir: &Path, out: &mut Vec<PathBuf>) {
    let Ok(rd) = std::fs::read_dir(dir) else {
        return;
    };
    for e in rd.flatten() {
        let p = e.path();
        let hidden = p
            .file_name()
            .and_then(|n| n.to_str())
            .is_some_and(|n| n.starts_with('.'));
        if hidden {
            continue;
        }
        if p.is_dir() {
            walk(&p, out);
        } else if has_spectrum_extension(&p) {
            out.push(p);
        }
    }
}

/// Read every object of one file. Errors carry the path
/// ([`LoadError::WithPath`]); the first bad object fails the whole call (use
/// [`stream_file`] to keep the good objects of a partly bad file).
pub fn read_file(path: &Path, opts: &ReadOptions) -> Result<Vec<Spectrum>, LoadError> {
    stream_file(path, opts)?.collect()
}

/// The objects of one file, one at a time. A multi-object FITS table is read
/// row by row, so memory stays bounded by one object. Opening errors come
/// back at once; errors in single objects come as `Err` items and the
/// iteration goes on with the next object.
pub fn stream_file(
    path: &Path,
    opts: &ReadOptions,
) -> Result<Box<dyn Iterator<Item = Result<Spectrum, LoadError>> + Send>, LoadError> {
    let wrap = |e: LoadError| e.with_path(path);
    let format = detect_format(path).map_err(wrap)?;
    let path_buf = path.to_path_buf();
    let it: Box<dyn Iterator<Item = Result<Spectrum, LoadError>> + Send> = match format {
        // A multi-object frame (2-D image + row table) is read by its own reader.
        Format::Fits => match frames::open_stream(path, opts).map_err(wrap)? {
            Some(frame) => {
                let p = path_buf.clone();
                Box::new(frame.map(move |r| r.map_err(|e| e.with_path(&p))))
            }
            None => Box::new(
                fits_common::open_stream(path, opts)
                    .map_err(wrap)?
                    .map(move |r| r.map_err(|e| e.with_path(&path_buf))),
            ),
        },
        Format::Text => {
            let s = text::read_text(path, opts).map_err(wrap)?;
            Box::new(std::iter::once(Ok(s)))
        }
    };
    Ok(it)
}

/// One spectrum file kept open for reading its objects in any order (the
/// review window's on-demand reads): the file's layout is read and checked
/// once, when it is opened; item k is item k of [`stream_file`].
pub struct ObjectFile {
    path: PathBuf,
    opened: Opened,
}

enum Opened {
    Fits(Box<fits_common::FitsStream>),
    Frame(Box<frames::FrameStream>),
    Text(ReadOptions),
}

impl ObjectFile {
    /// Open `path` (a FITS file's whole layout is checked here, once).
    pub fn open(path: &Path, opts: &ReadOptions) -> Result<ObjectFile, LoadError> {
        let wrap = |e: LoadError| e.with_path(path);
        let opened = match detect_format(path).map_err(wrap)? {
            Format::Fits => {
                let layout = fits_scan::fits_layout(path);
                match frames::open_stream_checked(path, opts, layout.as_ref().ok().map(|l| &l[..]))
                    .map_err(wrap)?
                {
                    Some(frame) => Opened::Frame(Box::new(frame)),
                    None => {
                        let layout = layout.map_err(wrap)?;
                        Opened::Fits(Box::new(
                            fits_common::open_stream_checked(path, opts, Some(layout)).map_err(wrap)?,
                        ))
                    }
                }
            }
            Format::Text => Opened::Text(opts.clone()),
        };
        Ok(ObjectFile {
            path: path.to_path_buf(),
            opened,
        })
    }

    /// The ids of the file's objects in stream order, reading as little as
    /// possible: the id column of a multi-object table, a frame's plan, a
    /// text file whole. An item that cannot be read gives its message.
    pub fn ids(&self) -> Vec<Result<String, String>> {
        match &self.opened {
            Opened::Fits(f) => f.ids(),
            Opened::Frame(f) => f.ids(),
            Opened::Text(opts) => match text::read_text(&self.path, opts) {
                Ok(s) => vec![Ok(s.meta.id)],
                Err(e) => vec![Err(e.with_path(&self.path).to_string())],
            },
        }
    }

    /// Item `k` (the items before it are not read).
    pub fn read(&self, k: usize) -> Result<Spectrum, LoadError> {
        let r = match &self.opened {
            Opened::Fits(f) => f.read_item(k),
            Opened::Frame(f) => f.read_item(k),
            Opened::Text(opts) if k == 0 => text::read_text(&self.path, opts),
            Opened::Text(_) => Err(LoadError::Malformed(
                "object 2 or later of a one-spectrum text file (the file changed since it was opened)".into(),
            )),
        };
        r.map_err(|e| e.with_path(&self.path))
    }
}

/// The ids of the objects of one file, in the order [`stream_file`] gives
/// them (see [`ObjectFile::ids`]).
pub fn list_objects(path: &Path, opts: &ReadOptions) -> Result<Vec<Result<String, String>>, LoadError> {
    Ok(ObjectFile::open(path, opts)?.ids())
}

/// Item `k` of [`stream_file`] of `path` (see [`ObjectFile::read`]).
pub fn read_object(path: &Path, opts: &ReadOptions, k: usize) -> Result<Spectrum, LoadError> {
    ObjectFile::open(path, opts)?.read(k)
}

/// File stem used as the object id when the file gives none.
pub(crate) fn file_stem(path: &Path) -> String {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let l = name.to_ascii_lowercase();
    for e in SPECTRUM_EXTENSIONS {
        let suffix = format!(".{e}");
        if l.ends_with(&suffix) {
            return name[..name.len() - suffix.len()].to_string();
        }
    }
    path.file_stem()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or(name)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn units_and_scales() {
        assert_eq!(unit_to_angstrom("Angstrom"), Some(1.0));
        assert_eq!(unit_to_angstrom("ANGSTROMS"), Some(1.0));
        assert_eq!(unit_to_angstrom("Å"), Some(1.0));
        assert_eq!(unit_to_angstrom("µm"), Some(1.0e4));
        assert_eq!(unit_to_angstrom("nm"), Some(10.0));
        assert_eq!(unit_to_angstrom("um"), Some(1.0e4));
        assert_eq!(unit_to_angstrom("m"), Some(1.0e10));
        assert_eq!(unit_to_angstrom("furlong"), None);
        assert_eq!(WaveScale::from_name("loglam"), WaveScale::Log10);
        assert_eq!(WaveScale::from_name("LNLAM"), WaveScale::Ln);
        assert_eq!(WaveScale::from_name("WAVELENGTH"), WaveScale::Linear);
    }

    #[test]
    fn synonyms_match_case_insensitively_in_list_order() {
        let names: Vec<String> = ["FLUX", "LogLam", "Err", "IVAR"]
            .iter()
            .map(|s| s.to_string())
            .collect();
        assert_eq!(find_name(&names, None, &[synonyms::IVAR, synonyms::ERR]), Some(3));
        assert_eq!(
            find_name(&names, None, &[synonyms::WAVE, synonyms::LOG10_WAVE]),
            Some(1)
        );
        assert_eq!(find_name(&names, Some("err"), &[synonyms::IVAR]), Some(2));
        assert_eq!(find_name(&names, Some("nope"), &[synonyms::FLUX]), None);
    }

    #[test]
    fn stems_drop_double_extensions() {
        assert_eq!(file_stem(Path::new("/a/b/obj-1.fits.gz")), "obj-1");
        assert_eq!(file_stem(Path::new("x.csv")), "x");
    }
}
