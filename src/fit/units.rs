/*!
Fit units: the templates of one class (a joint basis) or one stellar template
(fitted alone), put on the engine's log10 λ step with pixel centres at whole
multiples of the step, so that a trial redshift is a whole-pixel shift.

A unit's template arrays start at the global index `t0` (pixel r sits at
log10 λ = (t0 + r)·dloglam) and are taken as zero outside `[t0, t0 + m)`.
Templates of one basis are cut to their common coverage.
*/
use super::config::FitError;
use crate::templates::{ClassTemplates, FitMode, Template, TemplateKind, TemplateSet};
use crate::ObjectClass;

/// Templates fitted together at one trial redshift.
#[derive(Debug, Clone)]
pub struct Unit {
    /// Class.
    pub class: ObjectClass,
    /// Name: the template name (alone) or `<class>-basis`.
    pub name: String,
    /// Kind of the first template (used by cross-correlation).
    pub kind: TemplateKind,
    /// Global index of pixel 0 (log10 λ = t0·dloglam).
    pub t0: i64,
    /// Template arrays, all of the same length.
    pub t: Vec<Vec<f64>>,
    /// Name of each template.
    pub names: Vec<String>,
    /// Kind of each template.
    pub kinds: Vec<TemplateKind>,
    /// Columns per template: 1 (T_k) or 2 (T_k and its throughput term
    /// T_k·x, x the first Legendre polynomial across the fitted range); set
    /// by the engine from its configuration.
    pub groups: usize,
}

impl Unit {
    /// Number of templates.
    pub fn k(&self) -> usize {
        self.t.len()
    }

    /// Number of template columns (templates × [`Unit::groups`]).
    pub fn cols(&self) -> usize {
        self.k() * self.groups
    }

    /// Length of the template arrays.
    pub fn m(&self) -> usize {
        self.t.first().map_or(0, Vec::len)
    }

    /// Cubic-convolution interpolation (Keys 1981, a = −1/2) of template `a`
    /// at fractional pixel `x`; zero-padded outside, exact at whole pixels.
    pub fn interp(&self, a: usize, x: f64) -> f64 {
        let t = &self.t[a];
        let m = t.len() as i64;
        let fl = x.floor();
        let i = fl as i64;
        let d = x - fl;
        let at = |j: i64| if j >= 0 && j < m { t[j as usize] } else { 0.0 };
        if d == 0.0 {
            return at(i);
        }
        // Keys (1981) cubic-convolution weights for a = -0.5.
        let w0 = ((-0.5 * d + 1.0) * d - 0.5) * d;
        let w1 = (1.5 * d - 2.5) * d * d + 1.0;
        let w2 = ((-1.5 * d + 2.0) * d + 0.5) * d;
        let w3 = (0.5 * d - 0.5) * d * d;
        w0 * at(i - 1) + w1 * at(i) + w2 * at(i + 1) + w3 * at(i + 2)
    }
}

/// Global pixel range `[lo, hi]` (inclusive) of a template on step `dll`.
fn span(t: &Template, dll: f64) -> Option<(i64, i64)> {
    if t.flux.len() < 2 || t.dloglam.is_nan() || t.dloglam <= 0.0 || !t.loglam0.is_finite() {
        return None;
    }
    let a = t.loglam0;
    let b = t.loglam0 + (t.flux.len() - 1) as f64 * t.dloglam;
    let lo = (a / dll - 1e-6).ceil() as i64;
    let hi = (b / dll + 1e-6).floor() as i64;
    (hi > lo).then_some((lo, hi))
}

/// Sample template `t` at global pixels `lo..=hi` of step `dll`.
fn sample(t: &Template, lo: i64, hi: i64, dll: f64) -> Vec<f64> {
    (lo..=hi)
        .map(|g| {
            let x = (g as f64 * dll - t.loglam0) / t.dloglam;
            let xr = x.round();
            if (x - xr).abs() < 1e-6 && xr >= 0.0 && (xr as usize) < t.flux.len() {
                t.flux[xr as usize]
            } else {
                t.at(10f64.powf(g as f64 * dll)).unwrap_or(0.0)
            }
        })
        .map(|v| if v.is_finite() { v } else { 0.0 })
        .collect()
}

fn class_units(ct: &ClassTemplates, dll: f64) -> Result<Vec<Unit>, FitError> {
    let mut spans = Vec::new();
    for t in &ct.templates {
        let s = span(t, dll)
            .ok_or_else(|| FitError::BadTemplates(format!("template '{}' has no usable pixels", t.name)))?;
        spans.push(s);
    }
    match ct.mode {
        FitMode::EachAlone => Ok(ct
            .templates
            .iter()
            .zip(&spans)
            .map(|(t, &(lo, hi))| Unit {
                class: ct.class,
                name: t.name.clone(),
                kind: t.kind,
                t0: lo,
                t: vec![sample(t, lo, hi, dll)],
                names: vec![t.name.clone()],
                kinds: vec![t.kind],
                groups: 1,
            })
            .collect()),
        FitMode::Basis => {
            let lo = spans.iter().map(|s| s.0).max().unwrap_or(0);
            let hi = spans.iter().map(|s| s.1).min().unwrap_or(0);
            if hi <= lo || ct.templates.is_empty() {
                return Err(FitError::BadTemplates(format!(
                    "the {} templates share no wavelength range",
                    ct.class
                )));
            }
            Ok(vec![Unit {
                class: ct.class,
                name: format!("{}-basis", ct.class),
                kind: ct.templates[0].kind,
                t0: lo,
                t: ct.templates.iter().map(|t| sample(t, lo, hi, dll)).collect(),
                names: ct.templates.iter().map(|t| t.name.clone()).collect(),
                kinds: ct.templates.iter().map(|t| t.kind).collect(),
                groups: 1,
            }])
        }
    }
}

/// All units for the configured classes (classes missing from the set are skipped).
pub fn build_units(set: &TemplateSet, classes: &[ObjectClass], dll: f64) -> Result<Vec<Unit>, FitError> {
    let mut out = Vec::new();
    for &c in classes {
        if let Some(ct) = set.class(c) {
            if !ct.templates.is_empty() {
                out.extend(class_units(ct, dll)?);
            }
        }
    }
    if out.is_empty() {
        return Err(FitError::BadTemplates(
            "no templates for any requested class".into(),
        ));
    }
    Ok(out)
}
