/*!
The verdict panel: the shown solution and the button that accepts it, class,
typed z and refit, confidence, flags, note, undo/redo, and the object's
history (who did what, when).
*/
use egui::{Key, RichText, TextEdit};

use crate::review::{Change, Confidence, Event, Flag, Verdict, VerdictClass, ZSource};
use crate::ui::action::Action;
use crate::ui::state::{AppState, FocusRequest};

use super::queue::flag_words;

const CLASSES: [VerdictClass; 4] = [
    VerdictClass::Galaxy,
    VerdictClass::Quasar,
    VerdictClass::Star,
    VerdictClass::Unclear,
];

/// Words for where a z came from.
pub fn source_words(s: ZSource) -> &'static str {
    match s {
        ZSource::Automatic => "automatic",
        ZSource::Candidate => "chosen candidate",
        ZSource::Refit => "refit near a chosen z",
        ZSource::Typed => "set by hand",
    }
}

/// Draw the verdict panel.
pub fn ui(
    ui: &mut egui::Ui,
    state: &mut AppState,
    verdict: Option<&Verdict>,
    history: &[Event],
    (can_undo, can_redo): (bool, bool),
    out: &mut Vec<Action>,
) {
    let Some(obj) = state.current() else {
        ui.label("Nothing selected.");
        return;
    };
    ui.heading(format!("Verdict on {}", obj.id()));
    let reviewed = verdict.is_some_and(|v| v.class.is_some());
    ui.label(if reviewed {
        RichText::new("reviewed").color(egui::Color32::from_rgb(120, 210, 120))
    } else {
        RichText::new("not reviewed yet").weak()
    });
    ui.add_space(4.0);

    match &state.shown {
        Some(s) => {
            ui.label(format!(
                "shown: {} at z = {:.5} ({})",
                s.class(),
                s.z(),
                source_words(s.source)
            ));
            let accept = ui
                .add(egui::Button::new(RichText::new("Accept shown  [Space]").strong()))
                .on_hover_text("record the shown class and z with the chosen (or solid) confidence");
            if accept.clicked() {
                out.push(Action::AcceptShown);
            }
        }
        None if state
            .fit_errors
            .get(state.selected.unwrap_or(0))
            .is_some_and(|e| e.is_some()) =>
        {
            ui.colored_label(ui.visuals().error_fg_color, "the automatic fit failed");
        }
        None => {
            ui.horizontal(|ui| {
                ui.spinner();
                ui.label("fitting…");
            });
        }
    }
    ui.add_space(4.0);

    ui.label("class");
    ui.horizontal(|ui| {
        for c in CLASSES {
            let on = verdict.and_then(|v| v.class) == Some(c);
            let text = RichText::new(c.as_str()).color(super::class_colour(c));
            if ui.selectable_label(on, text).clicked() {
                out.push(Action::SetClass(c));
            }
        }
    });

    ui.horizontal(|ui| {
        let l = ui.label("redshift");
        let z_id = crate::ui::keys::field_id(FocusRequest::Redshift);
        // Focus before the field is drawn, so keys typed in this very frame
        // already go into it.
        if state.focus == Some(FocusRequest::Redshift) {
            ui.memory_mut(|m| m.request_focus(z_id));
            state.focus = None;
        }
        let r = ui
            .add(
                TextEdit::singleline(&mut state.z_text)
                    .id(z_id)
                    .desired_width(90.0),
            )
            .labelled_by(l.id);
        let entered = r.lost_focus() && ui.input(|i| i.key_pressed(Key::Enter));
        if ui.button("set z").clicked() || entered {
            out.push(Action::TypeZ(state.z_text.clone()));
        }
        if ui
            .button("refit here")
            .on_hover_text("fit again, only near this z (R)")
            .clicked()
        {
            match crate::ui::apply::parse_z(&state.z_text) {
                Ok(z) => out.push(Action::RefitNear {
                    z,
                    class: state.shown.as_ref().map(|s| s.class()),
                }),
                Err(_) => out.push(Action::RefitShown),
            }
        }
        if state.refit_running {
            ui.spinner();
        }
    });
    if let Some(v) = verdict {
        if let (Some(z), Some(src)) = (v.z, v.z_source) {
            let err = v.z_err.map_or(String::new(), |e| format!(" ± {e:.5}"));
            ui.weak(format!("recorded z = {z:.5}{err} ({})", source_words(src)));
        }
    }

    ui.label("confidence");
    ui.horizontal(|ui| {
        for (k, c) in Confidence::ALL.iter().enumerate() {
            let on = verdict.and_then(|v| v.confidence) == Some(*c);
            if ui
                .selectable_label(on, c.as_str())
                .on_hover_text(format!("key {}", k + 1))
                .clicked()
            {
                out.push(Action::SetConfidence(*c));
            }
        }
    });

    ui.label(if state.flag_chord {
        RichText::new("flags: now press the number").color(super::WARN)
    } else {
        RichText::new("flags: press F, then the number")
    });
    egui::Grid::new("zvet-flags").num_columns(4).show(ui, |ui| {
        for (n, f) in Flag::ALL.iter().enumerate() {
            let mut on = verdict.is_some_and(|v| v.flags.contains(f));
            let k = crate::ui::keys::flag_digit(*f);
            ui.label(RichText::new(format!("F→{k}")).monospace().weak())
                .on_hover_text(format!("press F, then {k}"));
            if ui
                .checkbox(&mut on, flag_words(*f))
                .on_hover_text(format!("F then {k}"))
                .changed()
            {
                out.push(Action::ToggleFlag(*f));
            }
            if n % 2 == 1 {
                ui.end_row();
            }
        }
    });

    let l = ui.label("note (E; Enter records)");
    let note_id = crate::ui::keys::field_id(FocusRequest::Note);
    if state.focus == Some(FocusRequest::Note) {
        ui.memory_mut(|m| m.request_focus(note_id));
        state.focus = None;
    }
    let r = ui
        .add(
            TextEdit::singleline(&mut state.note_text)
                .id(note_id)
                .hint_text("what you saw")
                .desired_width(f32::INFINITY),
        )
        .labelled_by(l.id);
    let entered = r.lost_focus() && ui.input(|i| i.key_pressed(Key::Enter));
    let stored = verdict.map_or("", |v| v.note.as_str());
    ui.horizontal(|ui| {
        let changed = state.note_text != stored;
        if ui.add_enabled(changed, egui::Button::new("save note")).clicked() || (entered && changed) {
            out.push(Action::SetNote(state.note_text.clone()));
        }
        if ui.add_enabled(can_undo, egui::Button::new("undo")).clicked() {
            out.push(Action::Undo);
        }
        if ui.add_enabled(can_redo, egui::Button::new("redo")).clicked() {
            out.push(Action::Redo);
        }
    });

    ui.add_space(6.0);
    egui::CollapsingHeader::new(format!("history ({})", history.len()))
        .default_open(true)
        .show(ui, |ui| {
            for e in history.iter().rev().take(30) {
                ui.label(
                    RichText::new(format!(
                        "{}  {}  {}",
                        e.time.format("%Y-%m-%d %H:%M"),
                        e.inspector,
                        change_words(&e.change)
                    ))
                    .small(),
                );
            }
        });
}

/// A short description of a change for the history list.
pub fn change_words(c: &Change) -> String {
    match c {
        Change::Verdict {
            class,
            z,
            source,
            confidence,
            ..
        } => format!(
            "verdict {} z={} ({}), {}",
            class.as_str(),
            z.map_or("—".into(), |z| format!("{z:.4}")),
            source_words(*source),
            confidence.as_str()
        ),
        Change::Class { class } => format!("class: {}", class.as_str()),
        Change::Redshift { z, source, .. } => format!("z: {z:.4} ({})", source_words(*source)),
        Change::Confidence { confidence } => format!("confidence: {}", confidence.as_str()),
        Change::Flag { flag, on } => {
            format!("{} {}", if *on { "flag" } else { "unflag" }, flag_words(*flag))
        }
        Change::Note { text } => format!("note: {text}"),
        Change::Undo => "undo".into(),
        Change::Redo => "redo".into(),
    }
}
