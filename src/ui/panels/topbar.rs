/*!
The bar across the top: what is open, progress (reviewed / total, fits
running), opening files by dialog or typed path, the inspector, help.
*/
use egui::{ProgressBar, RichText, TextEdit};

use crate::ui::action::{Action, OpenKind};
use crate::ui::state::AppState;

/// Numbers the bar shows that live outside the state.
pub struct TopInfo<'a> {
    /// Objects with a class verdict.
    pub reviewed: usize,
    /// (automatic fits done, asked for).
    pub fits: (usize, usize),
    /// A dialog or file read is running.
    pub loading: bool,
    /// Inspector name, once known.
    pub inspector: Option<&'a str>,
}

/// Draw the bar.
pub fn ui(ui: &mut egui::Ui, state: &mut AppState, info: &TopInfo<'_>, out: &mut Vec<Action>) {
    egui::Panel::top("zvet-top").show(ui, |ui| {
        ui.horizontal_wrapped(|ui| {
            ui.label(RichText::new(&state.title).strong().size(16.0));
            ui.separator();
            let total = state.objects.len();
            let frac = if total == 0 {
                0.0
            } else {
                info.reviewed as f32 / total as f32
            };
            ui.label(RichText::new(format!("reviewed {} / {}", info.reviewed, total)).strong());
            ui.add(ProgressBar::new(frac).desired_width(110.0));
            let (done, asked) = info.fits;
            if done < asked {
                ui.spinner();
                ui.label(format!("fitting {done} / {asked}"));
            }
            if info.loading {
                ui.spinner();
                ui.label("reading…");
            }
            ui.separator();
            ui.menu_button("Open…", |ui| {
                for kind in OpenKind::ALL {
                    if ui.button(format!("{}…", kind.label())).clicked() {
                        out.push(Action::Browse(kind));
                        ui.close();
                    }
                }
            });
            let l = ui.label("path");
            ui.add(
                TextEdit::singleline(&mut state.path_text)
                    .hint_text("or type / drop a path here")
                    .desired_width(200.0),
            )
            .labelled_by(l.id);
            ui.menu_button("open as", |ui| {
                for kind in OpenKind::ALL {
                    if ui.button(kind.label()).clicked() {
                        let p = state.path_text.trim();
                        out.push(Action::Open(kind, vec![p.into()]));
                        ui.close();
                    }
                }
            });
            ui.separator();
            let who = info.inspector.unwrap_or("—");
            if ui
                .button(format!("inspector: {who}"))
                .on_hover_text("change the inspector (each has a review log)")
                .clicked()
            {
                out.push(Action::AskInspector);
            }
            if ui.button("keys (H)").clicked() {
                out.push(Action::ToggleHelp);
            }
        });
    });
}
