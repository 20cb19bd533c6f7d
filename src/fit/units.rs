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

    /// Template `a` at fractional pixel `x` through the
    /// [`shift_weights`] kernel; zero-padded outside, exact at whole pixels.
    pub fn interp(&self, a: usize, x: f64) -> f64 {
        let (i, w) = shift_at(x);
        self.interp_with(a, i, &w)
    }

    /// Template `a` at pixel `i` plus the fraction whose [`shift_weights`]
    /// are `w` (for many pixels at one fraction: the weights once).
    pub fn interp_with(&self, a: usize, i: i64, w: &[f64; SHIFT_TAPS]) -> f64 {
        let t = &self.t[a];
        let m = t.len() as i64;
        let at = |j: i64| if j >= 0 && j < m { t[j as usize] } else { 0.0 };
        w.iter()
            .enumerate()
            .map(|(q, wq)| wq * at(i + q as i64 + FIRST_TAP))
            .sum()
    }
}

/// The whole part of `x0` and the weights of its fraction: the shift of
/// every pixel `i` to `i + x0` is [`Unit::interp_with`] at `i + whole`.
pub fn shift_at(x0: f64) -> (i64, [f64; SHIFT_TAPS]) {
    let fl = x0.floor();
    let d = x0 - fl;
    let w = if d == 0.0 {
        let mut w = [0.0; SHIFT_TAPS];
        w[(-FIRST_TAP) as usize] = 1.0;
        w
    } else {
        shift_weights(d)
    };
    (fl as i64, w)
}

/// Taps of the sub-pixel shift kernel ([`shift_weights`]).
pub const SHIFT_TAPS: usize = 8;

/// Offset of the kernel's first tap from the pixel below the point.
pub const FIRST_TAP: i64 = 1 - (SHIFT_TAPS as i64) / 2;

/// Weights of the taps `FIRST_TAP ..` (relative to the pixel below) that
/// interpolate a template at sub-pixel offset `d` ∈ (0, 1): the Lanczos
/// kernel sinc(x)·sinc(x/4) (a windowed sinc, common practice), normalised
/// to sum 1 so that a constant stays constant. A template shifted by a
/// fraction of a pixel must keep its line depths: the 4-tap cubic
/// convolution used before (Keys 1981) passes a quarter-cycle-per-pixel
/// ripple at 88 % for half a pixel and 100 % at whole pixels, so a spectrum
/// of lower resolution than the templates was fitted best at half-pixel
/// velocities (mock stars' velocities came in clusters one pixel, 69 km/s,
/// apart, with a scatter 3–9 times the stated σ_v). This kernel passes
/// 1/8–1/4 cycle per pixel within 1 % at every offset
/// (`shift_kernel_keeps_line_depths` in the tests).
pub fn shift_weights(d: f64) -> [f64; SHIFT_TAPS] {
    use std::f64::consts::{FRAC_1_SQRT_2, PI};
    // sin(π·n/4) for the taps n = FIRST_TAP … FIRST_TAP + 7 (−3 … 4), one
    // whole period: cos(π·n/4) = sin(π·(n + 2)/4) is the entry two taps on
    const SIN_N4: [f64; SHIFT_TAPS] = [
        -FRAC_1_SQRT_2,
        -1.0,
        -FRAC_1_SQRT_2,
        0.0,
        FRAC_1_SQRT_2,
        1.0,
        FRAC_1_SQRT_2,
        0.0,
    ];
    let a = (SHIFT_TAPS / 2) as f64;
    // x = n − d: sin πx = (−1)^(n+1) sin πd and sin(πx/4) by the angle
    // difference, so one sin and one sin_cos serve all eight taps
    let s1 = (PI * d).sin();
    let (s4, c4) = (PI * d / a).sin_cos();
    let mut w = [0.0; SHIFT_TAPS];
    for (q, wq) in w.iter_mut().enumerate() {
        let n = q as i64 + FIRST_TAP;
        let x = n as f64 - d;
        if x.abs() < 1e-12 {
            *wq = 1.0;
            continue;
        }
        let sin_px = if n % 2 == 0 { -s1 } else { s1 };
        let sin_px4 = SIN_N4[q] * c4 - SIN_N4[(q + 2) % SHIFT_TAPS] * s4;
        *wq = (sin_px / (PI * x)) * (sin_px4 / (PI * x / a));
    }
    let sum: f64 = w.iter().sum();
    w.iter_mut().for_each(|v| *v /= sum);
    w
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

#[cfg(test)]
mod tests {
    use super::*;

    /// Gain for a cosine of `f` cycles per pixel interpolated at offset `d`
    /// with weights `w` on taps `first ..`: the interpolated value at the
    /// point over the true one (the cosine's phase at the point is 0).
    fn gain(w: &[f64], first: i64, f: f64, d: f64) -> f64 {
        let two_pi = 2.0 * std::f64::consts::PI;
        w.iter()
            .enumerate()
            .map(|(q, wq)| wq * (two_pi * f * ((q as i64 + first) as f64 - d)).cos())
            .sum()
    }

    /// Keys 1981 cubic convolution (a = −1/2) on taps −1, 0, 1, 2: the
    /// kernel zvet used before, as published.
    fn keys(d: f64) -> [f64; 4] {
        [
            ((-0.5 * d + 1.0) * d - 0.5) * d,
            (1.5 * d - 2.5) * d * d + 1.0,
            ((-1.5 * d + 2.0) * d + 0.5) * d,
            (0.5 * d - 0.5) * d * d,
        ]
    }

    #[test]
    fn shift_weights_are_the_lanczos_kernel() {
        // the angle-difference evaluation against sinc(x)·sinc(x/4) summed
        // directly, normalised
        let sinc = |x: f64| {
            let px = std::f64::consts::PI * x;
            if x.abs() < 1e-12 {
                1.0
            } else {
                px.sin() / px
            }
        };
        for d in [0.01, 0.2, 0.5, 0.73, 0.99] {
            let direct: Vec<f64> = (0..SHIFT_TAPS)
                .map(|q| {
                    let x = (q as i64 + FIRST_TAP) as f64 - d;
                    sinc(x) * sinc(x / 4.0)
                })
                .collect();
            let sum: f64 = direct.iter().sum();
            for (a, b) in shift_weights(d).iter().zip(&direct) {
                assert!((a - b / sum).abs() < 1e-14, "d = {d}: {a} against {}", b / sum);
            }
        }
    }

    #[test]
    fn shift_kernel_keeps_line_depths() {
        for d in [0.1, 0.25, 0.5, 0.75, 0.9] {
            // a constant stays constant, at every offset
            let s: f64 = shift_weights(d).iter().sum();
            assert!((s - 1.0).abs() < 1e-12, "d = {d}: Σw = {s}");
            // a line of σ ≈ 1 pixel has most of its depth at 1/8–1/4 cycle
            // per pixel: kept within 1 % at every offset, where the cubic
            // convolution loses up to 12 % (half a pixel, a quarter cycle)
            for f in [0.125, 0.1875, 0.25] {
                let g = gain(&shift_weights(d), FIRST_TAP, f, d);
                let k = gain(&keys(d), -1, f, d);
                assert!((g - 1.0).abs() < 0.01, "d = {d}, f = {f}: gain {g}");
                assert!(
                    (g - 1.0).abs() <= (k - 1.0).abs() + 1e-3,
                    "d = {d}, f = {f}: {g} against the cubic's {k}"
                );
            }
        }
        assert!(gain(&keys(0.5), -1, 0.25, 0.5) < 0.89);
    }
}
