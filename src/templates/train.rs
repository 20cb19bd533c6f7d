/*!
Template sets trained from vetted spectra (`zvet templates train`).

Each training spectrum (a spectrum with its vetted class and redshift) is
1. shifted to the rest frame (λ_rest = λ_obs / (1 + z));
2. resampled onto the template grid — uniform in log10 λ with the built-in
   set's step ([`DLOGLAM`](super::builtin::DLOGLAM) unless asked otherwise),
   pixel centres on whole multiples of the step — by the flux-conserving
   resampler of [`crate::spectrum`], which propagates the noise; the weight of
   a pixel is its inverse variance divided by its noise-correlation sum
   ([`Resampled::correlation`](crate::spectrum::Resampled::correlation)), so
   that upsampling does not count the same photons twice;
3. normalised to unit median flux over its good pixels (weights scaled to
   match), with a systematic floor of 3 % of the local mean flux added to
   each pixel's variance (the engine's default `sys_floor`; see
   [`TrainOptions::sys_floor`]).

The class's grid is the rest range covered by enough spectra (at least
3K of them, and at least 10 % of the class): each pixel's K values are
solved from the spectra that cover it, and with fewer the edges turn noisy. Per class an eigen-basis is
then found by expectation-maximisation PCA for noisy and gappy data (Bailey
2012, PASP 124, 1015; see [`super::pca`]) with outlier rejection by iterative
sigma clipping of the per-spectrum reduced χ².

**Written as a cone, not as signed eigenvectors.** The engine constrains
template amplitudes to be ≥ 0 by default (`nonnegative`), which a signed
eigen-basis would break. A basis class is therefore written as K templates
that span exactly the same space as the K eigen-spectra φ₁…φ_K but whose
non-negative combinations contain every kept training spectrum: with c_n the
coefficients of spectrum n, the ratios b_n = (c_n2 … c_nK)/c_n1 are whitened
and enclosed in a regular simplex (vertices from the Helmert contrasts,
inflated by 10 % beyond the outermost spectrum); template j is φ₁ + Σ_i
v_ji φ_{i+1} for vertex v_j. A spectrum like the training set is then a
non-negative sum of the templates, and the fit's span is unchanged.

**Stars** are by default grouped by type and each type becomes one template
fitted alone (the `each_alone` mode of the built-in stars): the first weighted
principal component of the type's spectra, i.e. their amplitude-weighted mean
shape, with the same outlier rejection. The type is the table's `type` column
or, for a campaign, the star template of the object's automatic fit; stars
without one form a single group `star`. [`StarMode::Basis`] treats stars like
the other classes instead.

**Beyond the trained range** each template is continued flat, at its mean
over the 25 pixels at that end, out to the built-in set's rest range for the
class. The engine takes a template as zero where it has no pixels, so a
template narrower than the spectra would make it prefer the redshifts at
which the template happens to cover the whole spectrum; the flat
continuation carries no feature and leaves the redshift to the trained
range. The provenance gives the trained range.

Classes that were not trained are taken from the built-in set unless asked
otherwise, so the set can be used by `zvet fit --templates DIR`, a campaign
or the GUI in place of the built-in one. The JSON descriptor records the
provenance (source, spectra used and rejected, components, power explained)
in its `generator` field.
*/
#![allow(clippy::needless_range_loop)]

use super::pca::{empca_clipped, ClipOptions, EmpcaOptions, PcaError};
use super::{ClassTemplates, FitMode, Template, TemplateError, TemplateKind, TemplateSet};
use crate::review::{Confidence, Flag};
use crate::spectrum::{LogGrid, Spectrum, SpectrumMeta};
use crate::ObjectClass;
use serde::Serialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Why training failed as a whole.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum TrainError {
    /// No class could be trained; the reasons are listed.
    #[error("nothing could be trained:\n  {}", .0.join("\n  "))]
    Nothing(Vec<String>),
    /// Settings that cannot work.
    #[error("{0}")]
    Options(String),
    /// The input table could not be used.
    #[error("{}: {message}", path.display())]
    Table {
        /// The table.
        path: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// The campaign could not be read.
    #[error(transparent)]
    Campaign(#[from] crate::campaign::CampaignError),
    /// The PCA failed.
    #[error(transparent)]
    Pca(#[from] PcaError),
}

/// One vetted spectrum to learn from.
#[derive(Debug, Clone)]
pub struct TrainingSpectrum {
    /// Object id (for messages and the provenance).
    pub id: String,
    /// Vetted class.
    pub class: ObjectClass,
    /// Vetted redshift.
    pub z: f64,
    /// Star type (or other sub-group), when known.
    pub group: Option<String>,
    /// The observed spectrum.
    pub spectrum: Spectrum,
}

/// How stars are trained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum StarMode {
    /// One template per star type (mean shape), each fitted alone.
    PerType,
    /// An eigen-basis like the other classes.
    Basis,
}

/// Settings of [`train`].
#[derive(Debug, Clone)]
pub struct TrainOptions {
    /// Name of the set (file names `<name>.fits`, `<name>.json`).
    pub name: String,
    /// Eigen-spectra per basis class (K).
    pub components: usize,
    /// Step of the template grid in log10 λ.
    pub dloglam: f64,
    /// How stars are trained.
    pub star_mode: StarMode,
    /// Outlier rejection.
    pub clip: ClipOptions,
    /// Most EM iterations.
    pub iterations: usize,
    /// Fewest spectra for a class (or a star type).
    pub min_spectra: usize,
    /// Systematic error floor ε as a fraction of the local mean flux: each
    /// pixel's variance becomes σ² + (ε·F̄)², as in the engine's own
    /// `sys_floor`, so that at high S/N the unavoidable mismatch between
    /// spectra resampled at different redshifts (line centres fall at different
    /// phases of the template pixels) does not dominate the weights and the
    /// outlier rejection; 0 turns it off.
    pub sys_floor: f64,
    /// Take classes that were not trained from the built-in set.
    pub fill_from_builtin: bool,
    /// Where the spectra came from (for the provenance).
    pub source: String,
}

impl Default for TrainOptions {
    fn default() -> Self {
        TrainOptions {
            name: "trained".into(),
            components: 4,
            dloglam: super::builtin::DLOGLAM,
            star_mode: StarMode::PerType,
            clip: ClipOptions::default(),
            iterations: 60,
            min_spectra: 3,
            sys_floor: 0.03,
            fill_from_builtin: true,
            source: String::new(),
        }
    }
}

/// What was learnt for one class (or one star type).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GroupSummary {
    /// Class.
    pub class: ObjectClass,
    /// Star type, for per-type star templates.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub group: Option<String>,
    /// Fit mode of the written templates.
    pub fit_mode: FitMode,
    /// Spectra offered.
    pub spectra_in: usize,
    /// Spectra the final basis was fitted to.
    pub spectra_used: usize,
    /// Ids set aside as outliers.
    pub rejected: Vec<String>,
    /// Eigen-spectra (K).
    pub components: usize,
    /// Cumulative fraction of the weighted (uncentred) power reproduced by
    /// the first 1…K eigen-spectra.
    pub power_explained: Vec<f64>,
    /// Rest wavelength range learnt from the spectra (Å); the templates are
    /// continued flat beyond it.
    pub rest_range: (f64, f64),
    /// EM iterations of the final fit.
    pub iterations: usize,
    /// Names of the templates written.
    pub templates: Vec<String>,
}

/// The provenance written into the descriptor's `generator` field.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TrainingProvenance {
    /// `zvet templates train`.
    pub trainer: String,
    /// zvet version.
    pub zvet_version: String,
    /// The method, with its reference.
    pub method: String,
    /// Source of the spectra.
    pub source: String,
    /// Spectra offered in all.
    pub spectra_in: usize,
    /// Spectra used in all.
    pub spectra_used: usize,
    /// Components asked for.
    pub components: usize,
    /// Grid step (log10 λ).
    pub dloglam: f64,
    /// Sigma-clipping κ.
    pub clip_kappa: f64,
    /// Per class (or star type).
    pub groups: Vec<GroupSummary>,
    /// Classes copied from the built-in set.
    pub from_builtin: Vec<ObjectClass>,
}

/// A trained set with its provenance and what was left out.
#[derive(Debug, Clone)]
pub struct Trained {
    /// The set (write it with [`write_trained`]).
    pub set: TemplateSet,
    /// Provenance.
    pub provenance: TrainingProvenance,
    /// Spectra or classes that could not be used, and why.
    pub problems: Vec<String>,
}

/// A spectrum on the class grid: normalised flux and weights.
struct Row {
    id: String,
    x: Vec<f64>,
    w: Vec<f64>,
}

/// Rest-frame resampling of one spectrum onto `grid` (flux, weight), or why not.
fn rest_frame(t: &TrainingSpectrum, grid: &LogGrid) -> Result<(Vec<f64>, Vec<f64>), String> {
    let s = &t.spectrum;
    let zf = 1.0 + t.z;
    let wave: Vec<f64> = s.wave().iter().map(|w| w / zf).collect();
    let rest = Spectrum::new(
        wave,
        s.flux().to_vec(),
        Some(s.ivar().to_vec()),
        Some(s.good().to_vec()),
        SpectrumMeta::default(),
    )
    .map_err(|e| e.to_string())?;
    let r = rest.resample(grid);
    let w = r
        .ivar
        .iter()
        .zip(&r.correlation)
        .map(|(iv, c)| {
            if *iv > 0.0 && iv.is_finite() {
                iv / c.max(1.0)
            } else {
                0.0
            }
        })
        .collect();
    Ok((r.flux, w))
}

/// Rest range (Å) covered by spectrum `t`.
fn rest_range(t: &TrainingSpectrum) -> (f64, f64) {
    let w = t.spectrum.wave();
    (w[0] / (1.0 + t.z), w[w.len() - 1] / (1.0 + t.z))
}

/// Put the spectra of one class (or star type) on a common rest grid and
/// normalise them. Returns the grid and the rows; spectra left out are
/// added to `problems`.
fn prepare(
    spectra: &[&TrainingSpectrum],
    k: usize,
    dloglam: f64,
    sys_floor: f64,
    problems: &mut Vec<String>,
) -> Result<(LogGrid, Vec<Row>), String> {
    let ok: Vec<&TrainingSpectrum> = spectra
        .iter()
        .copied()
        .filter(|t| {
            let good = t.z.is_finite() && t.z > -0.5 && t.z < 20.0;
            if !good {
                problems.push(format!("{}: redshift {} cannot be used", t.id, t.z));
            }
            good
        })
        .collect();
    if ok.is_empty() {
        return Err("no spectrum with a usable redshift".into());
    }
    let lo = ok.iter().map(|t| rest_range(t).0).fold(f64::INFINITY, f64::min);
    let hi = ok.iter().map(|t| rest_range(t).1).fold(0.0, f64::max);
    let full = LogGrid::covering(lo, hi, dloglam);
    if full.n > 200_000 {
        return Err(format!(
            "the rest-frame range {lo:.0}–{hi:.0} Å needs {} pixels at step {dloglam}; use a coarser step",
            full.n
        ));
    }
    let mut rows = Vec::new();
    for t in ok {
        match rest_frame(t, &full) {
            Ok((x, w)) => rows.push(Row {
                id: t.id.clone(),
                x,
                w,
            }),
            Err(e) => problems.push(format!("{}: {e}", t.id)),
        }
    }
    // The grid: pixels covered by enough spectra, first to last.
    let need = (3 * k).max(2).max((0.1 * rows.len() as f64).ceil() as usize);
    let count: Vec<usize> = (0..full.n)
        .map(|j| rows.iter().filter(|r| r.w[j] > 0.0).count())
        .collect();
    let a = count.iter().position(|c| *c >= need);
    let b = count.iter().rposition(|c| *c >= need);
    let (a, b) = match (a, b) {
        (Some(a), Some(b)) if b >= a + 20 => (a, b),
        _ => {
            return Err(format!(
                "no rest-frame range of 20 pixels or more is covered by {need} spectra"
            ))
        }
    };
    let grid = LogGrid {
        loglam0: full.loglam(a),
        dloglam,
        n: b - a + 1,
    };
    let mut out = Vec::new();
    for r in rows {
        let x = &r.x[a..=b];
        let w = &r.w[a..=b];
        let mut good: Vec<f64> = x
            .iter()
            .zip(w)
            .filter(|(_, w)| **w > 0.0)
            .map(|(x, _)| *x)
            .collect();
        if good.len() < 10 {
            problems.push(format!("{}: fewer than 10 good pixels in the rest range", r.id));
            continue;
        }
        let med = crate::spectrum::median_in_place(&mut good).unwrap_or(0.0);
        if !(med > 0.0 && med.is_finite()) {
            problems.push(format!(
                "{}: median flux {med:.3e} is not positive; left out",
                r.id
            ));
            continue;
        }
        let x: Vec<f64> = x.iter().map(|v| v / med).collect();
        let mut w: Vec<f64> = w.iter().map(|v| v * med * med).collect();
        if sys_floor > 0.0 {
            // the engine's own systematic floor: the same window, the same mean
            let fbar = crate::fit::running_mean(&x, &w, crate::fit::SYS_FLOOR_WINDOW);
            for (wj, f) in w.iter_mut().zip(&fbar) {
                if *wj > 0.0 {
                    *wj = 1.0 / (1.0 / *wj + (sys_floor * f).powi(2));
                }
            }
        }
        out.push(Row { id: r.id, x, w });
    }
    Ok((grid, out))
}

/// Fill pixels no kept spectrum covers by linear interpolation between the
/// nearest covered pixels (constant beyond the ends).
fn fill_uncovered(v: &mut [f64], covered: &[bool]) {
    let idx: Vec<usize> = (0..v.len()).filter(|&j| covered[j]).collect();
    if idx.is_empty() {
        return;
    }
    for j in 0..v.len() {
        if covered[j] {
            continue;
        }
        let after = idx.partition_point(|&i| i < j);
        v[j] = match (after.checked_sub(1).map(|i| idx[i]), idx.get(after)) {
            (Some(l), Some(&r)) => {
                let t = (j - l) as f64 / (r - l) as f64;
                v[l] * (1.0 - t) + v[r] * t
            }
            (Some(l), None) => v[l],
            (None, Some(&r)) => v[r],
            (None, None) => 0.0,
        };
    }
}

/// Helmert contrasts: the K points of a regular simplex in K − 1 dimensions,
/// centred on 0, as columns of a (K − 1) × K matrix (rows orthonormal and
/// orthogonal to (1, …, 1); common practice).
fn simplex(k: usize) -> Vec<Vec<f64>> {
    let d = k - 1;
    let mut h = vec![vec![0.0; k]; d];
    for (r, row) in h.iter_mut().enumerate() {
        let r1 = (r + 1) as f64;
        let s = 1.0 / (r1 * (r1 + 1.0)).sqrt();
        for (c, v) in row.iter_mut().enumerate() {
            *v = if c <= r {
                s
            } else if c == r + 1 {
                -r1 * s
            } else {
                0.0
            };
        }
    }
    h
}

/// The cone templates of a basis (see the module docs): K vectors spanning
/// the eigen-spectra whose non-negative combinations hold every coefficient
/// vector in `coeffs`.
fn cone(vectors: &[Vec<f64>], coeffs: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let k = vectors.len();
    let p = vectors[0].len();
    if k == 1 {
        return vec![vectors[0].clone()];
    }
    let d = k - 1;
    let b: Vec<Vec<f64>> = coeffs
        .iter()
        .filter(|c| c[0] > 0.0)
        .map(|c| c[1..].iter().map(|v| v / c[0]).collect())
        .collect();
    let nb = b.len().max(1) as f64;
    let mu: Vec<f64> = (0..d).map(|i| b.iter().map(|r| r[i]).sum::<f64>() / nb).collect();
    let sd: Vec<f64> = (0..d)
        .map(|i| {
            let v = b.iter().map(|r| (r[i] - mu[i]).powi(2)).sum::<f64>() / nb;
            v.sqrt().max(1e-6)
        })
        .collect();
    let h = simplex(k);
    // the simplex s·H holds y iff −h_j·y ≤ s/K for every vertex j
    let mut s: f64 = 0.0;
    for r in &b {
        for j in 0..k {
            let dot: f64 = (0..d).map(|i| -h[i][j] * (r[i] - mu[i]) / sd[i]).sum();
            s = s.max(k as f64 * dot);
        }
    }
    let s = if s > 0.0 && s.is_finite() { 1.1 * s } else { 1.0 };
    (0..k)
        .map(|j| {
            let v: Vec<f64> = (0..d).map(|i| mu[i] + sd[i] * s * h[i][j]).collect();
            let mut t: Vec<f64> = (0..p)
                .map(|x| vectors[0][x] + (0..d).map(|i| v[i] * vectors[i + 1][x]).sum::<f64>())
                .collect();
            // unit mean |flux| for readable numbers (a positive scale keeps the cone)
            let m = t.iter().map(|v| v.abs()).sum::<f64>() / p as f64;
            if m > 0.0 {
                t.iter_mut().for_each(|v| *v /= m);
            }
            t
        })
        .collect()
}

/// The built-in set's rest range (log10 Å) for `class`.
fn class_range(class: ObjectClass) -> (f64, f64) {
    match class {
        ObjectClass::Galaxy => super::builtin::GALAXY_GRID,
        ObjectClass::Quasar => super::builtin::QUASAR_GRID,
        ObjectClass::Star => super::builtin::STAR_GRID,
    }
}

/// Pixels at each end whose mean continues a template flat.
const PAD_EDGE: usize = 25;

/// Extend templates on `grid` to cover `range` (log10 Å) on the same step,
/// each continued flat at its mean over the [`PAD_EDGE`] pixels at that
/// end. Returns the new log10 λ of pixel 0 and the templates.
fn pad(grid: &LogGrid, fluxes: Vec<Vec<f64>>, (lo, hi): (f64, f64)) -> (f64, Vec<Vec<f64>>) {
    let dll = grid.dloglam;
    let i0 = grid.index0();
    let i_lo = ((lo / dll).floor() as i64).min(i0);
    let i_hi = ((hi / dll).ceil() as i64).max(i0 + grid.n as i64 - 1);
    let before = (i0 - i_lo) as usize;
    let after = (i_hi - (i0 + grid.n as i64 - 1)) as usize;
    let out = fluxes
        .into_iter()
        .map(|f| {
            let e = PAD_EDGE.min(f.len());
            let first = f[..e].iter().sum::<f64>() / e as f64;
            let last = f[f.len() - e..].iter().sum::<f64>() / e as f64;
            let mut v = vec![first; before];
            v.extend(f);
            v.extend(std::iter::repeat_n(last, after));
            v
        })
        .collect();
    (i_lo as f64 * dll, out)
}

/// A file-name-safe template name.
fn clean_name(s: &str) -> String {
    let c: String = s
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.' | '+') {
                c
            } else {
                '_'
            }
        })
        .collect();
    c.trim_start_matches('.').chars().take(48).collect()
}

/// Learn one group: returns templates and summary.
fn learn(
    class: ObjectClass,
    group: Option<&str>,
    spectra: &[&TrainingSpectrum],
    k_asked: usize,
    mode: FitMode,
    opts: &TrainOptions,
    problems: &mut Vec<String>,
) -> Result<(Vec<Template>, GroupSummary), String> {
    let k_want = if mode == FitMode::EachAlone { 1 } else { k_asked };
    let (grid, rows) = prepare(spectra, k_want, opts.dloglam, opts.sys_floor, problems)?;
    if rows.len() < opts.min_spectra.max(1) {
        return Err(format!(
            "{} usable spectra, at least {} needed",
            rows.len(),
            opts.min_spectra.max(1)
        ));
    }
    let k = k_want.min(rows.len().saturating_sub(1)).max(1);
    if k < k_want {
        problems.push(format!(
            "{class}: {} spectra allow only {k} components (asked {k_want})",
            rows.len()
        ));
    }
    let x: Vec<Vec<f64>> = rows.iter().map(|r| r.x.clone()).collect();
    let w: Vec<Vec<f64>> = rows.iter().map(|r| r.w.clone()).collect();
    let eo = EmpcaOptions {
        components: k,
        iterations: opts.iterations,
        ..EmpcaOptions::default()
    };
    let (mut pca, kept) = empca_clipped(&x, &w, &eo, &opts.clip).map_err(|e| e.to_string())?;
    let covered: Vec<bool> = (0..grid.n)
        .map(|j| (0..rows.len()).any(|i| kept[i] && w[i][j] > 0.0))
        .collect();
    for v in &mut pca.vectors {
        fill_uncovered(v, &covered);
    }
    let fluxes = if mode == FitMode::Basis {
        cone(&pca.vectors, &pca.coeffs)
    } else {
        let v = &pca.vectors[0];
        let m = v.iter().sum::<f64>() / v.len() as f64;
        vec![v.iter().map(|x| x / m).collect()]
    };
    // continue each template flat beyond the trained range (see the module docs)
    let (loglam0, fluxes) = pad(&grid, fluxes, class_range(class));
    let kind = if class == ObjectClass::Quasar {
        TemplateKind::Emission
    } else {
        TemplateKind::Absorption
    };
    let stem = match group {
        Some(g) => format!("{}-{}", opts.name, clean_name(g)),
        None => format!("{}-{}", opts.name, class.as_str()),
    };
    let templates: Vec<Template> = fluxes
        .into_iter()
        .enumerate()
        .map(|(i, f)| Template {
            name: if mode == FitMode::EachAlone {
                stem.clone()
            } else {
                format!("{stem}-{}", i + 1)
            },
            class,
            kind,
            loglam0,
            dloglam: grid.dloglam,
            flux: f.into_iter().map(|v| f64::from(v as f32)).collect(),
        })
        .collect();
    let summary = GroupSummary {
        class,
        group: group.map(str::to_string),
        fit_mode: mode,
        spectra_in: spectra.len(),
        spectra_used: pca.coeffs.len(),
        rejected: rows
            .iter()
            .zip(&kept)
            .filter(|(_, k)| !**k)
            .map(|(r, _)| r.id.clone())
            .collect(),
        components: k,
        power_explained: pca.explained.clone(),
        rest_range: (grid.wave(0), grid.wave(grid.n - 1)),
        iterations: pca.iterations,
        templates: templates.iter().map(|t| t.name.clone()).collect(),
    };
    Ok((templates, summary))
}

/// Train a template set from vetted spectra (see the module docs).
pub fn train(spectra: &[TrainingSpectrum], opts: &TrainOptions) -> Result<Trained, TrainError> {
    if opts.components == 0 || opts.components > 16 {
        return Err(TrainError::Options(format!(
            "components must be 1 to 16 (the engine solves at most 16 templates per class), got {}",
            opts.components
        )));
    }
    if !(opts.dloglam > 0.0 && opts.dloglam < 0.01) {
        return Err(TrainError::Options(format!(
            "the grid step {} must be in (0, 0.01) in log10 λ",
            opts.dloglam
        )));
    }
    let mut problems = Vec::new();
    let mut classes = Vec::new();
    let mut groups = Vec::new();
    for class in ObjectClass::ALL {
        let mine: Vec<&TrainingSpectrum> = spectra.iter().filter(|t| t.class == class).collect();
        if mine.is_empty() {
            continue;
        }
        if class == ObjectClass::Star && opts.star_mode == StarMode::PerType {
            let mut by_type: BTreeMap<String, Vec<&TrainingSpectrum>> = BTreeMap::new();
            for t in &mine {
                let g = t.group.clone().unwrap_or_else(|| "star".into());
                by_type.entry(g).or_default().push(*t);
            }
            let mut templates = Vec::new();
            for (g, v) in by_type {
                let g = if g.starts_with("star") {
                    g
                } else {
                    format!("star-{g}")
                };
                match learn(class, Some(&g), &v, 1, FitMode::EachAlone, opts, &mut problems) {
                    Ok((t, s)) => {
                        templates.extend(t);
                        groups.push(s);
                    }
                    Err(e) => problems.push(format!("{g}: not trained: {e}")),
                }
            }
            if !templates.is_empty() {
                classes.push(ClassTemplates {
                    class,
                    mode: FitMode::EachAlone,
                    templates,
                });
            }
            continue;
        }
        match learn(
            class,
            None,
            &mine,
            opts.components,
            FitMode::Basis,
            opts,
            &mut problems,
        ) {
            Ok((t, s)) => {
                classes.push(ClassTemplates {
                    class,
                    mode: FitMode::Basis,
                    templates: t,
                });
                groups.push(s);
            }
            Err(e) => problems.push(format!("{class}: not trained: {e}")),
        }
    }
    if classes.is_empty() {
        if spectra.is_empty() {
            problems.push("no vetted spectra were given".into());
        }
        return Err(TrainError::Nothing(problems));
    }
    let mut from_builtin = Vec::new();
    if opts.fill_from_builtin {
        for c in &super::builtin().classes {
            if !classes.iter().any(|x| x.class == c.class) {
                from_builtin.push(c.class);
                classes.push(c.clone());
            }
        }
    }
    let used: usize = groups.iter().map(|g| g.spectra_used).sum();
    let provenance = TrainingProvenance {
        trainer: "zvet templates train".into(),
        zvet_version: env!("CARGO_PKG_VERSION").into(),
        method: "expectation-maximisation PCA with per-pixel weights for noisy and missing \
                 data (Bailey 2012, PASP 124, 1015), uncentred, iterative sigma clipping of \
                 per-spectrum reduced chi2; basis classes written as a non-negative cone \
                 spanning the eigen-spectra"
            .into(),
        source: opts.source.clone(),
        spectra_in: spectra.len(),
        spectra_used: used,
        components: opts.components,
        dloglam: opts.dloglam,
        clip_kappa: opts.clip.kappa,
        groups,
        from_builtin,
    };
    let text = provenance_text(&provenance);
    Ok(Trained {
        set: TemplateSet {
            name: opts.name.clone(),
            provenance: text,
            classes,
        },
        provenance,
        problems,
    })
}

/// One-paragraph provenance for the set (shown by `zvet templates list`).
fn provenance_text(p: &TrainingProvenance) -> String {
    let mut s = format!(
        "Trained by zvet {} from {} ({} of {} spectra used) by {}.",
        p.zvet_version, p.source, p.spectra_used, p.spectra_in, p.method
    );
    for g in &p.groups {
        let what = g.group.clone().unwrap_or_else(|| g.class.as_str().to_string());
        s.push_str(&format!(
            " {what}: {} spectra ({} rejected), {} component{}, power explained {:.4}, rest {:.0}-{:.0} A.",
            g.spectra_used,
            g.rejected.len(),
            g.components,
            if g.components == 1 { "" } else { "s" },
            g.power_explained.last().copied().unwrap_or(0.0),
            g.rest_range.0,
            g.rest_range.1
        ));
    }
    if !p.from_builtin.is_empty() {
        let names: Vec<&str> = p.from_builtin.iter().map(|c| c.as_str()).collect();
        s.push_str(&format!(" Built-in templates kept for: {}.", names.join(", ")));
    }
    s
}

/// Write a trained set to `dir` in the layout of `templates-spectra/`, with
/// the training provenance in the descriptor's `generator` field.
pub fn write_trained(t: &Trained, dir: &Path) -> Result<(), TemplateError> {
    let g = serde_json::to_value(&t.provenance).map_err(|e| TemplateError::BadSet {
        name: t.set.name.clone(),
        message: e.to_string(),
    })?;
    super::write_set_with(&t.set, dir, Some(g))
}

// ---------------------------------------------------------------------------
// Sources: a campaign's vetted verdicts, or a table.

/// The confidence level below which verdicts are not trained on by default.
pub const DEFAULT_MIN_CERTAINTY: Confidence = Confidence::Secure;

/// Whether a verdict's certainty is good enough to train on: the one place
/// that maps the review scale onto the training filter.
pub fn meets_certainty(verdict: Option<Confidence>, min: Confidence) -> bool {
    verdict.is_some_and(|c| c >= min)
}

/// Which vetted objects to learn from.
#[derive(Debug, Clone, PartialEq)]
pub struct Selection {
    /// Classes to train (empty: all).
    pub classes: Vec<ObjectClass>,
    /// Lowest certainty kept.
    pub min_certainty: Confidence,
    /// Objects with any of these flags are left out.
    pub exclude_flags: Vec<Flag>,
}

impl Default for Selection {
    fn default() -> Self {
        Selection {
            classes: Vec::new(),
            min_certainty: DEFAULT_MIN_CERTAINTY,
            exclude_flags: Flag::ALL.to_vec(),
        }
    }
}

impl Selection {
    fn wants(&self, c: ObjectClass) -> bool {
        self.classes.is_empty() || self.classes.contains(&c)
    }
}

/// The vetted spectra of a campaign: the inspectors' logs merged (the
/// campaign's tolerance and adjudicator), rows as the training-catalogue
/// export builds them, spectra read with the campaign's reader options.
/// Conflicts, `unclear` verdicts, verdicts without a redshift and those the
/// selection filters out are skipped; problems come back as text.
pub fn from_campaign(
    campaign: &crate::campaign::Campaign,
    sel: &Selection,
) -> Result<(Vec<TrainingSpectrum>, Vec<String>), TrainError> {
    let (merged, mut problems) = campaign.merge(None)?;
    let (fits, p) = campaign.load_fits()?;
    problems.extend(p);
    let rows = crate::export::build_rows(
        &merged,
        &BTreeMap::new(),
        &fits,
        &crate::export::ExportOptions::default(),
    );
    let mut wanted: BTreeMap<String, (ObjectClass, f64)> = BTreeMap::new();
    for r in rows {
        let Some(class) = r.vetted_class.object_class() else {
            continue;
        };
        let Some(z) = r.vetted_z.filter(|z| z.is_finite()) else {
            continue;
        };
        if !sel.wants(class)
            || !meets_certainty(r.confidence, sel.min_certainty)
            || sel.exclude_flags.iter().any(|f| r.flags.contains(f))
        {
            continue;
        }
        wanted.insert(r.catalog.id.clone(), (class, z));
    }
    let (objects, p) = campaign.load_objects()?;
    problems.extend(p);
    let mut out = Vec::new();
    for o in objects {
        let Some(&(class, z)) = wanted.get(o.id()) else {
            continue;
        };
        let group = (class == ObjectClass::Star)
            .then(|| {
                o.fit.as_ref().and_then(|f| {
                    f.candidates
                        .iter()
                        .find(|c| c.class == ObjectClass::Star)
                        .map(|c| c.template.clone())
                })
            })
            .flatten();
        wanted.remove(o.id());
        out.push(TrainingSpectrum {
            id: o.id().to_string(),
            class,
            z,
            group,
            spectrum: o.spectrum,
        });
    }
    for id in wanted.keys() {
        problems.push(format!("{id}: vetted, but no spectrum with this id was read"));
    }
    Ok((out, problems))
}

/// Spectra listed in a CSV table with a header: `path` (or `file`,
/// `spectrum`), `class`, `z`, and optionally `id` (which object of a
/// multi-object file) and `type` (star type). Relative paths are taken from
/// the table's folder. Rows that cannot be used are reported and skipped.
pub fn from_table(
    path: &Path,
    read: &crate::io::ReadOptions,
    sel: &Selection,
) -> Result<(Vec<TrainingSpectrum>, Vec<String>), TrainError> {
    let terr = |message: String| TrainError::Table {
        path: path.to_path_buf(),
        message,
    };
    let mut rdr = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .flexible(true)
        .from_path(path)
        .map_err(|e| terr(e.to_string()))?;
    let headers: Vec<String> = rdr
        .headers()
        .map_err(|e| terr(e.to_string()))?
        .iter()
        .map(|h| h.to_ascii_lowercase())
        .collect();
    let col = |names: &[&str]| headers.iter().position(|h| names.contains(&h.as_str()));
    let c_path = col(&["path", "file", "spectrum"])
        .ok_or_else(|| terr("no column 'path' (or 'file', 'spectrum')".into()))?;
    let c_class = col(&["class"]).ok_or_else(|| terr("no column 'class'".into()))?;
    let c_z = col(&["z", "redshift"]).ok_or_else(|| terr("no column 'z'".into()))?;
    let c_id = col(&["id", "object_id"]);
    let c_type = col(&["type", "subtype", "star_type"]);
    let base = path.parent().unwrap_or(Path::new("."));
    let mut out = Vec::new();
    let mut problems = Vec::new();
    let mut cache: BTreeMap<PathBuf, Result<Vec<Spectrum>, String>> = BTreeMap::new();
    for (i, rec) in rdr.records().enumerate() {
        let line = i + 2;
        let rec = match rec {
            Ok(r) => r,
            Err(e) => {
                problems.push(format!("{}: line {line}: {e}", path.display()));
                continue;
            }
        };
        let get = |c: usize| rec.get(c).unwrap_or("").to_string();
        let class: ObjectClass = match get(c_class).parse() {
            Ok(c) => c,
            Err(e) => {
                problems.push(format!("{}: line {line}: {e}", path.display()));
                continue;
            }
        };
        if !sel.wants(class) {
            continue;
        }
        let z: f64 = match get(c_z).parse::<f64>() {
            Ok(z) if z.is_finite() => z,
            _ => {
                problems.push(format!(
                    "{}: line {line}: z '{}' is not a number",
                    path.display(),
                    get(c_z)
                ));
                continue;
            }
        };
        let p = PathBuf::from(get(c_path));
        let file = if p.is_absolute() { p } else { base.join(p) };
        let spectra = cache
            .entry(file.clone())
            .or_insert_with(|| crate::io::read_file(&file, read).map_err(|e| e.to_string()));
        let spectra = match spectra {
            Ok(v) => v,
            Err(e) => {
                problems.push(format!("line {line}: {e}"));
                continue;
            }
        };
        let want_id = c_id.map(&get).filter(|s| !s.is_empty());
        let s = match (&want_id, spectra.len()) {
            (Some(id), _) => spectra.iter().find(|s| &s.meta.id == id),
            (None, 1) => spectra.first(),
            (None, n) => {
                problems.push(format!(
                    "line {line}: {} holds {n} objects; name one in an 'id' column",
                    file.display()
                ));
                continue;
            }
        };
        let Some(s) = s else {
            problems.push(format!(
                "line {line}: no object '{}' in {}",
                want_id.unwrap_or_default(),
                file.display()
            ));
            continue;
        };
        out.push(TrainingSpectrum {
            id: want_id.unwrap_or_else(|| s.meta.id.clone()),
            class,
            z,
            group: c_type.map(&get).filter(|s| !s.is_empty()),
            spectrum: s.clone(),
        });
    }
    Ok((out, problems))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn simplex_vertices_are_regular_and_centred() {
        for k in 2..6 {
            let h = simplex(k);
            for j in 0..k {
                let n2: f64 = (0..k - 1).map(|i| h[i][j] * h[i][j]).sum();
                assert_relative_eq!(n2, (k - 1) as f64 / k as f64, epsilon = 1e-12);
                for l in 0..k {
                    if l != j {
                        let d: f64 = (0..k - 1).map(|i| h[i][j] * h[i][l]).sum();
                        assert_relative_eq!(d, -1.0 / k as f64, epsilon = 1e-12);
                    }
                }
            }
            for row in &h {
                assert_relative_eq!(row.iter().sum::<f64>(), 0.0, epsilon = 1e-12);
            }
        }
    }

    /// Every coefficient vector the cone was built from is a non-negative
    /// combination of the cone templates (solved exactly by least squares).
    #[test]
    fn cone_templates_hold_the_training_coefficients() {
        use nalgebra::{DMatrix, DVector};
        let p = 30;
        let v: Vec<Vec<f64>> = (0..3)
            .map(|c| {
                (0..p)
                    .map(|j| ((j * (c + 1)) as f64 * 0.37).sin() + if c == 0 { 2.0 } else { 0.0 })
                    .collect()
            })
            .collect();
        let coeffs: Vec<Vec<f64>> = (0..20)
            .map(|n| {
                let t = n as f64;
                vec![
                    1.0 + 0.1 * t,
                    (t * 0.9).sin() * (1.0 + 0.1 * t),
                    (t * 1.7).cos() * 0.5,
                ]
            })
            .collect();
        let cone = cone(&v, &coeffs);
        let a = DMatrix::from_fn(p, 3, |j, c| cone[c][j]);
        for c in &coeffs {
            let y = DVector::from_fn(p, |j, _| (0..3).map(|k| c[k] * v[k][j]).sum::<f64>());
            let sol = a.clone().svd(true, true).solve(&y, 1e-12).unwrap();
            assert!(sol.iter().all(|s| *s >= -1e-9), "{sol}");
            let r = &a * &sol - &y;
            assert!(r.norm() < 1e-8 * y.norm());
        }
    }

    #[test]
    fn fill_interpolates_gaps() {
        let mut v = vec![0.0, 1.0, 0.0, 0.0, 4.0, 0.0];
        fill_uncovered(&mut v, &[false, true, false, false, true, false]);
        assert_eq!(v, vec![1.0, 1.0, 2.0, 3.0, 4.0, 4.0]);
    }

    #[test]
    fn certainty_filter_orders_the_scale() {
        assert!(meets_certainty(Some(Confidence::Secure), Confidence::Secure));
        assert!(meets_certainty(Some(Confidence::Secure), Confidence::Probable));
        assert!(!meets_certainty(Some(Confidence::Probable), Confidence::Secure));
        assert!(!meets_certainty(Some(Confidence::Guess), Confidence::Probable));
        assert!(!meets_certainty(None, Confidence::Guess));
    }

    #[test]
    fn bad_options_and_empty_input_are_errors() {
        let o = TrainOptions {
            components: 0,
            ..TrainOptions::default()
        };
        assert!(matches!(train(&[], &o), Err(TrainError::Options(_))));
        assert!(matches!(
            train(&[], &TrainOptions::default()),
            Err(TrainError::Nothing(_))
        ));
    }
}
