/*!
Template sets on disk: one FITS file per set plus a small JSON descriptor.

Layout of `<dir>/<set>.fits`:
- the primary HDU holds no data; keywords `SETNAME` (set name), `NTEMPL`
  (number of templates), `ORIGIN`;
- one 1-D image extension per template (32-bit floats), `EXTNAME` = template
  name, with keywords
  - `TPLCLASS` = `galaxy` | `quasar` | `star`, `TPLKIND` = `emission` |
    `absorption`, `TPLMODE` = `basis` | `each_alone` (how the class is fitted);
  - a spectral WCS per FITS WCS Paper III (Greisen et al. 2006), logarithmic
    wavelength: `CTYPE1 = 'WAVE-LOG'`, `CUNIT1 = 'Angstrom'`, `CRPIX1 = 1`,
    `CRVAL1` = λ of pixel 1, `CDELT1` = CRVAL1 · ln 10 · Δlog10λ, so that
    λ(p) = CRVAL1 · exp(CDELT1 (p − CRPIX1) / CRVAL1); `SPECSYS = 'SOURCE'`
    (rest frame);
  - our own exact log10 convention `LOGLAM0` (log10 λ of pixel 1, Å) and
    `DLOGLAM` (step), which a reader prefers when present.

`<dir>/<set>.json` repeats the list of templates and adds the provenance and,
for generated sets, the generator's parameters. A user set may omit it.
*/
use super::{ClassTemplates, FitMode, Template, TemplateKind, TemplateSet};
use crate::ObjectClass;
use fitsio::images::{ImageDescription, ImageType};
use fitsio::FitsFile;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// Why a template set could not be read or written.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum TemplateError {
    /// The file system refused.
    #[error("{}: {source}", path.display())]
    Io {
        /// File or folder concerned.
        path: PathBuf,
        /// Underlying error.
        source: std::io::Error,
    },
    /// The FITS library reported an error.
    #[error("{}: FITS error: {message}", path.display())]
    Fits {
        /// File concerned.
        path: PathBuf,
        /// What cfitsio said.
        message: String,
    },
    /// A template extension is malformed.
    #[error("{}: extension {hdu} ('{name}'): {message}", path.display())]
    Invalid {
        /// File concerned.
        path: PathBuf,
        /// HDU number (0 = primary).
        hdu: usize,
        /// EXTNAME, if any.
        name: String,
        /// What is wrong.
        message: String,
    },
    /// The JSON descriptor is malformed.
    #[error("{}: descriptor: {message}", path.display())]
    Descriptor {
        /// File concerned.
        path: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// A set cannot be written as asked.
    #[error("template set '{name}': {message}")]
    BadSet {
        /// Set name.
        name: String,
        /// What is wrong.
        message: String,
    },
    /// No template set where one was expected.
    #[error("{}: no template set found (expected a .fits file with template extensions, its .json descriptor, or a folder holding one set)", path.display())]
    NotFound {
        /// Path given.
        path: PathBuf,
    },
}

fn fits_err(path: &Path) -> impl Fn(fitsio::errors::Error) -> TemplateError + '_ {
    move |e| TemplateError::Fits {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
}

/// Format tag of the JSON descriptor.
pub const DESCRIPTOR_FORMAT: &str = "zvet-template-set";

/// The JSON descriptor written beside each set's FITS file.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Descriptor {
    /// Always `zvet-template-set`.
    pub format: String,
    /// Version of this layout (1).
    pub format_version: u32,
    /// Set name.
    pub name: String,
    /// Free-text provenance.
    pub provenance: String,
    /// FITS file name (relative to the descriptor).
    pub fits: String,
    /// One entry per template, in HDU order.
    pub templates: Vec<DescriptorEntry>,
    /// Generator parameters (generated sets only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub generator: Option<serde_json::Value>,
}

/// One template in the descriptor.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct DescriptorEntry {
    /// Template name (= EXTNAME).
    pub name: String,
    /// Class.
    pub class: ObjectClass,
    /// Emission or absorption.
    pub kind: TemplateKind,
    /// How the class is fitted.
    pub fit_mode: FitMode,
    /// log10 of the first pixel's wavelength (Å).
    pub loglam0: f64,
    /// Step in log10 λ.
    pub dloglam: f64,
    /// Number of pixels.
    pub n_pixels: usize,
    /// First and last pixel wavelength (Å), for people reading the file.
    pub wave_range: (f64, f64),
}

fn valid_name(s: &str) -> bool {
    !s.is_empty()
        && s.len() <= 68
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.' | '+'))
        && !s.starts_with('.')
}

fn mode_str(m: FitMode) -> &'static str {
    match m {
        FitMode::Basis => "basis",
        FitMode::EachAlone => "each_alone",
    }
}

fn kind_str(k: TemplateKind) -> &'static str {
    match k {
        TemplateKind::Emission => "emission",
        TemplateKind::Absorption => "absorption",
    }
}

/// Write `set` to `dir/<name>.fits` and `dir/<name>.json` (creating `dir`),
/// replacing earlier files atomically (written under temporary names, then renamed).
pub fn write_set(set: &TemplateSet, dir: &Path) -> Result<(), TemplateError> {
    write_set_with(set, dir, None)
}

/// [`write_set`] with generator parameters recorded in the descriptor.
pub fn write_set_with(
    set: &TemplateSet,
    dir: &Path,
    generator: Option<serde_json::Value>,
) -> Result<(), TemplateError> {
    check_set(set)?;
    std::fs::create_dir_all(dir).map_err(|source| TemplateError::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    let fits_name = format!("{}.fits", set.name);
    let fits_path = dir.join(&fits_name);
    // Through the one atomic output path: a temporary file, checked against
    // its own headers, fsynced, renamed over the old one.
    crate::io::atomic::atomic_create(&fits_path, ".fits", |tmp: &Path| {
        write_fits(set, tmp).map_err(Step::Set)
    })
    .map_err(|e| match e {
        Step::Io(source) => TemplateError::Io {
            path: fits_path.clone(),
            source,
        },
        Step::Set(e) => e,
    })?;

    let descriptor = Descriptor {
        format: DESCRIPTOR_FORMAT.to_string(),
        format_version: 1,
        name: set.name.clone(),
        provenance: set.provenance.clone(),
        fits: fits_name,
        templates: set
            .classes
            .iter()
            .flat_map(|c| {
                c.templates.iter().map(move |t| DescriptorEntry {
                    name: t.name.clone(),
                    class: c.class,
                    kind: t.kind,
                    fit_mode: c.mode,
                    loglam0: t.loglam0,
                    dloglam: t.dloglam,
                    n_pixels: t.flux.len(),
                    wave_range: (t.wave(0), t.wave(t.flux.len() - 1)),
                })
            })
            .collect(),
        generator,
    };
    let json_path = dir.join(format!("{}.json", set.name));
    let text = serde_json::to_string_pretty(&descriptor).map_err(|e| TemplateError::BadSet {
        name: set.name.clone(),
        message: e.to_string(),
    })?;
    crate::io::atomic::atomic_write(&json_path, |w| {
        w.write_all(text.as_bytes())?;
        w.write_all(b"\n")
    })
    .map_err(|source| TemplateError::Io {
        path: json_path,
        source,
    })?;
    Ok(())
}

/// A step of writing the set's FITS file: the file system or the set itself.
enum Step {
    Io(std::io::Error),
    Set(TemplateError),
}

impl From<std::io::Error> for Step {
    fn from(e: std::io::Error) -> Self {
        Step::Io(e)
    }
}

fn check_set(set: &TemplateSet) -> Result<(), TemplateError> {
    let bad = |message: String| TemplateError::BadSet {
        name: set.name.clone(),
        message,
    };
    if !valid_name(&set.name) {
        return Err(bad("set names may use letters, digits and - _ . + only".into()));
    }
    let mut seen = std::collections::BTreeSet::new();
    for c in &set.classes {
        for t in &c.templates {
            if !valid_name(&t.name) {
                return Err(bad(format!(
                    "template name '{}' may use letters, digits and - _ . + only",
                    t.name
                )));
            }
            if !seen.insert(t.name.as_str()) {
                return Err(bad(format!("template name '{}' appears twice", t.name)));
            }
            if t.class != c.class {
                return Err(bad(format!(
                    "template '{}' is filed under {} but says {}",
                    t.name, c.class, t.class
                )));
            }
            if t.flux.len() < 2 || !t.dloglam.is_finite() || t.dloglam <= 0.0 || !t.loglam0.is_finite() {
                return Err(bad(format!("template '{}' has no usable grid", t.name)));
            }
        }
    }
    Ok(())
}

fn write_fits(set: &TemplateSet, path: &Path) -> Result<(), TemplateError> {
    let e = fits_err(path);
    let mut f = FitsFile::create(path).open().map_err(&e)?;
    let primary = f.primary_hdu().map_err(&e)?;
    let n: usize = set.classes.iter().map(|c| c.templates.len()).sum();
    primary
        .write_key(&mut f, "SETNAME", set.name.as_str())
        .map_err(&e)?;
    primary.write_key(&mut f, "NTEMPL", n as i64).map_err(&e)?;
    primary.write_key(&mut f, "ORIGIN", "zvet").map_err(&e)?;
    for c in &set.classes {
        for t in &c.templates {
            let data: Vec<f32> = t.flux.iter().map(|&x| x as f32).collect();
            let desc = ImageDescription {
                data_type: ImageType::Float,
                dimensions: &[data.len()],
            };
            let hdu = f.create_image(t.name.clone(), &desc).map_err(&e)?;
            hdu.write_image(&mut f, &data).map_err(&e)?;
            let crval = 10f64.powf(t.loglam0);
            hdu.write_key(&mut f, "TPLCLASS", c.class.as_str()).map_err(&e)?;
            hdu.write_key(&mut f, "TPLKIND", kind_str(t.kind)).map_err(&e)?;
            hdu.write_key(&mut f, "TPLMODE", mode_str(c.mode)).map_err(&e)?;
            hdu.write_key(&mut f, "CTYPE1", "WAVE-LOG").map_err(&e)?;
            hdu.write_key(&mut f, "CUNIT1", "Angstrom").map_err(&e)?;
            hdu.write_key(&mut f, "CRPIX1", 1.0f64).map_err(&e)?;
            hdu.write_key(&mut f, "CRVAL1", crval).map_err(&e)?;
            hdu.write_key(&mut f, "CDELT1", crval * std::f64::consts::LN_10 * t.dloglam)
                .map_err(&e)?;
            hdu.write_key(&mut f, "SPECSYS", "SOURCE").map_err(&e)?;
            hdu.write_key(
                &mut f,
                "LOGLAM0",
                (t.loglam0, "log10 wavelength (Angstrom) of pixel 1"),
            )
            .map_err(&e)?;
            hdu.write_key(
                &mut f,
                "DLOGLAM",
                (t.dloglam, "step in log10 wavelength per pixel"),
            )
            .map_err(&e)?;
        }
    }
    Ok(())
}

/// Read a template set from a `.fits` file, its `.json` descriptor, or a
/// folder holding exactly one set.
pub fn read_set(path: &Path) -> Result<TemplateSet, TemplateError> {
    if path.is_dir() {
        let files = set_files(path)?;
        return match files.as_slice() {
            [one] => read_set(one),
            [] => Err(TemplateError::NotFound {
                path: path.to_path_buf(),
            }),
            _ => Err(TemplateError::Descriptor {
                path: path.to_path_buf(),
                message: format!("the folder holds {} template sets; name one file", files.len()),
            }),
        };
    }
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    match ext.as_deref() {
        Some("json") => {
            let d = read_descriptor(path)?;
            let fits = path.parent().unwrap_or(Path::new(".")).join(&d.fits);
            let mut set = read_fits(&fits)?;
            set.provenance = d.provenance;
            if set.name != d.name {
                return Err(TemplateError::Descriptor {
                    path: path.to_path_buf(),
                    message: format!("names set '{}' but the FITS file holds '{}'", d.name, set.name),
                });
            }
            Ok(set)
        }
        _ => {
            let mut set = read_fits(path)?;
            let json = path.with_extension("json");
            if json.is_file() {
                set.provenance = read_descriptor(&json)?.provenance;
            }
            Ok(set)
        }
    }
}

/// Every template set (`*.fits`) in `dir`, sorted by file name.
pub fn set_files(dir: &Path) -> Result<Vec<PathBuf>, TemplateError> {
    let rd = std::fs::read_dir(dir).map_err(|source| TemplateError::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    let mut v: Vec<PathBuf> = rd
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| {
            p.is_file()
                && p.extension()
                    .and_then(|e| e.to_str())
                    .is_some_and(|e| e.eq_ignore_ascii_case("fits"))
                && !p
                    .file_name()
                    .and_then(|f| f.to_str())
                    .is_some_and(|f| f.starts_with('.'))
        })
        .collect();
    v.sort();
    Ok(v)
}

/// Read and check a JSON descriptor.
pub fn read_descriptor(path: &Path) -> Result<Descriptor, TemplateError> {
    let text = std::fs::read_to_string(path).map_err(|source| TemplateError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let d: Descriptor = serde_json::from_str(&text).map_err(|e| TemplateError::Descriptor {
        path: path.to_path_buf(),
        message: e.to_string(),
    })?;
    if d.format != DESCRIPTOR_FORMAT {
        return Err(TemplateError::Descriptor {
            path: path.to_path_buf(),
            message: format!("format is '{}', expected '{DESCRIPTOR_FORMAT}'", d.format),
        });
    }
    Ok(d)
}

fn read_fits(path: &Path) -> Result<TemplateSet, TemplateError> {
    if !path.is_file() {
        return Err(TemplateError::NotFound {
            path: path.to_path_buf(),
        });
    }
    let e = fits_err(path);
    let mut f = FitsFile::open(path).map_err(&e)?;
    let n_hdu = f.num_hdus().map_err(&e)?;
    let primary = f.primary_hdu().map_err(&e)?;
    let name = primary
        .read_key::<String>(&mut f, "SETNAME")
        .ok()
        .unwrap_or_else(|| {
            path.file_stem()
                .and_then(|s| s.to_str())
                .unwrap_or("user")
                .to_string()
        });
    let mut classes: Vec<ClassTemplates> = Vec::new();
    for i in 1..n_hdu {
        let (t, mode) = read_template(&mut f, path, i)?;
        match classes.iter_mut().find(|c| c.class == t.class) {
            Some(c) => {
                if c.mode != mode {
                    return Err(invalid(
                        path,
                        i,
                        &t.name,
                        "TPLMODE differs from earlier templates of its class",
                    ));
                }
                let step = c.templates[0].dloglam;
                if ((t.dloglam - step) / step).abs() > 1e-9 {
                    let msg = format!("log10 λ step {} differs from {step} of its class", t.dloglam);
                    return Err(invalid(path, i, &t.name, &msg));
                }
                c.templates.push(t);
            }
            None => classes.push(ClassTemplates {
                class: t.class,
                mode,
                templates: vec![t],
            }),
        }
    }
    if classes.is_empty() {
        return Err(TemplateError::NotFound {
            path: path.to_path_buf(),
        });
    }
    Ok(TemplateSet {
        name,
        provenance: format!("read from {}", path.display()),
        classes,
    })
}

fn invalid(path: &Path, hdu: usize, name: &str, message: &str) -> TemplateError {
    TemplateError::Invalid {
        path: path.to_path_buf(),
        hdu,
        name: name.to_string(),
        message: message.to_string(),
    }
}

fn read_template(f: &mut FitsFile, path: &Path, i: usize) -> Result<(Template, FitMode), TemplateError> {
    let e = fits_err(path);
    let hdu = f.hdu(i).map_err(&e)?;
    let name = hdu
        .read_key::<String>(f, "EXTNAME")
        .unwrap_or_else(|_| format!("hdu{i}"));
    let key_str = |f: &mut FitsFile, k: &str| hdu.read_key::<String>(f, k).ok().map(|s| s.trim().to_string());
    let key_f64 = |f: &mut FitsFile, k: &str| hdu.read_key::<f64>(f, k).ok();

    let class: ObjectClass = match key_str(f, "TPLCLASS") {
        Some(s) => s
            .parse()
            .map_err(|err| invalid(path, i, &name, &format!("TPLCLASS: {err}")))?,
        None => {
            return Err(invalid(
                path,
                i,
                &name,
                "keyword TPLCLASS (galaxy, quasar or star) is missing",
            ))
        }
    };
    let kind = match key_str(f, "TPLKIND").map(|s| s.to_ascii_lowercase()).as_deref() {
        Some("emission") => TemplateKind::Emission,
        Some("absorption") | None => TemplateKind::Absorption,
        Some(other) => {
            return Err(invalid(
                path,
                i,
                &name,
                &format!("TPLKIND '{other}' is not emission or absorption"),
            ))
        }
    };
    let mode = match key_str(f, "TPLMODE").map(|s| s.to_ascii_lowercase()).as_deref() {
        Some("basis") => FitMode::Basis,
        Some("each_alone") => FitMode::EachAlone,
        None if class == ObjectClass::Star => FitMode::EachAlone,
        None => FitMode::Basis,
        Some(other) => {
            return Err(invalid(
                path,
                i,
                &name,
                &format!("TPLMODE '{other}' is not basis or each_alone"),
            ))
        }
    };

    let (loglam0, dloglam) = match (key_f64(f, "LOGLAM0"), key_f64(f, "DLOGLAM")) {
        (Some(a), Some(b)) => (a, b),
        _ => wcs_log_grid(f, &hdu).map_err(|m| invalid(path, i, &name, &m))?,
    };
    if !(loglam0.is_finite() && dloglam.is_finite() && dloglam > 0.0) {
        return Err(invalid(path, i, &name, "wavelength grid is not increasing"));
    }

    let flux: Vec<f64> = match &hdu.info {
        fitsio::hdu::HduInfo::ImageInfo { shape, .. } if shape.len() == 1 && shape[0] >= 2 => {
            hdu.read_image(f).map_err(&e)?
        }
        _ => return Err(invalid(path, i, &name, "not a 1-D image of at least 2 pixels")),
    };
    if let Some(p) = flux.iter().position(|x| !x.is_finite()) {
        return Err(invalid(
            path,
            i,
            &name,
            &format!("non-finite value at pixel {}", p + 1),
        ));
    }
    Ok((
        Template {
            name,
            class,
            kind,
            loglam0,
            dloglam,
            flux,
        },
        mode,
    ))
}

/// log10 grid from a `WAVE-LOG` spectral WCS (FITS WCS Paper III, §5.1.2:
/// λ = CRVAL · exp(CDELT · (p − CRPIX) / CRVAL)).
fn wcs_log_grid(f: &mut FitsFile, hdu: &fitsio::hdu::FitsHdu) -> Result<(f64, f64), String> {
    let ctype = hdu
        .read_key::<String>(f, "CTYPE1")
        .map_err(|_| "no LOGLAM0/DLOGLAM and no CTYPE1".to_string())?;
    if ctype.trim() != "WAVE-LOG" {
        return Err(format!(
            "CTYPE1 '{}' is not 'WAVE-LOG' and LOGLAM0/DLOGLAM are missing",
            ctype.trim()
        ));
    }
    let crval = hdu
        .read_key::<f64>(f, "CRVAL1")
        .map_err(|_| "CRVAL1 missing".to_string())?;
    let cdelt = hdu
        .read_key::<f64>(f, "CDELT1")
        .or_else(|_| hdu.read_key::<f64>(f, "CD1_1"))
        .map_err(|_| "CDELT1 (or CD1_1) missing".to_string())?;
    let crpix = hdu.read_key::<f64>(f, "CRPIX1").unwrap_or(1.0);
    let unit = hdu
        .read_key::<String>(f, "CUNIT1")
        .unwrap_or_else(|_| "Angstrom".into());
    let scale = match unit.trim() {
        "Angstrom" | "angstrom" | "Angstroms" | "A" | "" => 1.0,
        "nm" => 10.0,
        "um" => 1e4,
        "m" => 1e10,
        other => return Err(format!("CUNIT1 '{other}' is not a wavelength unit we know")),
    };
    if !crval.is_finite() || crval <= 0.0 {
        return Err("CRVAL1 must be positive".into());
    }
    let dloglam = cdelt / (crval * std::f64::consts::LN_10);
    let loglam0 = (crval * scale).log10() + dloglam * (1.0 - crpix);
    Ok((loglam0, dloglam))
}
