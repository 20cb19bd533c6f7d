/*!
The strip along the bottom: the latest message (errors in the theme's error
colour) and, on hover, the earlier ones. Errors never stop the window.
*/
use crate::ui::state::AppState;

/// Draw the strip.
pub fn ui(ui: &mut egui::Ui, state: &AppState) {
    egui::Panel::bottom("zvet-messages").show(ui, |ui| {
        ui.horizontal(|ui| {
            if state.flag_chord {
                ui.label(
                    egui::RichText::new("flag: press 1–6 (Esc to cancel)")
                        .color(super::WARN)
                        .strong(),
                );
                ui.separator();
            }
            match state.messages.last() {
                Some(m) => {
                    let colour = if m.is_error {
                        ui.visuals().error_fg_color
                    } else {
                        ui.visuals().weak_text_color()
                    };
                    let r = ui.colored_label(colour, &m.text);
                    if state.messages.len() > 1 {
                        r.on_hover_ui(|ui| {
                            for m in state.messages.iter().rev().take(12) {
                                ui.label(&m.text);
                            }
                        });
                    }
                }
                None => {
                    ui.weak("Space accepts, N moves on, H lists every key");
                }
            }
        });
    });
}
