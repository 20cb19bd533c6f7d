/*!
The help overlay: every key of the scheme, from the one table in `keys.rs`.
*/
use crate::ui::keys::KEYS;
use crate::ui::state::AppState;

/// Draw the overlay when it is open.
pub fn ui(ctx: &egui::Context, state: &mut AppState) {
    if !state.help_open {
        return;
    }
    let mut open = true;
    egui::Window::new("Keys")
        .open(&mut open)
        .collapsible(false)
        .resizable(false)
        .anchor(egui::Align2::CENTER_CENTER, [0.0, 0.0])
        .show(ctx, |ui| {
            ui.label("A clean object takes two keys: Space (accept), then N (next).");
            ui.add_space(4.0);
            egui::Grid::new("zvet-keys").striped(true).show(ui, |ui| {
                for (keys, what) in KEYS {
                    ui.monospace(*keys);
                    ui.label(*what);
                    ui.end_row();
                }
            });
            ui.add_space(4.0);
            ui.weak("Mouse: drag to pan, scroll to zoom, double-click to reset; click a candidate marker in the χ²(z) plots to preview it, elsewhere to refit near that z. Drop files or folders on the window to open them.");
        });
    if !open {
        state.help_open = false;
    }
}
