/*!
Catalogue facts for the selected object: position, u g r i z magnitudes with
errors, colours, the photometric class with its probability, the photometric
redshift — and a plain warning when the photometric class disagrees with the
fit. Also the fit's own numbers (χ², Δχ², S/N, warnings).
*/
use egui::RichText;

use crate::catalog::BANDS;
use crate::ui::state::AppState;

/// Draw the facts.
pub fn ui(ui: &mut egui::Ui, state: &AppState) {
    let Some(obj) = state.current() else {
        return;
    };
    ui.heading("Catalogue");
    let fit_class = state.current_fit().and_then(|f| f.best()).map(|c| c.class);
    match &obj.catalog {
        None => {
            ui.weak("no catalogue row for this object");
        }
        Some(row) => {
            if let (Some(p), Some(f)) = (row.phot_class, fit_class) {
                if p != f {
                    egui::Frame::new()
                        .fill(super::WARN.gamma_multiply(0.25))
                        .stroke(egui::Stroke::new(1.5, super::WARN))
                        .inner_margin(6.0)
                        .show(ui, |ui| {
                            ui.label(
                                RichText::new(format!("≠ photometry says {p}, the fit says {f}"))
                                    .color(super::WARN)
                                    .strong(),
                            );
                        });
                }
            }
            if let (Some(ra), Some(dec)) = (row.ra, row.dec) {
                ui.label(format!("RA {ra:.5}°  Dec {dec:+.5}°"));
            }
            egui::Grid::new("zvet-mags").striped(true).show(ui, |ui| {
                for (k, band) in BANDS.iter().enumerate() {
                    ui.label(*band);
                    match (row.mag[k], row.mag_err[k]) {
                        (Some(m), Some(e)) => ui.label(format!("{m:.2} ± {e:.2}")),
                        (Some(m), None) => ui.label(format!("{m:.2}")),
                        _ => ui.weak("—"),
                    };
                    if k + 1 < BANDS.len() {
                        match (row.mag[k], row.mag[k + 1]) {
                            (Some(a), Some(b)) => {
                                ui.label(format!("{}−{} {:+.2}", band, BANDS[k + 1], a - b))
                            }
                            _ => ui.weak(""),
                        };
                    }
                    ui.end_row();
                }
            });
            let class = row.phot_class.map_or("—".to_string(), |c| {
                let prob = row
                    .phot_class_prob
                    .map_or(String::new(), |p| format!(" (p = {p:.2})"));
                format!("{c}{prob}")
            });
            let colour = row
                .phot_class
                .map_or(ui.visuals().text_color(), super::object_colour);
            ui.label(RichText::new(format!("photometric class: {class}")).color(colour));
            ui.label(format!(
                "photometric z: {}",
                row.phot_z.map_or("—".into(), |z| format!("{z:.3}"))
            ));
        }
    }
    ui.add_space(6.0);
    ui.heading("Fit");
    match state.current_fit() {
        Some(fit) => {
            if let Some(b) = fit.best() {
                ui.label(
                    RichText::new(format!("{} z = {:.5} ± {:.5}", b.class, b.z, b.z_err))
                        .color(super::object_colour(b.class)),
                );
                ui.label(format!("template: {}", b.template));
                // a χ²/dof above the poor_fit cut without the warning: the
                // template's stated accuracy (built-in M dwarfs) allowed it
                let accuracy = crate::templates::stars_cool::known_accuracy(&b.template);
                if fit.chi2_reduced > crate::fit::POOR_FIT_CHI2R
                    && !fit.warnings.has(crate::fit::Warnings::POOR_FIT)
                    && accuracy > 0.0
                {
                    ui.weak(format!(
                        "template known to {:.0} % on small scales: poor_fit allows for it",
                        100.0 * accuracy
                    ));
                }
            }
            ui.label(format!(
                "Δχ² = {:.1}   χ²/dof = {:.2}   S/N = {:.1}",
                fit.delta_chi2, fit.chi2_reduced, fit.snr_median
            ));
            if fit.warnings.0 != 0 {
                ui.colored_label(super::WARN, format!("warnings: {}", fit.warnings.names()));
            }
            if fit.refit_kept {
                // the numbers and warnings above are the refit's
                ui.weak(format!(
                    "refit with {} continuum terms kept: the usual fit was poor",
                    crate::fit::POOR_FIT_POLY_TERMS
                ));
            }
        }
        None => {
            ui.weak("not fitted yet");
        }
    }
    let s = &obj.spectrum;
    ui.weak(format!(
        "{} pixels, {:.0}–{:.0} Å, {:.1} % masked",
        s.len(),
        s.wave()[0],
        s.wave()[s.len() - 1],
        100.0 * s.masked_fraction()
    ));
}
