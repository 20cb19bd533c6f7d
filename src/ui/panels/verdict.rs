/*!
The verdict panel: the recorded verdict (class, z and its source, certainty,
flags, note) in a box of its own, the shown solution and the button that
accepts it, the question when an accept would replace a recorded verdict,
class, typed z and refit, certainty, flags, note, undo/redo, and the
object's history (who did what, when).
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
        match (&state.load_error, state.selected) {
            (Some(_), Some(i)) => ui.label(format!(
                "{} could not be read (see the spectrum panel).",
                state.objects.id(i).unwrap_or("")
            )),
            _ => ui.label("Nothing selected."),
        };
        return;
    };
    ui.heading(format!("Verdict on {}", obj.id()));
    recorded_box(ui, verdict);
    ui.add_space(4.0);

    if let Some(p) = &state.pending {
        egui::Frame::group(ui.style())
            .fill(super::WARN.gamma_multiply(0.18))
            .show(ui, |ui| {
                ui.label(RichText::new(&p.text).strong());
                ui.horizontal(|ui| {
                    if ui.button("replace  [Space / Enter]").clicked() {
                        out.push(Action::Confirm);
                    }
                    if ui.button("keep  [Esc]").clicked() {
                        out.push(Action::Escape);
                    }
                });
            });
        ui.add_space(4.0);
    }

    match &state.shown {
        Some(s) => {
            let recorded = verdict.is_some_and(|v| s.is_recorded_in(v));
            ui.label(format!(
                "shown: {} at z = {:.5} ({})",
                s.class(),
                s.z(),
                source_words(s.source)
            ));
            let complete = verdict.is_some_and(Verdict::is_complete);
            let (label, hover) = match (complete, recorded) {
                (true, true) => (
                    "Keep recorded  [Space]",
                    "this is the recorded verdict: Space keeps it and records nothing",
                ),
                (true, false) => (
                    "Replace with shown…  [Space]",
                    "the shown solution differs from the recorded verdict: Space asks before replacing it",
                ),
                _ => (
                    "Accept shown  [Space]",
                    "record the shown class and z (certainty as set, else secure)",
                ),
            };
            let accept = ui
                .add(egui::Button::new(RichText::new(label).strong()))
                .on_hover_text(hover);
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
    ui.label("certainty");
    ui.horizontal(|ui| {
        for c in Confidence::ALL.iter().rev() {
            let on = verdict.and_then(|v| v.confidence) == Some(*c);
            if ui
                .selectable_label(on, c.as_str())
                .on_hover_text(format!("{}: {}", grade_key(*c), grade_words(*c)))
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

/// The key of a certainty grade.
pub fn grade_key(c: Confidence) -> &'static str {
    match c {
        Confidence::Secure => "Shift+S",
        Confidence::Probable => "Shift+P",
        Confidence::Guess => "Shift+G",
    }
}

/// What a certainty grade means.
pub fn grade_words(c: Confidence) -> &'static str {
    match c {
        Confidence::Secure => "several features agree; beyond reasonable doubt",
        Confidence::Probable => "probably right: one clear feature, or weak ones that agree",
        Confidence::Guess => "a best guess; not for training",
    }
}

/// The recorded verdict in a box of its own: status, class, z with its
/// error and source, certainty, flags, note.
fn recorded_box(ui: &mut egui::Ui, verdict: Option<&Verdict>) {
    egui::Frame::group(ui.style()).show(ui, |ui| {
        ui.set_width(ui.available_width());
        let Some(v) = verdict.filter(|v| **v != Verdict::default()) else {
            ui.label(RichText::new("not reviewed yet").weak());
            return;
        };
        if v.is_complete() {
            ui.label(
                RichText::new("reviewed — recorded verdict").color(egui::Color32::from_rgb(120, 210, 120)),
            );
        } else {
            ui.label(RichText::new("incomplete — needs a class, a z and a certainty").color(super::WARN));
        }
        egui::Grid::new("zvet-recorded").num_columns(2).show(ui, |ui| {
            ui.weak("class");
            match v.class {
                Some(c) => ui.label(RichText::new(c.as_str()).strong().color(super::class_colour(c))),
                None => ui.weak("—"),
            };
            ui.end_row();
            ui.weak("z");
            let z = match v.z {
                Some(z) => {
                    let err = v.z_err.map_or(String::new(), |e| format!(" ± {e:.5}"));
                    format!("{z:.5}{err}")
                }
                None => "—".into(),
            };
            ui.label(RichText::new(z).strong());
            ui.end_row();
            ui.weak("source");
            ui.label(v.z_source.map_or("—", source_words));
            ui.end_row();
            ui.weak("certainty");
            ui.label(v.confidence.map_or("—", |c| c.as_str()));
            ui.end_row();
            ui.weak("flags");
            let flags: Vec<String> = v.flags.iter().map(|f| flag_words(*f)).collect();
            ui.label(if flags.is_empty() {
                "—".into()
            } else {
                flags.join(", ")
            });
            ui.end_row();
            ui.weak("note");
            ui.label(if v.note.is_empty() { "—" } else { v.note.as_str() });
            ui.end_row();
        });
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
        Change::Confidence { confidence } => format!("certainty: {}", confidence.as_str()),
        Change::Flag { flag, on } => {
            format!("{} {}", if *on { "flag" } else { "unflag" }, flag_words(*flag))
        }
        Change::Note { text } => format!("note: {text}"),
        Change::Undo => "undo".into(),
        Change::Redo => "redo".into(),
    }
}
