/*!
The queue on the left: filters (class, status, flag, disagreement, Δχ², S/N),
the sort key, and the list of objects. Rows show review status (● reviewed,
◐ started but incomplete, ○ not yet), id, the current class and z — the
vetted ones once a verdict records them, else the fit's — and a mark when the
photometric class disagrees with the fit. The list never re-sorts by itself:
when fits or verdicts arrive the "re-sort" button says the order is out of date.
*/
use egui::{ComboBox, RichText};

use crate::queue::{Filter, QueueItem, SortKey, StatusFilter};
use crate::review::{Flag, VerdictClass};
use crate::ui::action::Action;
use crate::ui::state::AppState;

const CLASSES: [VerdictClass; 4] = [
    VerdictClass::Galaxy,
    VerdictClass::Quasar,
    VerdictClass::Star,
    VerdictClass::Unclear,
];

/// Δχ² ceilings offered in the filter.
const DCHI2: [f64; 3] = [10.0, 25.0, 100.0];

/// Draw the queue panel.
pub fn ui(ui: &mut egui::Ui, state: &AppState, out: &mut Vec<Action>) {
    egui::Panel::left("zvet-queue")
        .resizable(true)
        .default_size(260.0)
        .show(ui, |ui| {
            ui.heading("Queue");
            let mut f = state.filter.clone();
            filters(ui, &mut f);
            if f != state.filter {
                out.push(Action::SetFilter(f));
            }
            super::adjudicate::queue_filter(ui, state, out);
            ui.horizontal(|ui| {
                let mut sort = state.sort;
                ComboBox::from_label("sort")
                    .selected_text(sort.label())
                    .show_ui(ui, |ui| {
                        for k in SortKey::ALL {
                            ui.selectable_value(&mut sort, k, k.label());
                        }
                    });
                if sort != state.sort {
                    out.push(Action::SetSort(sort));
                }
                let resort = if state.order_stale {
                    egui::Button::new(RichText::new("re-sort (order out of date)").color(super::WARN))
                } else {
                    egui::Button::new("re-sort")
                };
                if ui
                    .add(resort)
                    .on_hover_text(
                        "sort again (fits or verdicts arrived since; the list never moves by itself)",
                    )
                    .clicked()
                {
                    out.push(Action::Resort);
                }
            });
            ui.label(format!(
                "showing {} of {}",
                state.order.len(),
                state.objects.len()
            ));
            if matches!(state.sort, SortKey::AuditSample | SortKey::VetNext) {
                ui.label(audit_line(state));
            }
            ui.separator();
            list(ui, state, out);
        });
}

fn filters(ui: &mut egui::Ui, f: &mut Filter) {
    ComboBox::from_label("class")
        .selected_text(f.class.map_or("any class", |c| c.as_str()))
        .show_ui(ui, |ui| {
            ui.selectable_value(&mut f.class, None, "any class");
            for c in CLASSES {
                ui.selectable_value(&mut f.class, Some(c), c.as_str());
            }
        });
    ComboBox::from_label("status")
        .selected_text(match f.status {
            StatusFilter::Any => "any status",
            StatusFilter::Unreviewed => "to do",
            StatusFilter::Reviewed => "done",
        })
        .show_ui(ui, |ui| {
            ui.selectable_value(&mut f.status, StatusFilter::Any, "any status");
            ui.selectable_value(&mut f.status, StatusFilter::Unreviewed, "to do");
            ui.selectable_value(&mut f.status, StatusFilter::Reviewed, "done");
        });
    ComboBox::from_label("flag")
        .selected_text(f.flag.map_or("any flag".to_string(), flag_words))
        .show_ui(ui, |ui| {
            ui.selectable_value(&mut f.flag, None, "any flag");
            for fl in Flag::ALL {
                ui.selectable_value(&mut f.flag, Some(fl), flag_words(fl));
            }
        });
    ComboBox::from_label("Δχ²")
        .selected_text(f.max_delta_chi2.map_or("any".into(), |d| format!("≤ {d}")))
        .show_ui(ui, |ui| {
            ui.selectable_value(&mut f.max_delta_chi2, None, "any");
            for d in DCHI2 {
                ui.selectable_value(&mut f.max_delta_chi2, Some(d), format!("≤ {d}"));
            }
        });
    let snr = (f.min_snr, f.max_snr);
    let snr_label = match snr {
        (None, None) => "any".to_string(),
        (None, Some(b)) => format!("< {b}"),
        (Some(a), None) => format!("> {a}"),
        (Some(a), Some(b)) => format!("{a}–{b}"),
    };
    ComboBox::from_label("S/N")
        .selected_text(snr_label)
        .show_ui(ui, |ui| {
            for (label, lo, hi) in [
                ("any", None, None),
                ("< 2", None, Some(2.0)),
                ("2–5", Some(2.0), Some(5.0)),
                ("> 5", Some(5.0), None),
            ] {
                if ui.selectable_label(snr == (lo, hi), label).clicked() {
                    f.min_snr = lo;
                    f.max_snr = hi;
                }
            }
        });
    ui.checkbox(&mut f.disagreement, "photometry disagrees");
}

/// Words for a flag, as shown in the window.
pub fn flag_words(f: Flag) -> String {
    f.as_str().replace('_', " ")
}

fn row_text(item: &QueueItem) -> RichText {
    let mark = if item.is_reviewed() {
        "●"
    } else if item.started {
        "◐"
    } else {
        "○"
    };
    let class = item.current_class().map_or("?", |c| match c {
        VerdictClass::Galaxy => "G",
        VerdictClass::Quasar => "Q",
        VerdictClass::Star => "S",
        VerdictClass::Unclear => "U",
    });
    let z = match (
        item.current_z(),
        item.verdict_class.is_some(),
        item.fit_z.is_some(),
    ) {
        (Some(z), _, _) => format!("{z:6.3}"),
        (None, true, _) => "   —  ".to_string(),
        (None, false, _) => "   …  ".to_string(),
    };
    let odd = if item.disagrees() { " ≠" } else { "" };
    let text = RichText::new(format!("{mark} {}  {class} {z}{odd}", item.id)).monospace();
    match item.current_class() {
        Some(c) => text.color(super::class_colour(c)),
        None => text,
    }
}

fn list(ui: &mut egui::Ui, state: &AppState, out: &mut Vec<Action>) {
    let row_h = ui
        .spacing()
        .interact_size
        .y
        .max(ui.text_style_height(&egui::TextStyle::Monospace) + 2.0);
    let serial_id = egui::Id::unique("zvet-queue-serial");
    let last_serial: u64 = ui.data(|d| d.get_temp(serial_id)).unwrap_or(u64::MAX);
    let range_id = egui::Id::unique("zvet-queue-visible");
    let visible: (usize, usize) = ui.data(|d| d.get_temp(range_id)).unwrap_or((0, 0));
    let mut area = egui::ScrollArea::vertical().auto_shrink([false, false]);
    if last_serial != state.selection_serial {
        if let Some(p) = state.position() {
            // Scroll only when the selection left the visible rows (keys),
            // not when it was clicked.
            if p < visible.0 + 1 || p + 2 > visible.1 {
                area = area.vertical_scroll_offset((p.saturating_sub(3)) as f32 * row_h);
            }
        }
        ui.data_mut(|d| d.insert_temp(serial_id, state.selection_serial));
    }
    area.show_rows(ui, row_h, state.order.len(), |ui, range| {
        ui.data_mut(|d| d.insert_temp(range_id, (range.start, range.end)));
        for pos in range {
            let i = state.order[pos];
            let Some(item) = state.items.get(i) else {
                continue;
            };
            let selected = state.selected == Some(i);
            let r = ui.selectable_label(selected, row_text(item));
            if r.clicked() {
                out.push(Action::Select(i));
            }
        }
    });
}

/// What the audit orders mean, in one line under the sort menu.
pub fn audit_line(state: &AppState) -> String {
    match &state.audit {
        Some(a) => {
            let vetted = state
                .items
                .iter()
                .filter(|i| i.audit_order.is_some() && i.is_reviewed())
                .count();
            format!(
                "audit sample: you have vetted {vetted} of {}; only the sample's verdicts feed the catalogue-wide estimates, other verdicts are training data",
                a.sampled()
            )
        }
        None => "no audit sample in this campaign (zvet campaign sample DIR --size N)".to_string(),
    }
}
