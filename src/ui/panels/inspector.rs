/*!
The dialog that asks the inspector's name (once: it is remembered). Every
verdict in the review log carries this name.
*/
use egui::{Key, TextEdit};

use crate::ui::action::Action;
use crate::ui::state::AppState;

/// Draw the dialog when it is open.
/// `has_log`: an inspector is already set, so the dialog may be cancelled.
pub fn ui(ctx: &egui::Context, state: &mut AppState, has_log: bool, out: &mut Vec<Action>) {
    let Some(text) = state.name_prompt.as_mut() else {
        return;
    };
    egui::Modal::new(egui::Id::unique("zvet-name")).show(ctx, |ui| {
        ui.heading("Who is reviewing?");
        ui.label("Your name goes with every verdict you record, and is remembered.");
        let l = ui.label("inspector name");
        let r = ui
            .add(TextEdit::singleline(text).hint_text("e.g. your initials"))
            .labelled_by(l.id);
        r.request_focus();
        let entered = ui.input(|i| i.key_pressed(Key::Enter));
        ui.horizontal(|ui| {
            if (ui.button("start reviewing").clicked() || entered) && !text.trim().is_empty() {
                out.push(Action::SetInspector(text.trim().to_string()));
            }
            if has_log && ui.button("cancel").clicked() {
                out.push(Action::Escape);
            }
        });
    });
}
