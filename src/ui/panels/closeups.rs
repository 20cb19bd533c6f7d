/*!
Close-ups: one small plot per diagnostic line that falls inside the spectrum at
the shown z, centred on where the line should be, so a redshift can be judged
at a glance. They move with the shown solution.

Where the engine measured the line at the shown solution (see
[`crate::fit::emission`]), the close-up also draws the fitted Gaussians on the
continuum under them and writes the measurement beneath the name: flux ± error
and rest equivalent width for a detected line, a 3σ upper limit for an
undetected one, the width when it was fixed, and the stellar Balmer
absorption equivalent width where it was measured.
*/
use egui_plot::{Line, LineStyle, Plot, VLine};

use crate::fit::{velocity_sep_kms, FitResult, LineMeasurement, C_KMS};
use crate::lines::LineKind;
use crate::ui::state::AppState;
use crate::ui::view::Prepared;

/// Largest velocity difference (km/s) between the shown z and the z the
/// lines were measured at for the measurements to be drawn.
const SAME_SOLUTION_KMS: f64 = 300.0;

/// Draw the close-up strip, `height` points tall.
pub fn ui(ui: &mut egui::Ui, state: &AppState, prepared: Option<&Prepared>, height: f32) {
    let Some(p) = prepared else {
        return;
    };
    if p.closeups.is_empty() {
        ui.weak("no diagnostic line falls inside the spectrum at the shown z");
        return;
    }
    let measured = state
        .shown
        .as_ref()
        .and_then(|sh| measured_lines(state.listed_fit(), sh.z()));
    let zf = match (&state.shown, state.view.rest_frame) {
        (Some(sh), true) => 1.0 + sh.z(),
        _ => 1.0,
    };
    let n = p.closeups.len() as f32;
    let spacing = ui.spacing().item_spacing.x;
    let w = ((ui.available_width() - spacing * (n - 1.0)) / n).max(60.0);
    ui.horizontal(|ui| {
        for (k, c) in p.closeups.iter().enumerate() {
            ui.vertical(|ui| {
                ui.set_width(w);
                let colour = match c.kind {
                    LineKind::Emission => super::EMISSION,
                    _ => super::ABSORPTION,
                };
                ui.colored_label(colour, c.name);
                let m = measured.and_then(|ls| ls.iter().find(|l| l.name == c.name));
                let caption = m.map(caption).unwrap_or_default();
                ui.small(if caption.is_empty() {
                    " ".to_string()
                } else {
                    caption
                });
                let (x0, x1) = c
                    .flux
                    .first()
                    .zip(c.flux.last())
                    .map_or((c.centre, c.centre), |(a, b)| (a[0], b[0]));
                let fitted = measured
                    .map(|ls| profile(ls, x0 * zf, x1 * zf, zf))
                    .unwrap_or_default();
                Plot::new(("zvet-closeup", k, state.selection_serial))
                    .width(w)
                    .height((height - 38.0).max(40.0))
                    .show_axes([false, false])
                    .show_grid(false)
                    .allow_zoom(false)
                    .allow_drag(false)
                    .allow_scroll(false)
                    .allow_double_click_reset(false)
                    .show(ui, |pui| {
                        pui.vline(
                            VLine::new("expected", c.centre)
                                .color(colour.gamma_multiply(0.7))
                                .style(LineStyle::dashed_dense()),
                        );
                        pui.line(Line::new("flux", c.flux.clone()).color(super::FLUX));
                        if !c.model.is_empty() {
                            pui.line(Line::new("model", c.model.clone()).color(super::MODEL));
                        }
                        if !fitted.is_empty() {
                            pui.line(
                                Line::new("line fit", fitted)
                                    .color(super::EMISSION)
                                    .style(LineStyle::dashed_loose()),
                            );
                        }
                    });
            });
        }
    });
}

/// The fit's line measurements when they belong to the shown redshift.
pub fn measured_lines(fit: Option<&FitResult>, shown_z: f64) -> Option<&[LineMeasurement]> {
    let fit = fit?;
    let z = fit.best()?.z;
    (velocity_sep_kms(z, shown_z) <= SAME_SOLUTION_KMS).then_some(fit.lines.as_slice())
}

/// The text under a close-up's name for a measured line.
pub fn caption(m: &LineMeasurement) -> String {
    let mut parts = Vec::new();
    match m.upper_limit() {
        Some(u) => parts.push(format!("F < {} (3σ)", sig3(u))),
        None => {
            parts.push(format!("F {} ± {}", sig3(m.flux), sig3(m.flux_err)));
            if m.ew_rest.is_finite() {
                parts.push(format!("EW {:.1} Å", m.ew_rest));
            }
        }
    }
    if m.detected() {
        parts.push(format!(
            "σ {:.0} km/s{}",
            m.sigma_kms,
            if m.width_fitted { "" } else { " fixed" }
        ));
    }
    if let Some(a) = m.abs_ew_rest {
        parts.push(format!("abs. EW {a:.1} Å"));
    }
    parts.join(" · ")
}

/// Three significant figures, no exponent for ordinary magnitudes.
fn sig3(x: f64) -> String {
    if !x.is_finite() {
        return "–".into();
    }
    let a = x.abs();
    if a == 0.0 || (1e-2..1e5).contains(&a) {
        let d = if a >= 100.0 || a == 0.0 {
            0
        } else if a >= 10.0 {
            1
        } else if a >= 1.0 {
            2
        } else {
            3
        };
        format!("{x:.d$}")
    } else {
        format!("{x:.2e}")
    }
}

/// The fitted lines between observed `lo` and `hi` (Å) on the continuum under
/// the nearest one, as plot points (x divided by `zf`).
pub fn profile(lines: &[LineMeasurement], lo: f64, hi: f64, zf: f64) -> Vec<[f64; 2]> {
    let near: Vec<&LineMeasurement> = lines
        .iter()
        .filter(|l| l.obs_wave >= lo && l.obs_wave <= hi && l.flux.is_finite() && l.sigma_kms > 0.0)
        .collect();
    let mid = 0.5 * (lo + hi);
    let Some(base) = near
        .iter()
        .filter(|l| l.continuum.is_finite())
        .min_by(|a, b| (a.obs_wave - mid).abs().total_cmp(&(b.obs_wave - mid).abs()))
        .map(|l| l.continuum)
    else {
        return Vec::new();
    };
    const N: usize = 200;
    (0..=N)
        .map(|i| {
            let lam = lo + (hi - lo) * i as f64 / N as f64;
            let y = base
                + near
                    .iter()
                    .map(|l| {
                        let s = l.obs_wave * l.sigma_kms / C_KMS;
                        let u = (lam - l.obs_wave) / s;
                        l.flux / ((2.0 * std::f64::consts::PI).sqrt() * s) * (-0.5 * u * u).exp()
                    })
                    .sum::<f64>();
            [lam / zf, y]
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn line(flux: f64, err: f64) -> LineMeasurement {
        LineMeasurement {
            name: "Hβ".into(),
            rest_wave: 4862.68,
            obs_wave: 4862.68 * 1.1,
            flux,
            flux_err: err,
            sigma_kms: 80.0,
            ew_rest: flux / (2.0 * 1.1),
            snr: flux / err,
            width_fitted: true,
            continuum: 2.0,
            abs_ew_rest: Some(3.26),
        }
    }

    #[test]
    fn captions_give_fluxes_for_detections_and_upper_limits_otherwise() {
        assert_eq!(
            caption(&line(82.4, 6.1)),
            "F 82.4 ± 6.10 · EW 37.5 Å · σ 80 km/s · abs. EW 3.3 Å"
        );
        // S/N 1: an upper limit of 3σ
        assert_eq!(caption(&line(6.0, 6.0)), "F < 18.0 (3σ) · abs. EW 3.3 Å");
    }

    #[test]
    fn the_profile_peaks_at_the_line_with_its_flux_on_the_continuum() {
        let l = line(82.4, 6.1);
        let (lo, hi) = (l.obs_wave - 30.0, l.obs_wave + 30.0);
        let p = profile(std::slice::from_ref(&l), lo, hi, 1.0);
        // trapezoid sum of (y − continuum) is the flux
        let area: f64 = p
            .windows(2)
            .map(|w| 0.5 * (w[0][1] + w[1][1] - 4.0) * (w[1][0] - w[0][0]))
            .sum();
        approx::assert_relative_eq!(area, 82.4, max_relative = 1e-3);
        // nothing measured, nothing drawn
        assert!(profile(&[], lo, hi, 1.0).is_empty());
    }
}
