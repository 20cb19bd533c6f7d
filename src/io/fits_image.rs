/*!
FITS 1-D images with a spectral WCS (the FITS WCS standard, Paper III on
spectral coordinates: A&A 446, 747, 2006).

Pixel p (1-based) has wavelength
- linear (`CTYPE1` = `WAVE`, `AWAV`, `LINEAR` or absent):
  λ = CRVAL1 + s·(p − CRPIX1);
- `WAVE-LOG` / `AWAV-LOG` (Paper III eq. 5): λ = CRVAL1 · exp(s·(p − CRPIX1) / CRVAL1);
- `DC-FLAG = 1` (the log-linear convention of long-slit reduction packages):
  log10 λ = CRVAL1 + s·(p − CRPIX1);

with the step s = `CD1_1`, else `CDELT1`·`PC1_1` (PC1_1 default 1), `CRPIX1`
default 1, and the unit from `CUNIT1` (Å, nm, µm, m; absent = Å, common
practice). `CTYPE1` starting `AWAV` (or `AIRORVAC = 'air'`) means air.

A small stack of bands (NAXIS2…, at most 8 rows) whose rows are named by
`BANDIDn` keywords is one spectrum: the first band not named like an
uncertainty or sky is the flux, a band named `sigma`/`error` (or `variance`,
`ivar`) its uncertainty.

Companion HDUs are recognised by EXTNAME (the same synonym lists as table
columns: IVAR…, ERROR/SIGMA…, VAR…, MASK/QUALITY…, WAVE… for an explicit
wavelength array); each flux image takes the nearest companion of each kind
that follows it, else the first in the file.
*/
use super::fits_common::{header_facts, key_f64, key_i64, key_string, HduKind, HduSummary, OpenFits, Source};
use super::{synonyms, unit_to_angstrom, ErrKind, LoadError, Loc, RawSpectrum, ReadOptions, WaveScale};
use crate::spectrum::{Spectrum, SpectrumMeta};
use fitsio::FitsFile;

/// CTYPE1 values of a wavelength axis (empty = not given, taken as linear λ).
const SPECTRAL_CTYPES: &[&str] = &[
    "",
    "WAVE",
    "AWAV",
    "LINEAR",
    "WAVELENGTH",
    "LAMBDA",
    "WAVE-LOG",
    "AWAV-LOG",
];

/// What a companion image holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Role {
    Err(ErrKind),
    Mask,
    Wave(WaveScale),
}

/// The role of an image HDU from its EXTNAME; `None` = a flux image.
fn role_of(name: Option<&str>) -> Option<Role> {
    let l = name?.trim().to_ascii_lowercase();
    let l = l.as_str();
    let has = |list: &[&str]| list.contains(&l);
    if has(synonyms::IVAR) {
        Some(Role::Err(ErrKind::Ivar))
    } else if has(synonyms::ERR) || has(&["errors", "errs", "sigma_flux", "uncert"]) {
        Some(Role::Err(ErrKind::Sigma))
    } else if has(synonyms::VAR) {
        Some(Role::Err(ErrKind::Variance))
    } else if has(synonyms::MASK) {
        Some(Role::Mask)
    } else if has(synonyms::WAVE) {
        Some(Role::Wave(WaveScale::Linear))
    } else if has(synonyms::LOG10_WAVE) {
        Some(Role::Wave(WaveScale::Log10))
    } else if has(synonyms::LN_WAVE) {
        Some(Role::Wave(WaveScale::Ln))
    } else {
        None
    }
}

/// Number of pixels of a 1-D image (one axis longer than 1), else `None`.
fn pixels(shape: &[usize]) -> Option<usize> {
    let long: Vec<usize> = shape.iter().copied().filter(|&n| n > 1).collect();
    (long.len() == 1 && shape.iter().all(|&n| n >= 1)).then(|| long[0])
}

/// A 1-D image spectrum and where its companions are.
#[derive(Debug, Clone)]
pub(crate) struct ImagePlan {
    pub loc: Loc,
    pub hdu: usize,
    pub n: usize,
    pub id: String,
    /// Several bands (rows) of one spectrum in this image.
    pub bands: Option<Bands>,
    pub err: Option<(usize, ErrKind)>,
    pub mask: Option<usize>,
    pub wave: Option<(usize, WaveScale)>,
    pub warnings: Vec<String>,
}

/// Is HDU `h` a 1-D flux image? (`Ok(None)` = not a spectrum, skip it;
/// `forced` = the user chose this HDU, so say why it is not.)
pub(crate) fn plan(
    f: &mut FitsFile,
    fits: &OpenFits,
    h: &HduSummary,
    _opts: &ReadOptions,
    forced: bool,
) -> Result<Option<Source>, LoadError> {
    let HduKind::Image { shape } = &h.kind else {
        return Ok(None);
    };
    let loc = h.loc();
    let (n, bands) = match pixels(shape) {
        Some(n) => (n, None),
        None => match band_layout(f, fits, h, shape)? {
            Some((n, b)) => (n, Some(b)),
            None if forced => {
                return Err(LoadError::BadHdu {
                    at: loc,
                    reason: format!(
                        "image of shape {shape:?} is neither one-dimensional nor a stack of bands named by BANDIDn"
                    ),
                })
            }
            None => return Ok(None),
        },
    };
    if !forced && role_of(h.name.as_deref()).is_some() {
        return Ok(None);
    }
    if n as u64 > super::MAX_PIXELS {
        return Err(LoadError::TooLarge(format!(
            "{loc}: an image of {n} pixels (zvet reads spectra of at most {} pixels)",
            super::MAX_PIXELS
        )));
    }
    // The nearest companion of each role after this HDU, before the next
    // flux image; else the first anywhere.
    let images: Vec<&HduSummary> = fits
        .hdus
        .iter()
        .filter(|o| o.index != h.index && matches!(o.kind, HduKind::Image { .. }))
        .collect();
    let pick = |want: &dyn Fn(Role) -> bool| -> Option<(usize, Role)> {
        let mut after = None;
        for o in images.iter().filter(|o| o.index > h.index) {
            match role_of(o.name.as_deref()) {
                None if o_is_1d(o) => break,
                Some(r) if want(r) => {
                    after = Some((o.index, r));
                    break;
                }
                _ => {}
            }
        }
        after.or_else(|| {
            images.iter().find_map(|o| {
                role_of(o.name.as_deref())
                    .filter(|r| want(*r))
                    .map(|r| (o.index, r))
            })
        })
    };
    let err = pick(&|r| matches!(r, Role::Err(_))).and_then(|(i, r)| match r {
        Role::Err(k) => Some((i, k)),
        _ => None,
    });
    let mask = pick(&|r| r == Role::Mask).map(|(i, _)| i);
    let wave = pick(&|r| matches!(r, Role::Wave(_))).and_then(|(i, r)| match r {
        Role::Wave(s) => Some((i, s)),
        _ => None,
    });
    let hdu = f.hdu(h.index).map_err(|e| fits.err(e, loc.clone()))?;
    // Without a wavelength HDU, an image needs a spectral axis to be a
    // spectrum; other 1-D images (unless chosen with --hdu) are skipped.
    if !forced && wave.is_none() {
        let ctype = key_string(f, &hdu, "CTYPE1")
            .unwrap_or_default()
            .to_ascii_uppercase();
        if key_f64(f, &hdu, "CRVAL1").is_none() || !SPECTRAL_CTYPES.contains(&ctype.as_str()) {
            return Ok(None);
        }
    }
    let facts = header_facts(f, &hdu);
    let id = facts
        .id
        .or_else(|| fits.primary.id.clone())
        .unwrap_or_else(|| fits.stem.clone());
    Ok(Some(Source::Image(Box::new(ImagePlan {
        loc,
        hdu: h.index,
        n,
        id,
        bands,
        err,
        mask,
        wave,
        warnings: Vec::new(),
    }))))
}

/// Rows of an image that hold one spectrum's bands (flux, σ, …), named by
/// `BANDIDn` keywords (n = 1-based band; a convention of long-slit reduction
/// packages).
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct Bands {
    pub count: usize,
    pub flux: usize,
    pub err: Option<(usize, ErrKind)>,
}

/// Most bands a stack may have to be read as one spectrum.
const MAX_BANDS: usize = 8;

/// `(pixels, bands)` when the image is a small stack of bands with BANDIDn keywords.
fn band_layout(
    f: &mut FitsFile,
    fits: &OpenFits,
    h: &HduSummary,
    shape: &[usize],
) -> Result<Option<(usize, Bands)>, LoadError> {
    let (Some(&n), true) = (shape.last(), shape.len() >= 2) else {
        return Ok(None);
    };
    let count: usize = shape[..shape.len() - 1].iter().product();
    if !(2..=MAX_BANDS).contains(&count) || n <= count {
        return Ok(None);
    }
    let hdu = f.hdu(h.index).map_err(|e| fits.err(e, h.loc()))?;
    let ids: Vec<String> = (1..=count)
        .map(|k| {
            key_string(f, &hdu, &format!("BANDID{k}"))
                .unwrap_or_default()
                .to_ascii_lowercase()
        })
        .collect();
    if ids.iter().all(|s| s.is_empty()) {
        return Ok(None);
    }
    let kind = |s: &str| {
        if s.contains("ivar") || s.contains("inverse variance") {
            Some(ErrKind::Ivar)
        } else if s.contains("sigma") || s.contains("error") || s.contains("uncert") {
            Some(ErrKind::Sigma)
        } else if s.contains("variance") {
            Some(ErrKind::Variance)
        } else {
            None
        }
    };
    let err = ids.iter().enumerate().find_map(|(i, s)| kind(s).map(|k| (i, k)));
    let flux = ids
        .iter()
        .position(|s| kind(s).is_none() && !s.contains("sky") && !s.contains("background"))
        .unwrap_or(0);
    Ok(Some((n, Bands { count, flux, err })))
}

fn o_is_1d(o: &HduSummary) -> bool {
    matches!(&o.kind, HduKind::Image { shape } if pixels(shape).is_some())
}

/// Read the pixels of image HDU `index` as f64 (BSCALE/BZERO applied by the library).
fn read_pixels(f: &mut FitsFile, fits: &OpenFits, index: usize, what: &str) -> Result<Vec<f64>, LoadError> {
    let hdu = f.hdu(index).map_err(|e| fits.err(e, Loc::hdu(index, None)))?;
    let loc = Loc::hdu(index, key_string(f, &hdu, "EXTNAME"));
    match &hdu.info {
        fitsio::hdu::HduInfo::ImageInfo { shape, .. }
            if pixels(shape).is_some_and(|n| n as u64 > super::MAX_PIXELS) =>
        {
            return Err(LoadError::TooLarge(format!(
                "{loc}: the {what} HDU has {} pixels (zvet reads spectra of at most {})",
                pixels(shape).unwrap_or(0),
                super::MAX_PIXELS
            )))
        }
        fitsio::hdu::HduInfo::ImageInfo { shape, .. } if pixels(shape).is_some() => {}
        _ => {
            return Err(LoadError::BadHdu {
                at: loc,
                reason: format!("the {what} HDU is not a 1-D image"),
            })
        }
    }
    hdu.read_image::<Vec<f64>>(f).map_err(|e| fits.err(e, loc))
}

/// Wavelengths (Å, in the file's medium) of an image from its WCS keywords.
fn wcs_wave(
    f: &mut FitsFile,
    hdu: &fitsio::hdu::FitsHdu,
    n: usize,
    loc: &Loc,
) -> Result<(Vec<f64>, bool), LoadError> {
    let bad = |reason: String| LoadError::BadWcs {
        at: loc.clone(),
        reason,
    };
    let ctype = key_string(f, hdu, "CTYPE1")
        .unwrap_or_default()
        .to_ascii_uppercase();
    let (air, log_wcs) = wavelength_axis(&ctype).map_err(bad)?;
    let Some(crval) = key_f64(f, hdu, "CRVAL1") else {
        return Err(bad("no CRVAL1 (and no wavelength HDU)".into()));
    };
    let step = match key_f64(f, hdu, "CD1_1") {
        Some(cd) => cd,
        None => match key_f64(f, hdu, "CDELT1") {
            Some(d) => d * key_f64(f, hdu, "PC1_1").unwrap_or(1.0),
            None => return Err(bad("neither CDELT1 nor CD1_1 gives the pixel step".into())),
        },
    };
    if step == 0.0 {
        return Err(bad("the pixel step (CDELT1/CD1_1) is 0".into()));
    }
    let crpix = key_f64(f, hdu, "CRPIX1").unwrap_or(1.0);
    let unit = key_string(f, hdu, "CUNIT1").unwrap_or_default();
    let Some(to_aa) = unit_to_angstrom(&unit) else {
        return Err(LoadError::UnknownUnit {
            at: loc.clone(),
            keyword: "CUNIT1".into(),
            unit,
        });
    };
    let dc_log = key_i64(f, hdu, "DC-FLAG") == Some(1);
    if log_wcs && crval <= 0.0 {
        return Err(bad("WAVE-LOG needs CRVAL1 > 0".into()));
    }
    let wave = (1..=n)
        .map(|p| {
            let x = p as f64 - crpix;
            let v = if log_wcs {
                crval * (step * x / crval).exp()
            } else if dc_log {
                10f64.powf(crval + step * x)
            } else {
                crval + step * x
            };
            v * to_aa
        })
        .collect();
    Ok((wave, air))
}

/// Read the spectrum an [`ImagePlan`] describes.
pub(crate) fn read(
    f: &mut FitsFile,
    fits: &OpenFits,
    p: &ImagePlan,
    opts: &ReadOptions,
) -> Result<Spectrum, LoadError> {
    let hdu = f.hdu(p.hdu).map_err(|e| fits.err(e, p.loc.clone()))?;
    let facts = header_facts(f, &hdu);
    let mut flux = hdu
        .read_image::<Vec<f64>>(f)
        .map_err(|e| fits.err(e, p.loc.clone()))?;
    let mut band_ivar = None;
    if let Some(b) = &p.bands {
        if flux.len() != b.count * p.n {
            return Err(LoadError::LengthMismatch {
                at: p.loc.clone(),
                detail: format!("{} values for {} bands of {} pixels", flux.len(), b.count, p.n),
            });
        }
        if let Some((row, kind)) = b.err {
            band_ivar = Some(kind.to_ivar(&flux[row * p.n..(row + 1) * p.n]));
        }
        flux = flux[b.flux * p.n..(b.flux + 1) * p.n].to_vec();
    }
    let (wave, mut air) = match p.wave {
        Some((i, scale)) => {
            let w = read_pixels(f, fits, i, "wavelength")?;
            let wh = f.hdu(i).map_err(|e| fits.err(e, Loc::hdu(i, None)))?;
            let unit = key_string(f, &wh, "BUNIT")
                .or_else(|| key_string(f, &wh, "CUNIT1"))
                .unwrap_or_default();
            let Some(to_aa) = unit_to_angstrom(&unit) else {
                return Err(LoadError::UnknownUnit {
                    at: Loc::hdu(i, None),
                    keyword: "BUNIT".into(),
                    unit,
                });
            };
            (w.into_iter().map(|v| scale.apply(v) * to_aa).collect(), false)
        }
        None => wcs_wave(f, &hdu, p.n, &p.loc)?,
    };
    air |= opts.air || facts.air || fits.primary.air;
    let check = |what: &str, len: usize| {
        if len == flux.len() {
            Ok(())
        } else {
            Err(LoadError::LengthMismatch {
                at: p.loc.clone(),
                detail: format!("flux has {} pixels, {what} {len}", flux.len()),
            })
        }
    };
    check("wavelength", wave.len())?;
    let ivar = match p.err {
        _ if band_ivar.is_some() => band_ivar,
        Some((i, kind)) => {
            let v = read_pixels(f, fits, i, "uncertainty")?;
            check("uncertainty HDU", v.len())?;
            Some(kind.to_ivar(&v))
        }
        None => None,
    };
    let bad = match p.mask {
        Some(i) => {
            let v = read_pixels(f, fits, i, "mask")?;
            check("mask HDU", v.len())?;
            Some(v.iter().map(|m| *m != 0.0).collect())
        }
        None => None,
    };
    let meta = SpectrumMeta {
        id: p.id.clone(),
        source: Some(fits.path.clone()),
        hdu: Some(p.hdu),
        row: None,
        ra: facts.ra.or(fits.primary.ra),
        dec: facts.dec.or(fits.primary.dec),
        flux_unit: facts.flux_unit.or_else(|| fits.primary.flux_unit.clone()),
        warnings: p.warnings.clone(),
        ..Default::default()
    };
    RawSpectrum {
        wave,
        flux,
        ivar,
        bad,
        air,
        meta,
    }
    .finish(p.loc.clone())
}

/// What a spectral CTYPE1 says: (air wavelengths, logarithmic axis). An
/// empty CTYPE1 is a linear vacuum axis; anything not a wavelength axis is
/// the reason it cannot be used.
pub(crate) fn wavelength_axis(ctype: &str) -> Result<(bool, bool), String> {
    match ctype {
        "" | "WAVE" | "LINEAR" | "WAVELENGTH" | "LAMBDA" => Ok((false, false)),
        "AWAV" => Ok((true, false)),
        "WAVE-LOG" => Ok((false, true)),
        "AWAV-LOG" => Ok((true, true)),
        other => Err(format!(
            "CTYPE1 = '{other}' is not a wavelength axis (expected WAVE, AWAV, WAVE-LOG or AWAV-LOG)"
        )),
    }
}
