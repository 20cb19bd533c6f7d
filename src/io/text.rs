/*!
Text tables: one pixel per line, columns separated by commas, tabs or
white space, with a header line naming the columns.

- Lines starting with `#` are comments; a last comment line just before the
  data whose fields match the data's count and are not numbers is taken as
  the header (`# wave flux err` is common practice).
- Header names are matched with the same synonym lists as FITS columns; a
  unit may follow a name in brackets, `wave[nm]` or `wavelength(um)`.
- Without any header line, the columns are wavelength, flux and (if present)
  1σ uncertainty, in that order (common practice for two/three-column files);
  the spectrum then carries a warning.
- Empty fields and `nan` are missing values (the pixel is masked).
- A UTF-8 byte-order mark is skipped; lines may end in LF, CR LF or CR.
- At most [`MAX_TEXT_BYTES`] bytes and [`super::MAX_PIXELS`] data lines.
*/
use super::{
    file_stem, find_name, synonyms, tried, unit_to_angstrom, ErrKind, LoadError, Loc, RawSpectrum,
    ReadOptions, WaveScale,
};
use crate::spectrum::{Spectrum, SpectrumMeta};
use std::io::Read;
use std::path::Path;

/// Largest text table read (256 MiB); the whole file is held in memory.
pub const MAX_TEXT_BYTES: u64 = 1 << 28;

/// Column separator of a text table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Sep {
    Comma,
    Tab,
    Space,
}

fn split(line: &str, sep: Sep) -> Vec<String> {
    let clean = |s: &str| s.trim().trim_matches('"').trim().to_string();
    match sep {
        Sep::Comma => line.split(',').map(clean).collect(),
        Sep::Tab => line.split('\t').map(clean).collect(),
        Sep::Space => line.split_whitespace().map(clean).collect(),
    }
}

fn parse_num(s: &str) -> Option<f64> {
    let t = s.trim();
    if t.is_empty() || t.eq_ignore_ascii_case("nan") || t.eq_ignore_ascii_case("null") || t == "--" {
        return Some(f64::NAN);
    }
    // Fortran-style exponents (1.0D+03) appear in old tables.
    t.replace(['D', 'd'], "e")
        .parse::<f64>()
        .ok()
        .or_else(|| t.parse().ok())
}

/// `wave[nm]` → (`wave`, `nm`).
fn name_and_unit(h: &str) -> (String, Option<String>) {
    for (open, close) in [('[', ']'), ('(', ')')] {
        if let (Some(a), true) = (h.find(open), h.ends_with(close)) {
            return (
                h[..a].trim().to_string(),
                Some(h[a + 1..h.len() - 1].trim().to_string()),
            );
        }
    }
    (h.trim().to_string(), None)
}

/// Read a text table as one spectrum.
pub(crate) fn read_text(path: &Path, opts: &ReadOptions) -> Result<Spectrum, LoadError> {
    let size = std::fs::metadata(path)?.len();
    if size > MAX_TEXT_BYTES {
        return Err(LoadError::TooLarge(format!(
            "a text table of {size} bytes (zvet reads text spectra of at most {} MiB)",
            MAX_TEXT_BYTES >> 20
        )));
    }
    let mut content = Vec::new();
    std::io::Read::read_to_end(
        &mut std::fs::File::open(path)?.take(MAX_TEXT_BYTES + 1),
        &mut content,
    )?;
    if content.len() as u64 > MAX_TEXT_BYTES {
        return Err(LoadError::TooLarge(format!(
            "a text table of more than {} MiB",
            MAX_TEXT_BYTES >> 20
        )));
    }
    let content = String::from_utf8_lossy(&content);
    // A UTF-8 byte-order mark (spreadsheet exports write one) is not text.
    let content = content.strip_prefix('\u{feff}').unwrap_or(&content);
    // Line ends: LF, CR LF, or CR alone (old spreadsheet exports).
    let content = if content.contains('\r') {
        std::borrow::Cow::Owned(content.replace("\r\n", "\n").replace('\r', "\n"))
    } else {
        std::borrow::Cow::Borrowed(content)
    };
    let mut last_comment: Option<(usize, String)> = None;
    let mut header: Option<(usize, String)> = None;
    let mut data: Vec<(usize, &str)> = Vec::new();
    for (i, line) in content.lines().enumerate() {
        let t = line.trim();
        if t.is_empty() {
            continue;
        }
        if let Some(c) = t.strip_prefix('#') {
            if data.is_empty() && header.is_none() {
                last_comment = Some((i + 1, c.trim().to_string()));
            }
            continue;
        }
        if data.is_empty() && header.is_none() {
            // The first non-comment line: a header if any field is not a number.
            let sep = guess_sep(t);
            if split(t, sep).iter().any(|f| parse_num(f).is_none()) {
                header = Some((i + 1, t.to_string()));
                continue;
            }
        }
        if data.len() as u64 >= super::MAX_PIXELS {
            return Err(LoadError::TooLarge(format!(
                "more than {} data lines (zvet reads spectra of at most that many pixels)",
                super::MAX_PIXELS
            )));
        }
        data.push((i + 1, t));
    }
    let Some(&(_, first)) = data.first() else {
        return Err(LoadError::Text {
            at: Loc::default(),
            message: "no data lines".into(),
        });
    };
    let sep = guess_sep(header.as_ref().map(|h| h.1.as_str()).unwrap_or(first));
    let ncols = split(first, sep).len();
    if header.is_none() {
        if let Some((l, c)) = last_comment {
            let f = split(&c, sep);
            if f.len() == ncols && f.iter().all(|x| parse_num(x).is_none()) {
                header = Some((l, c));
            }
        }
    }
    let mut warnings = Vec::new();
    let (names, units): (Vec<String>, Vec<Option<String>>) = match &header {
        Some((_, h)) => split(h, sep).iter().map(|s| name_and_unit(s)).unzip(),
        None => {
            warnings.push("no header line: columns taken as wavelength, flux, σ".to_string());
            let base = ["wave", "flux", "err"];
            (0..ncols)
                .map(|i| {
                    (
                        base.get(i).map_or(format!("col{}", i + 1), |s| s.to_string()),
                        None,
                    )
                })
                .unzip()
        }
    };
    let hloc = Loc::line(header.as_ref().map_or(1, |h| h.0));
    if names.len() != ncols {
        return Err(LoadError::LengthMismatch {
            at: hloc,
            detail: format!(
                "the header names {} columns, the first data line has {ncols}",
                names.len()
            ),
        });
    }
    let wave_syn: &[&[&str]] = &[synonyms::WAVE, synonyms::LOG10_WAVE, synonyms::LN_WAVE];
    let wi =
        find_name(&names, opts.wave_col.as_deref(), wave_syn).ok_or_else(|| LoadError::MissingColumn {
            at: hloc.clone(),
            role: "wavelength",
            tried: tried(opts.wave_col.as_deref(), wave_syn),
            flag: "wave-col",
        })?;
    let fi = find_name(&names, opts.flux_col.as_deref(), &[synonyms::FLUX]).ok_or_else(|| {
        LoadError::MissingColumn {
            at: hloc.clone(),
            role: "flux",
            tried: tried(opts.flux_col.as_deref(), &[synonyms::FLUX]),
            flag: "flux-col",
        }
    })?;
    let err = if let Some(n) = opts.ivar_col.as_deref() {
        Some((find_name(&names, Some(n), &[]), ErrKind::Ivar, n, "ivar-col"))
    } else {
        opts.err_col
            .as_deref()
            .map(|n| (find_name(&names, Some(n), &[]), ErrKind::Sigma, n, "err-col"))
    };
    let err = match err {
        Some((Some(i), k, _, _)) => Some((i, k)),
        Some((None, _, n, flag)) => {
            return Err(LoadError::MissingColumn {
                at: hloc,
                role: "uncertainty",
                tried: tried(Some(n), &[]),
                flag,
            })
        }
        None => [
            (synonyms::IVAR, ErrKind::Ivar),
            (synonyms::ERR, ErrKind::Sigma),
            (synonyms::VAR, ErrKind::Variance),
        ]
        .iter()
        .find_map(|(syn, k)| find_name(&names, None, &[syn]).map(|i| (i, *k))),
    };
    let sky_col = find_name(&names, None, &[synonyms::SKY]);
    let mut sky = Vec::new();
    let mask = find_name(&names, opts.mask_col.as_deref(), &[synonyms::MASK]);
    if mask.is_none() && opts.mask_col.is_some() {
        return Err(LoadError::MissingColumn {
            at: hloc,
            role: "mask",
            tried: tried(opts.mask_col.as_deref(), &[]),
            flag: "mask-col",
        });
    }
    let unit = units[wi].clone().unwrap_or_default();
    let to_aa = unit_to_angstrom(&unit).ok_or_else(|| LoadError::UnknownUnit {
        at: hloc.clone(),
        keyword: format!("header of column '{}'", names[wi]),
        unit: unit.clone(),
    })?;
    let mut scale = WaveScale::from_name(&names[wi]);
    if unit.to_ascii_lowercase().starts_with("log(") {
        scale = WaveScale::Log10;
    }
    let (mut wave, mut flux, mut errv, mut bad) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    for (line, t) in &data {
        let f = split(t, sep);
        let at = Loc::line(*line);
        if f.len() != ncols {
            return Err(LoadError::LengthMismatch {
                at,
                detail: format!("{} values on this line, {ncols} columns in the table", f.len()),
            });
        }
        let num = |i: usize| {
            parse_num(&f[i]).ok_or_else(|| LoadError::ColumnType {
                at: at.clone(),
                column: names[i].clone(),
                role: "value",
                found: format!("'{}'", f[i]),
            })
        };
        wave.push(scale.apply(num(wi)?) * to_aa);
        flux.push(num(fi)?);
        if let Some((i, _)) = err {
            errv.push(num(i)?);
        }
        if let Some(i) = sky_col {
            sky.push(parse_num(&f[i]).unwrap_or(f64::NAN));
        }
        if let Some(i) = mask {
            let m = num(i)?;
            bad.push(m != 0.0 && !m.is_nan());
        }
    }
    let wave_name = names[wi].to_ascii_lowercase();
    let air = opts.air || wave_name == "awav" || wave_name == "wave_air";
    let meta = SpectrumMeta {
        id: file_stem(path),
        source: Some(path.to_path_buf()),
        flux_unit: units[fi].clone(),
        warnings,
        sky: sky_col.map(|_| sky),
        ..Default::default()
    };
    RawSpectrum {
        wave,
        flux,
        ivar: err.map(|(_, k)| k.to_ivar(&errv)),
        bad: mask.map(|_| bad),
        air,
        meta,
    }
    .finish(Loc::default())
}

fn guess_sep(line: &str) -> Sep {
    if line.contains(',') {
        Sep::Comma
    } else if line.contains('\t') {
        Sep::Tab
    } else {
        Sep::Space
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_units_and_separators() {
        assert_eq!(name_and_unit("wave[nm]"), ("wave".into(), Some("nm".into())));
        assert_eq!(name_and_unit("flux"), ("flux".into(), None));
        assert_eq!(split("1, 2,\"3\"", Sep::Comma), vec!["1", "2", "3"]);
        assert_eq!(guess_sep("a\tb"), Sep::Tab);
        assert!(parse_num("nan").is_some_and(f64::is_nan));
        assert_eq!(parse_num("1.5D+03"), Some(1500.0));
        assert_eq!(parse_num("abc"), None);
    }
}
