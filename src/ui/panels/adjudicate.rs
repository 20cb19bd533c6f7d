/*!
Adjudication: every inspector's verdict on the selected object side by side
(class, z and where it came from, certainty, flags, note), the merge's
outcome (single, agreed, conflict with its reason, adjudicated), and for each
verdict "show" (draw it on the spectrum) and "adopt" (record its class and z
as one's own verdict). Also the queue's conflicts-only filter.
*/
use egui::RichText;

use crate::review::merge::ConsensusState;
use crate::review::Verdict;
use crate::ui::action::Action;
use crate::ui::state::AppState;
use crate::ui::tools::ToolAction;

use super::queue::flag_words;
use super::verdict::source_words;

/// The queue's conflicts-only checkbox.
pub fn queue_filter(ui: &mut egui::Ui, state: &AppState, out: &mut Vec<Action>) {
    let mut on = state.tools.conflicts_only;
    let n = state
        .tools
        .adjudication
        .as_ref()
        .map_or(String::new(), |a| format!(" ({})", a.conflicts.len()));
    if ui
        .checkbox(&mut on, format!("inspectors disagree{n}  [Shift+A]"))
        .on_hover_text(
            "only objects on which the inspectors' verdicts conflict, decided by the adjudicator or not",
        )
        .changed()
    {
        out.push(Action::Tool(ToolAction::ConflictsOnly(on)));
    }
}

/// Draw the side-by-side verdicts when open.
pub fn ui(ui: &mut egui::Ui, state: &AppState, me: Option<&str>, out: &mut Vec<Action>) {
    if !state.tools.adjudicate_open {
        return;
    }
    let Some(obj) = state.current() else {
        return;
    };
    let id = obj.id();
    ui.horizontal(|ui| {
        ui.heading("All inspectors");
        if ui
            .small_button("reload")
            .on_hover_text("read every review log again")
            .clicked()
        {
            out.push(Action::Tool(ToolAction::ReloadAdjudication));
        }
        if ui.small_button("close [A]").clicked() {
            out.push(Action::Tool(ToolAction::ToggleAdjudicate));
        }
    });
    let Some(a) = &state.tools.adjudication else {
        ui.weak("the review logs could not be read (see the messages)");
        return;
    };
    match (&a.adjudicator, me) {
        (Some(j), Some(m)) if j == m => {
            ui.label("You are the adjudicator: your verdict decides.");
        }
        (Some(j), _) => {
            ui.weak(format!("adjudicator: {j}"));
        }
        (None, _) => {
            ui.weak("no adjudicator named: your verdict counts as one more opinion");
        }
    }
    match a.merged.objects.get(id) {
        Some(c) => {
            let (text, colour) = match c.state {
                ConsensusState::Conflict => (format!("conflict — {}", c.reason), super::WARN),
                ConsensusState::Adjudicated => ("decided by the adjudicator".to_string(), super::EMISSION),
                ConsensusState::Agreed => ("the inspectors agree".to_string(), super::EMISSION),
                ConsensusState::Single => ("one review so far".to_string(), ui.visuals().text_color()),
            };
            ui.label(RichText::new(text).color(colour));
        }
        None => {
            ui.weak("nobody has given this object a class yet");
        }
    }
    let opinions = a.opinions(id);
    if opinions.is_empty() {
        return;
    }
    egui::ScrollArea::horizontal()
        .id_salt("zvet-adjudicate-scroll")
        .show(ui, |ui| {
            egui::Grid::new("zvet-adjudicate")
                .striped(true)
                .min_col_width(60.0)
                .show(ui, |ui| {
                    ui.label("");
                    for (who, _) in &opinions {
                        let mut t = RichText::new(*who).strong();
                        if a.adjudicator.as_deref() == Some(*who) {
                            t = RichText::new(format!("{who} (adjudicator)")).strong();
                        }
                        if me == Some(*who) {
                            t = t.underline();
                        }
                        ui.label(t);
                    }
                    ui.end_row();
                    row(ui, "class", &opinions, |v| match v.class {
                        Some(c) => RichText::new(c.as_str()).color(super::class_colour(c)),
                        None => RichText::new("—").weak(),
                    });
                    row(ui, "z", &opinions, |v| match v.z {
                        Some(z) => RichText::new(format!("{z:.5}")).monospace(),
                        None => RichText::new("—").weak(),
                    });
                    row(ui, "from", &opinions, |v| {
                        RichText::new(v.z_source.map_or("—", source_words)).small()
                    });
                    row(ui, "certainty", &opinions, |v| {
                        RichText::new(v.confidence.map_or("—", |c| c.as_str()))
                    });
                    row(ui, "flags", &opinions, |v| {
                        if v.flags.is_empty() {
                            RichText::new("—").weak()
                        } else {
                            let f: Vec<String> = v.flags.iter().map(|f| flag_words(*f)).collect();
                            RichText::new(f.join(", ")).small()
                        }
                    });
                    row(ui, "note", &opinions, |v| {
                        if v.note.trim().is_empty() {
                            RichText::new("—").weak()
                        } else {
                            RichText::new(v.note.trim()).italics().small()
                        }
                    });
                    ui.label("");
                    for (who, v) in &opinions {
                        ui.horizontal(|ui| {
                            let can_show = v.z.is_some() && v.class.and_then(|c| c.object_class()).is_some();
                            if ui
                                .add_enabled(can_show, egui::Button::new("show").small())
                                .on_hover_text("draw this class and z on the spectrum (records nothing)")
                                .clicked()
                            {
                                out.push(Action::Tool(ToolAction::ShowOpinion(who.to_string())));
                            }
                            if me != Some(*who)
                                && ui
                                    .add_enabled(v.class.is_some(), egui::Button::new("adopt").small())
                                    .on_hover_text("record this class and z as your verdict")
                                    .clicked()
                            {
                                out.push(Action::Tool(ToolAction::AdoptOpinion(who.to_string())));
                            }
                        });
                    }
                    ui.end_row();
                });
        });
}

fn row(ui: &mut egui::Ui, name: &str, opinions: &[(&str, &Verdict)], cell: impl Fn(&Verdict) -> RichText) {
    ui.label(RichText::new(name).weak());
    for (_, v) in opinions {
        ui.label(cell(v));
    }
    ui.end_row();
}
