/*!
FITS binary tables in the two common shapes:

- **one pixel per row**: scalar columns (wavelength, flux, uncertainty,
  mask); the whole table is one spectrum;
- **one object per row**: vector columns (`TFORM` like `3000E`), every row a
  spectrum; read row by row so memory stays bounded by one object.

Columns are found by the case-insensitive synonym lists in
[`super::synonyms`] or by the names in [`ReadOptions`]. The wavelength may be
linear, log10 (names like `loglam`, or a `log(...)` unit) or natural log
(names starting `ln`); its unit comes from `TUNITn` (absent = Å). A `TUCDn`
containing `obs.atmos` (IVOA UCD `em.wl;obs.atmos`) means air wavelengths.
Inverse variance is preferred to σ, σ to variance. The object id is the id
column, else the header's OBJECT (…) keyword, else the file stem; rows of a
multi-object table without an id column get `#row` appended.
*/
use super::fits_common::{header_facts, key_string, HduKind, HduSummary, OpenFits, Source};
use super::{
    find_name, synonyms, tried, unit_to_angstrom, ErrKind, LoadError, Loc, RawSpectrum, ReadOptions,
    WaveScale,
};
use crate::spectrum::{Spectrum, SpectrumMeta};
use fitsio::hdu::FitsHdu;
use fitsio::tables::{ColumnDataType, ConcreteColumnDescription};
use fitsio::FitsFile;

/// A resolved column.
#[derive(Debug, Clone)]
pub(crate) struct Col {
    /// Name exactly as in the file (the library matches names exactly).
    pub name: String,
    pub repeat: usize,
}

/// Things every spectrum of the table shares.
#[derive(Debug, Clone)]
pub(crate) struct Base {
    pub id: String,
    pub flux_unit: Option<String>,
    pub ra: Option<f64>,
    pub dec: Option<f64>,
    pub air: bool,
    pub warnings: Vec<String>,
}

/// How to read one table HDU.
#[derive(Debug, Clone)]
pub(crate) struct TablePlan {
    pub loc: Loc,
    pub hdu: usize,
    pub nrows: usize,
    pub wave: Col,
    pub scale: WaveScale,
    pub to_aa: f64,
    pub flux: Col,
    pub err: Option<(Col, ErrKind)>,
    pub mask: Option<Col>,
    /// A sky column of the flux's shape, if any (an unusable one is ignored).
    pub sky: Option<Col>,
    pub id_col: Option<(Col, bool)>,
    pub ra_col: Option<Col>,
    pub dec_col: Option<Col>,
    pub base: Base,
}

fn is_numeric(t: ColumnDataType) -> bool {
    !matches!(
        t,
        ColumnDataType::Logical | ColumnDataType::Bit | ColumnDataType::Text | ColumnDataType::String
    )
}

fn type_name(t: ColumnDataType) -> String {
    match t {
        ColumnDataType::Text | ColumnDataType::String => "text".into(),
        ColumnDataType::Logical => "logical values".into(),
        ColumnDataType::Bit => "bits".into(),
        other => format!("{other:?}"),
    }
}

fn names(cols: &[ConcreteColumnDescription]) -> Vec<String> {
    cols.iter().map(|c| c.name.clone()).collect()
}

/// Is HDU `h` a spectrum table? `Ok(None)` when its columns do not name a
/// wavelength and a flux (skip it); errors for a table that does but cannot
/// be read (wrong types, no rows, unknown unit, inconsistent vector lengths).
pub(crate) fn plan(
    f: &mut FitsFile,
    fits: &OpenFits,
    h: &HduSummary,
    opts: &ReadOptions,
    forced: bool,
) -> Result<Option<Source>, LoadError> {
    let HduKind::Table { cols, nrows } = &h.kind else {
        return Ok(None);
    };
    let loc = h.loc();
    let ns = names(cols);
    let wave_syn: &[&[&str]] = &[synonyms::WAVE, synonyms::LOG10_WAVE, synonyms::LN_WAVE];
    let wi = find_name(&ns, opts.wave_col.as_deref(), wave_syn);
    let fi = find_name(&ns, opts.flux_col.as_deref(), &[synonyms::FLUX]);
    let (Some(wi), Some(fi)) = (wi, fi) else {
        if forced {
            if let Some(e) = explain_miss(h, opts) {
                return Err(e);
            }
        }
        return Ok(None);
    };
    let numeric = |i: usize, role: &'static str| -> Result<Col, LoadError> {
        let c = &cols[i];
        if !is_numeric(c.data_type.typ) {
            return Err(LoadError::ColumnType {
                at: loc.clone(),
                column: c.name.clone(),
                role,
                found: type_name(c.data_type.typ),
            });
        }
        Ok(Col {
            name: c.name.clone(),
            repeat: c.data_type.repeat,
        })
    };
    let wave = numeric(wi, "wavelength")?;
    let flux = numeric(fi, "flux")?;
    let err = if let Some(n) = opts.ivar_col.as_deref() {
        Some((n, ErrKind::Ivar))
    } else {
        opts.err_col.as_deref().map(|n| (n, ErrKind::Sigma))
    };
    let err = match err {
        Some((n, kind)) => match find_name(&ns, Some(n), &[]) {
            Some(i) => Some((numeric(i, "uncertainty")?, kind)),
            None => {
                return Err(LoadError::MissingColumn {
                    at: loc,
                    role: "uncertainty",
                    tried: tried(Some(n), &[]),
                    flag: if kind == ErrKind::Ivar {
                        "ivar-col"
                    } else {
                        "err-col"
                    },
                })
            }
        },
        None => {
            let found = [
                (synonyms::IVAR, ErrKind::Ivar),
                (synonyms::ERR, ErrKind::Sigma),
                (synonyms::VAR, ErrKind::Variance),
            ]
            .iter()
            .find_map(|(syn, k)| find_name(&ns, None, &[syn]).map(|i| (i, *k)));
            match found {
                Some((i, k)) => Some((numeric(i, "uncertainty")?, k)),
                None => None,
            }
        }
    };
    let mask = match find_name(&ns, opts.mask_col.as_deref(), &[synonyms::MASK]) {
        Some(i) => Some(numeric(i, "mask")?),
        None if opts.mask_col.is_some() => {
            return Err(LoadError::MissingColumn {
                at: loc,
                role: "mask",
                tried: tried(opts.mask_col.as_deref(), &[]),
                flag: "mask-col",
            })
        }
        None => None,
    };
    if *nrows == 0 {
        return Err(LoadError::EmptyTable { at: loc });
    }
    let sky = find_name(&ns, None, &[synonyms::SKY])
        .filter(|&i| is_numeric(cols[i].data_type.typ) && cols[i].data_type.repeat == flux.repeat)
        .map(|i| Col {
            name: cols[i].name.clone(),
            repeat: cols[i].data_type.repeat,
        });
    // Vector shape: the flux holds several values per row.
    let vector = flux.repeat > 1;
    let per_row = if vector { flux.repeat } else { 1 };
    let pixels = if vector { per_row } else { *nrows };
    if pixels as u64 > super::MAX_PIXELS {
        return Err(LoadError::TooLarge(format!(
            "{loc}: a spectrum of {pixels} pixels (zvet reads spectra of at most {} pixels)",
            super::MAX_PIXELS
        )));
    }
    for (what, c) in [
        ("wavelength", Some(&wave)),
        ("uncertainty", err.as_ref().map(|e| &e.0)),
        ("mask", mask.as_ref()),
    ] {
        if let Some(c) = c {
            if c.repeat != per_row {
                return Err(LoadError::LengthMismatch {
                    at: loc,
                    detail: format!(
                        "flux column '{}' has {} value(s) per row, {what} column '{}' has {}",
                        flux.name, per_row, c.name, c.repeat
                    ),
                });
            }
        }
    }
    // Wavelength encoding, unit and medium.
    let hdu = f.hdu(h.index).map_err(|e| fits.err(e, loc.clone()))?;
    let wn = wi + 1;
    let tunit = key_string(f, &hdu, &format!("TUNIT{wn}")).unwrap_or_default();
    let mut scale = WaveScale::from_name(&wave.name);
    if tunit.to_ascii_lowercase().starts_with("log(") || tunit.eq_ignore_ascii_case("dex") {
        scale = WaveScale::Log10;
    }
    let unit_for_factor = if tunit.eq_ignore_ascii_case("dex") {
        ""
    } else {
        tunit.as_str()
    };
    let Some(to_aa) = unit_to_angstrom(unit_for_factor) else {
        return Err(LoadError::UnknownUnit {
            at: loc,
            keyword: format!("TUNIT{wn}"),
            unit: tunit,
        });
    };
    let ucd_air = key_string(f, &hdu, &format!("TUCD{wn}"))
        .is_some_and(|u| u.to_ascii_lowercase().contains("obs.atmos"));
    let facts = header_facts(f, &hdu);
    let flux_unit = key_string(f, &hdu, &format!("TUNIT{}", fi + 1))
        .or(facts.flux_unit)
        .or_else(|| fits.primary.flux_unit.clone());
    let air = opts.air || ucd_air || facts.air || fits.primary.air;
    let id = facts
        .id
        .or_else(|| fits.primary.id.clone())
        .unwrap_or_else(|| fits.stem.clone());
    // Per-row id and position for multi-object tables.
    let (id_col, ra_col, dec_col) = if vector {
        let id_col = match find_name(&ns, opts.id_col.as_deref(), &[synonyms::ID]) {
            Some(i) => {
                let c = &cols[i];
                let text = matches!(c.data_type.typ, ColumnDataType::Text | ColumnDataType::String);
                if !text && !is_numeric(c.data_type.typ) {
                    return Err(LoadError::ColumnType {
                        at: loc,
                        column: c.name.clone(),
                        role: "id",
                        found: type_name(c.data_type.typ),
                    });
                }
                Some((
                    Col {
                        name: c.name.clone(),
                        repeat: c.data_type.repeat,
                    },
                    text,
                ))
            }
            None if opts.id_col.is_some() => {
                return Err(LoadError::MissingColumn {
                    at: loc,
                    role: "id",
                    tried: tried(opts.id_col.as_deref(), &[]),
                    flag: "id-col",
                })
            }
            None => None,
        };
        let scalar = |syn: &[&str]| {
            find_name(&ns, None, &[syn])
                .filter(|&i| is_numeric(cols[i].data_type.typ) && cols[i].data_type.repeat == 1)
                .map(|i| Col {
                    name: cols[i].name.clone(),
                    repeat: 1,
                })
        };
        (id_col, scalar(synonyms::RA), scalar(synonyms::DEC))
    } else {
        (None, None, None)
    };
    let plan = TablePlan {
        loc,
        hdu: h.index,
        nrows: *nrows,
        wave,
        scale,
        to_aa,
        flux,
        err,
        mask,
        sky,
        id_col,
        ra_col,
        dec_col,
        base: Base {
            id,
            flux_unit,
            ra: facts.ra.or(fits.primary.ra),
            dec: facts.dec.or(fits.primary.dec),
            air,
            warnings: Vec::new(),
        },
    };
    Ok(Some(if vector {
        Source::VectorTable(Box::new(plan))
    } else {
        Source::PixelTable(Box::new(plan))
    }))
}

/// The error for a table that lacks a wavelength or flux column (`None` if it has both).
pub(crate) fn explain_miss(h: &HduSummary, opts: &ReadOptions) -> Option<LoadError> {
    let HduKind::Table { cols, .. } = &h.kind else {
        return None;
    };
    let ns = names(cols);
    let wave_syn: &[&[&str]] = &[synonyms::WAVE, synonyms::LOG10_WAVE, synonyms::LN_WAVE];
    if find_name(&ns, opts.wave_col.as_deref(), wave_syn).is_none() {
        return Some(LoadError::MissingColumn {
            at: h.loc(),
            role: "wavelength",
            tried: tried(opts.wave_col.as_deref(), wave_syn),
            flag: "wave-col",
        });
    }
    if find_name(&ns, opts.flux_col.as_deref(), &[synonyms::FLUX]).is_none() {
        return Some(LoadError::MissingColumn {
            at: h.loc(),
            role: "flux",
            tried: tried(opts.flux_col.as_deref(), &[synonyms::FLUX]),
            flag: "flux-col",
        });
    }
    None
}

/// Read rows `range` of a numeric column as f64 (TSCAL/TZERO applied by the library).
fn col_f64(
    f: &mut FitsFile,
    fits: &OpenFits,
    hdu: &FitsHdu,
    c: &Col,
    range: std::ops::Range<usize>,
    at: &Loc,
) -> Result<Vec<f64>, LoadError> {
    hdu.read_col_range::<f64>(f, &c.name, &range)
        .map_err(|e| fits.err(e, at.clone()))
}

/// Build the raw arrays of one spectrum from the columns over `range`.
fn assemble(
    f: &mut FitsFile,
    fits: &OpenFits,
    p: &TablePlan,
    range: std::ops::Range<usize>,
    at: &Loc,
) -> Result<RawSpectrum, LoadError> {
    let hdu = &f.hdu(p.hdu).map_err(|e| fits.err(e, at.clone()))?;
    let wave: Vec<f64> = col_f64(f, fits, hdu, &p.wave, range.clone(), at)?
        .into_iter()
        .map(|v| p.scale.apply(v) * p.to_aa)
        .collect();
    let flux = col_f64(f, fits, hdu, &p.flux, range.clone(), at)?;
    let ivar = match &p.err {
        Some((c, kind)) => Some(kind.to_ivar(&col_f64(f, fits, hdu, c, range.clone(), at)?)),
        None => None,
    };
    let sky = match &p.sky {
        Some(c) => Some(col_f64(f, fits, hdu, c, range.clone(), at)?),
        None => None,
    };
    let bad = match &p.mask {
        Some(c) => Some(
            col_f64(f, fits, hdu, c, range, at)?
                .iter()
                .map(|m| *m != 0.0)
                .collect(),
        ),
        None => None,
    };
    Ok(RawSpectrum {
        wave,
        flux,
        ivar,
        bad,
        air: p.base.air,
        meta: SpectrumMeta {
            id: p.base.id.clone(),
            source: Some(fits.path.clone()),
            hdu: Some(p.hdu),
            row: None,
            ra: p.base.ra,
            dec: p.base.dec,
            flux_unit: p.base.flux_unit.clone(),
            warnings: p.base.warnings.clone(),
            sky,
            ..Default::default()
        },
    })
}

/// Read a one-pixel-per-row table as one spectrum.
pub(crate) fn read_pixel_table(
    f: &mut FitsFile,
    fits: &OpenFits,
    p: &TablePlan,
    _opts: &ReadOptions,
) -> Result<Spectrum, LoadError> {
    let raw = assemble(f, fits, p, 0..p.nrows, &p.loc)?;
    raw.finish(p.loc.clone())
}

/// The id of every row of a one-object-per-row table, as [`read_row`] gives
/// it, reading only the id column.
pub(crate) fn read_ids(f: &mut FitsFile, fits: &OpenFits, p: &TablePlan) -> Result<Vec<String>, LoadError> {
    let hdu = f.hdu(p.hdu).map_err(|e| fits.err(e, p.loc.clone()))?;
    let all = 0..p.nrows;
    let raw: Vec<Option<String>> = match &p.id_col {
        Some((c, true)) => hdu
            .read_col_range::<String>(f, &c.name, &all)
            .map_err(|e| fits.err(e, p.loc.clone()))?
            .into_iter()
            .map(|s| Some(s.trim().to_string()))
            .collect(),
        Some((c, false)) => hdu
            .read_col_range::<i64>(f, &c.name, &all)
            .map_err(|e| fits.err(e, p.loc.clone()))?
            .into_iter()
            .map(|v| Some(v.to_string()))
            .collect(),
        None => vec![None; p.nrows],
    };
    Ok(raw
        .into_iter()
        .enumerate()
        .map(|(row, id)| match id.filter(|s| !s.is_empty()) {
            Some(id) => id,
            None if p.nrows == 1 => p.base.id.clone(),
            None => format!("{}#{row}", p.base.id),
        })
        .collect())
}

/// Read row `row` of a one-object-per-row table.
pub(crate) fn read_row(
    f: &mut FitsFile,
    fits: &OpenFits,
    p: &TablePlan,
    row: usize,
    _opts: &ReadOptions,
) -> Result<Spectrum, LoadError> {
    let at = p.loc.with_row(row);
    let mut raw = assemble(f, fits, p, row..row + 1, &at)?;
    raw.meta.row = Some(row);
    let hdu = f.hdu(p.hdu).map_err(|e| fits.err(e, at.clone()))?;
    let id = match &p.id_col {
        Some((c, true)) => hdu
            .read_col_range::<String>(f, &c.name, &(row..row + 1))
            .map_err(|e| fits.err(e, at.clone()))?
            .into_iter()
            .next()
            .map(|s| s.trim().to_string()),
        Some((c, false)) => hdu
            .read_col_range::<i64>(f, &c.name, &(row..row + 1))
            .map_err(|e| fits.err(e, at.clone()))?
            .first()
            .map(|v| v.to_string()),
        None => None,
    };
    raw.meta.id = match id.filter(|s| !s.is_empty()) {
        Some(id) => id,
        None if p.nrows == 1 => p.base.id.clone(),
        None => format!("{}#{row}", p.base.id),
    };
    if let Some(c) = &p.ra_col {
        raw.meta.ra = col_f64(f, fits, &hdu, c, row..row + 1, &at)?
            .first()
            .copied()
            .filter(|v| v.is_finite());
    }
    if let Some(c) = &p.dec_col {
        raw.meta.dec = col_f64(f, fits, &hdu, c, row..row + 1, &at)?
            .first()
            .copied()
            .filter(|v| v.is_finite());
    }
    raw.finish(at)
}
