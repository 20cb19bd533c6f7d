/*!
Close-ups: one small plot per diagnostic line that falls inside the spectrum at
the shown z, centred on where the line should be, so a redshift can be judged
at a glance. They move with the shown solution.
*/
use egui_plot::{Line, LineStyle, Plot, VLine};

use crate::lines::LineKind;
use crate::ui::state::AppState;
use crate::ui::view::Prepared;

/// Draw the close-up strip, `height` points tall.
pub fn ui(ui: &mut egui::Ui, state: &AppState, prepared: Option<&Prepared>, height: f32) {
    let Some(p) = prepared else {
        return;
    };
    if p.closeups.is_empty() {
        ui.weak("no diagnostic line falls inside the spectrum at the shown z");
        return;
    }
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
                Plot::new(("zvet-closeup", k, state.selection_serial))
                    .width(w)
                    .height((height - 22.0).max(40.0))
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
                    });
            });
        }
    });
}
