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
    /// Automatic fits: done, asked for, rate, time left.
    pub fits: crate::ui::jobs::FitProgress,
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
            let p = info.fits;
            if p.done < p.total {
                ui.spinner();
                ui.label(fit_progress_text(&p));
                if ui
                    .button("stop fits")
                    .on_hover_text("give up the background fits not started (an object without a fit is fitted when shown)")
                    .clicked()
                {
                    out.push(Action::CancelFits);
                }
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

/// "fitting 120 / 5000 · 31.5/s · 2 min 35 s left".
pub fn fit_progress_text(p: &crate::ui::jobs::FitProgress) -> String {
    let mut t = format!("fitting {} / {}", p.done, p.total);
    if p.done > 0 {
        t.push_str(&format!(" · {:.1}/s", p.rate));
    }
    if let Some(s) = p.left_s.filter(|s| s.is_finite()) {
        let s = s.round() as u64;
        let left = if s >= 3600 {
            format!("{} h {:02} min", s / 3600, (s % 3600) / 60)
        } else if s >= 60 {
            format!("{} min {:02} s", s / 60, s % 60)
        } else {
            format!("{s} s")
        };
        t.push_str(&format!(" · {left} left"));
    }
    t
}
