/*!
The dialog that asks the inspector's name (once: it is remembered). Every
verdict in the review log carries this name. It offers the inspectors the
open campaign knows, and can always be left: Esc (or "not now") closes it
and the window can be looked at without recording; "quit" (Ctrl+Q) closes
the window.
*/
use egui::{Key, TextEdit};

use crate::ui::action::Action;
use crate::ui::state::AppState;

/// Draw the dialog when it is open.
/// `has_log`: an inspector is already set, so the dialog may be cancelled.
pub fn ui(ctx: &egui::Context, state: &mut AppState, has_log: bool, out: &mut Vec<Action>) {
    let known = state.known_inspectors.clone();
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
        if !known.is_empty() {
            ui.label("this campaign's inspectors:");
            ui.horizontal_wrapped(|ui| {
                for name in &known {
                    if ui.button(format!("continue as {name}")).clicked() {
                        out.push(Action::SetInspector(name.clone()));
                    }
                }
            });
        }
        ui.horizontal(|ui| {
            if (ui.button("start reviewing").clicked() || entered) && !text.trim().is_empty() {
                out.push(Action::SetInspector(text.trim().to_string()));
            }
            let leave = if has_log { "cancel (Esc)" } else { "not now (Esc)" };
            if ui.button(leave).clicked() {
                out.push(Action::Escape);
            }
            if ui.button("quit (Ctrl+Q)").clicked() {
                out.push(Action::Quit);
            }
        });
    });
}
