/*!
Plot-ready data for one object: the smoothed flux and its 1σ band (in
segments broken at masked runs), the model of the shown solution smoothed the
same way as the flux, runs of masked pixels, the shown class's own line
markers at the shown z, sky markers, and the close-up windows. Computed once
when the object, the shown solution or the view settings change, never per
frame; this is the work the GUI benchmark measures after a switch.
*/
use crate::lines::{self, Line, LineKind};
use crate::{ObjectClass, Spectrum};
use std::ops::Range;

use super::state::ViewSettings;

/// A vertical marker with a label.
#[derive(Debug, Clone, PartialEq)]
pub struct Marker {
    /// Position on the plot's x axis.
    pub x: f64,
    /// Line name.
    pub label: &'static str,
    /// Emission, absorption or sky.
    pub kind: LineKind,
    /// Rough relative strength 0–1 (labels only for the stronger lines).
    pub strength: f64,
}

/// A small window around one diagnostic line.
#[derive(Debug, Clone, PartialEq)]
pub struct Closeup {
    /// Line name.
    pub name: &'static str,
    /// Emission or absorption.
    pub kind: LineKind,
    /// Expected position on the x axis.
    pub centre: f64,
    /// Smoothed flux points inside the window.
    pub flux: Vec<[f64; 2]>,
    /// Model points inside the window.
    pub model: Vec<[f64; 2]>,
}

/// Everything the spectrum and close-up panels draw.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Prepared {
    /// x of each good pixel (observed or rest Å).
    pub x: Vec<f64>,
    /// Smoothed flux at good pixels.
    pub flux: Vec<f64>,
    /// Lower edge of the 1σ band.
    pub lo: Vec<f64>,
    /// Upper edge of the 1σ band.
    pub hi: Vec<f64>,
    /// Runs of consecutive good pixels (ranges into `x`, `flux`, `lo`, `hi`):
    /// flux and band are drawn per run, never across a masked gap.
    pub segments: Vec<Range<usize>>,
    /// Model points (x, flux), empty when no model.
    pub model: Vec<[f64; 2]>,
    /// Runs of masked pixels as (x from, x to).
    pub masked: Vec<(f64, f64)>,
    /// Emission and absorption markers in range.
    pub lines: Vec<Marker>,
    /// Sky-line markers in range.
    pub sky: Vec<f64>,
    /// Telluric absorption bands in range as (x from, x to): where the fit
    /// weighs the pixels less (`FitConfig::telluric_floor`).
    pub telluric: Vec<(f64, f64)>,
    /// Close-up windows, blue to red.
    pub closeups: Vec<Closeup>,
    /// A y range that ignores spikes (1st–99th percentile, padded).
    pub y_range: (f64, f64),
    /// x range of the spectrum.
    pub x_range: (f64, f64),
}

/// Half-width of a close-up window in rest-frame Å (common practice: wide
/// enough for a broad quasar line's core, narrow enough to see a doublet).
pub const CLOSEUP_HALF_WIDTH_REST: f64 = 60.0;

/// Most close-ups shown at once.
pub const MAX_CLOSEUPS: usize = 8;

/// The kind a line is drawn as for `class`, or `None` when it is not one of
/// that class's diagnostic features (common practice): galaxies show every
/// line but the quasar-only high-ionisation ones; quasars their emission
/// lines; stars their absorption lines, the hydrogen series drawn as
/// absorption. Without a class, every line as listed.
pub fn line_kind_for(l: &Line, class: Option<ObjectClass>) -> Option<LineKind> {
    const QUASAR_ONLY: [&str; 6] = [
        "O VI 1032",
        "O VI 1038",
        "N V 1239",
        "N V 1243",
        "Si IV+O IV]",
        "[Ne V] 3427",
    ];
    let hydrogen =
        |n: &str| n.starts_with('H') && !n.starts_with("He") && !n.starts_with("Hg") || n.starts_with("Pa");
    match class {
        None => Some(l.kind),
        Some(ObjectClass::Galaxy) => (!QUASAR_ONLY.contains(&l.name)).then_some(l.kind),
        Some(ObjectClass::Quasar) => (l.kind == LineKind::Emission).then_some(LineKind::Emission),
        Some(ObjectClass::Star) => match l.kind {
            LineKind::Absorption => Some(LineKind::Absorption),
            LineKind::Emission if hydrogen(l.name) => Some(LineKind::Absorption),
            _ => None,
        },
    }
}

/// Close-up lines of each class, blue to red (common practice: the features
/// an inspector checks first for that class).
pub fn closeup_lines(class: Option<ObjectClass>) -> Vec<&'static Line> {
    let names: &[&str] = match class {
        None => return lines::diagnostic().iter().collect(),
        Some(ObjectClass::Galaxy) => &[
            "Lyα",
            "[O II] 3727",
            "Ca II K",
            "Ca II H",
            "Hδ",
            "G band",
            "Hβ",
            "[O III] 5008",
            "Mg b 5174",
            "Na D2",
            "Hα",
            "Ca II 8544",
        ],
        Some(ObjectClass::Quasar) => &[
            "Lyα",
            "C IV",
            "C III]",
            "Mg II",
            "[Ne V] 3427",
            "Hγ",
            "Hβ",
            "[O III] 5008",
            "Hα",
        ],
        Some(ObjectClass::Star) => &[
            "Ca II K",
            "Ca II H",
            "Hδ",
            "G band",
            "Hγ",
            "Hβ",
            "Mg b 5174",
            "Na D2",
            "Hα",
            "Ca II 8544",
        ],
    };
    names.iter().filter_map(|n| lines::find(n)).collect()
}

/// Prepare `s` for drawing at redshift `z` (markers of `class`) with `model`
/// (flux at `s.wave()`, NaN where undefined; may be empty).
pub fn prepare(
    s: &Spectrum,
    z: Option<f64>,
    class: Option<ObjectClass>,
    model: &[f64],
    view: &ViewSettings,
) -> Prepared {
    let wave = s.wave();
    let n = wave.len();
    let zf = match (view.rest_frame, z) {
        (true, Some(z)) if z > -1.0 => 1.0 + z,
        _ => 1.0,
    };
    let width = view.smoothing.max(1);
    let (flux_s, sigma_s) = smooth(s, width);
    // The model is smoothed exactly as the flux is (the library's one
    // smoothing, the same weights), so that line depths compare.
    let model_s = if model.len() == n {
        s.smooth_values_boxcar(model, width)
    } else {
        Vec::new()
    };
    let model = model_s.as_slice();
    let mut p = Prepared {
        x_range: (wave[0] / zf, wave[n - 1] / zf),
        ..Default::default()
    };
    let mut run: Option<(f64, f64)> = None;
    for i in 0..n {
        let x = wave[i] / zf;
        if s.good()[i] {
            if let Some(r) = run.take() {
                p.masked.push(r);
            }
            let k = p.x.len();
            match p.segments.last_mut() {
                Some(seg) if seg.end == k && i > 0 && s.good()[i - 1] => seg.end = k + 1,
                _ => p.segments.push(k..k + 1),
            }
            p.x.push(x);
            p.flux.push(flux_s[i]);
            p.lo.push(flux_s[i] - sigma_s[i]);
            p.hi.push(flux_s[i] + sigma_s[i]);
        } else {
            // Half a pixel each side (pixel width from its neighbours).
            let half = 0.25 * (wave[(i + 1).min(n - 1)] - wave[i.saturating_sub(1)]) / zf;
            run = Some(match run {
                Some((a, _)) => (a, x + half),
                None => (x - half, x + half),
            });
        }
    }
    if let Some(r) = run {
        p.masked.push(r);
    }
    if model.len() == n {
        p.model = (0..n)
            .filter(|&i| model[i].is_finite())
            .map(|i| [wave[i] / zf, model[i]])
            .collect();
    }
    p.y_range = robust_range(&p.flux);
    let (lam_lo, lam_hi) = (wave[0], wave[n - 1]);
    if let Some(z) = z {
        for l in lines::all() {
            let obs = l.wave * (1.0 + z);
            let Some(kind) = line_kind_for(l, class) else {
                continue;
            };
            if obs >= lam_lo && obs <= lam_hi {
                p.lines.push(Marker {
                    x: obs / zf,
                    label: l.name,
                    kind,
                    strength: l.strength,
                });
            }
        }
        for l in closeup_lines(class) {
            if p.closeups.len() >= MAX_CLOSEUPS {
                break;
            }
            let obs = l.wave * (1.0 + z);
            let half = CLOSEUP_HALF_WIDTH_REST * (1.0 + z);
            if obs - 0.5 * half < lam_lo || obs + 0.5 * half > lam_hi {
                continue;
            }
            let inside = |lam: f64| (lam - obs).abs() <= half;
            let flux = (0..n)
                .filter(|&i| s.good()[i] && inside(wave[i]))
                .map(|i| [wave[i] / zf, flux_s[i]])
                .collect();
            let model = if model.len() == n {
                (0..n)
                    .filter(|&i| inside(wave[i]) && model[i].is_finite())
                    .map(|i| [wave[i] / zf, model[i]])
                    .collect()
            } else {
                Vec::new()
            };
            p.closeups.push(Closeup {
                name: l.name,
                kind: line_kind_for(l, class).unwrap_or(l.kind),
                centre: obs / zf,
                flux,
                model,
            });
        }
    }
    if view.show_sky {
        p.sky = lines::sky()
            .iter()
            .filter(|l| l.wave >= lam_lo && l.wave <= lam_hi)
            .map(|l| l.wave / zf)
            .collect();
        p.telluric = lines::telluric_bands()
            .iter()
            .filter(|(a, b)| *b >= lam_lo && *a <= lam_hi)
            .map(|(a, b)| (a.max(lam_lo) / zf, b.min(lam_hi) / zf))
            .collect();
    }
    p
}

/// The flux smoothed by the library's boxcar of `width` pixels
/// ([`Spectrum::smooth_boxcar`]: inverse-variance weighted over good pixels)
/// and the 1σ error of each smoothed value (0 where no good pixel is in reach).
pub fn smooth(s: &Spectrum, width: usize) -> (Vec<f64>, Vec<f64>) {
    let sm = s.smooth_boxcar(width);
    let err = sm
        .ivar
        .iter()
        .map(|&iv| if iv > 0.0 { 1.0 / iv.sqrt() } else { 0.0 })
        .collect();
    (sm.flux, err)
}

/// 1st–99th percentile of `v`, padded by 15 % (robust against spikes).
fn robust_range(v: &[f64]) -> (f64, f64) {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if s.is_empty() {
        return (0.0, 1.0);
    }
    s.sort_by(|a, b| a.total_cmp(b));
    let lo = s[(s.len() as f64 * 0.01) as usize];
    let hi = s[((s.len() as f64 * 0.99) as usize).min(s.len() - 1)];
    let pad = 0.15 * (hi - lo).max(1e-12);
    (lo.min(0.0) - pad, hi + pad)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::spectrum::SpectrumMeta;
    use approx::assert_relative_eq;

    fn spec(flux: Vec<f64>, ivar: Vec<f64>, good: Vec<bool>) -> Spectrum {
        let wave = (0..flux.len()).map(|i| 4000.0 + i as f64).collect();
        Spectrum::new(wave, flux, Some(ivar), Some(good), SpectrumMeta::default()).unwrap()
    }

    #[test]
    fn smoothing_weights_by_inverse_variance() {
        // Weighted mean of (1, 3) with weights (3, 1) is 1.5; error 1/sqrt(4).
        let s = spec(vec![1.0, 3.0], vec![3.0, 1.0], vec![true, true]);
        let (f, e) = smooth(&s, 3);
        assert_relative_eq!(f[0], 1.5);
        assert_relative_eq!(e[0], 0.5);
    }

    #[test]
    fn the_model_is_smoothed_exactly_as_the_flux() {
        // A model equal to the flux must stay equal to the smoothed flux at
        // every width: the same weights, the same window.
        let flux: Vec<f64> = (0..40).map(|i| if i == 20 { 10.0 } else { 1.0 }).collect();
        let ivar: Vec<f64> = (0..40).map(|i| 1.0 + (i % 3) as f64).collect();
        let mut good = vec![true; 40];
        good[5] = false;
        let s = spec(flux.clone(), ivar, good);
        for w in [1, 3, 9] {
            let (f, _) = smooth(&s, w);
            let m = s.smooth_values_boxcar(&flux, w);
            for i in (0..40).filter(|&i| i != 5) {
                assert_relative_eq!(f[i], m[i], epsilon = 1e-12);
            }
        }
        // At 9 px a one-pixel line of the model is as shallow as the data's.
        let m9 = s.smooth_values_boxcar(&flux, 9);
        assert!(m9[20] < 3.0, "{}", m9[20]);
    }

    #[test]
    fn each_class_gets_its_own_features() {
        let s = spec(vec![1.0; 6000], vec![1.0; 6000], vec![true; 6000]);
        let view = ViewSettings::default();
        let star = prepare(&s, Some(0.0), Some(ObjectClass::Star), &[], &view);
        let names: Vec<&str> = star.lines.iter().map(|m| m.label).collect();
        assert!(!names.iter().any(|n| n.starts_with("[O")), "{names:?}");
        assert!(names.contains(&"Na D2") && names.contains(&"Hβ"), "{names:?}");
        assert!(star.lines.iter().all(|m| m.kind == LineKind::Absorption));
        assert!(star.closeups.iter().all(|c| !c.name.starts_with("[O")));
        let gal = prepare(&s, Some(0.0), Some(ObjectClass::Galaxy), &[], &view);
        assert!(gal.closeups.iter().any(|c| c.name == "[O III] 5008"));
        let qso = prepare(&s, Some(0.0), Some(ObjectClass::Quasar), &[], &view);
        assert!(qso.lines.iter().all(|m| m.kind == LineKind::Emission));
    }

    #[test]
    fn masked_runs_and_rest_axis() {
        let mut good = vec![true; 10];
        good[3] = false;
        good[4] = false;
        let s = spec(vec![1.0; 10], vec![1.0; 10], good);
        let view = ViewSettings {
            rest_frame: true,
            smoothing: 1,
            ..Default::default()
        };
        let p = prepare(&s, Some(1.0), None, &[], &view);
        assert_eq!(p.x.len(), 8);
        assert_eq!(p.masked.len(), 1);
        // The flux and its band break at the masked run: two segments.
        assert_eq!(p.segments, vec![0..3, 3..8]);
        // pixels 3 and 4 at 4003, 4004 Å observed → 2001.5, 2002 rest; ±0.25 edges.
        assert_relative_eq!(p.masked[0].0, 2001.25);
        assert_relative_eq!(p.masked[0].1, 2002.25);
        assert_relative_eq!(p.x_range.0, 2000.0);
    }

    #[test]
    fn telluric_bands_are_shaded_with_the_sky_in_the_frame_shown() {
        // 6000–8000 Å holds the O₂ γ, B and A bands and the 7162–7342 Å water
        // band (lines::telluric_bands); in the rest frame of z = 0.5 they sit
        // at observed / 1.5
        let wave: Vec<f64> = (0..2001).map(|i| 6000.0 + i as f64).collect();
        let n = wave.len();
        let s = Spectrum::new(
            wave,
            vec![1.0; n],
            Some(vec![1.0; n]),
            None,
            SpectrumMeta::default(),
        )
        .unwrap();
        let mut view = ViewSettings {
            show_sky: true,
            ..ViewSettings::default()
        };
        let p = prepare(&s, Some(0.5), None, &[], &view);
        let inside: Vec<&(f64, f64)> = lines::telluric_bands().iter().filter(|b| b.1 <= 8000.0).collect();
        assert_eq!(p.telluric.len(), inside.len());
        for ((a, b), (x, y)) in inside.iter().zip(&p.telluric) {
            assert_relative_eq!(*x, *a);
            assert_relative_eq!(*y, *b);
        }
        view.rest_frame = true;
        let r = prepare(&s, Some(0.5), None, &[], &view);
        assert_relative_eq!(r.telluric[0].0, inside[0].0 / 1.5);
        view.show_sky = false;
        assert!(prepare(&s, Some(0.5), None, &[], &view).telluric.is_empty());
    }
}
