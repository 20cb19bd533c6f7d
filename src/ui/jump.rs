/*!
Jump to an object by id: `J` (or `/`) opens a small field; typing narrows the
objects to those whose id starts with the text (case ignored, an exact match
first); Enter selects the first, a click any, Esc closes.
*/
use egui::{Key, RichText, TextEdit};

use super::action::Action;
use super::state::AppState;
use super::tools::ToolAction;

/// Most matches listed under the field.
pub const MAX_LISTED: usize = 12;

/// Object indices whose id starts with `prefix` (ignoring case), an exact
/// match first, then in id order; at most `limit`.
pub fn find_ids(ids: &[&str], prefix: &str, limit: usize) -> Vec<usize> {
    let p = prefix.trim().to_lowercase();
    if p.is_empty() {
        return Vec::new();
    }
    let mut hits: Vec<usize> = (0..ids.len())
        .filter(|&i| ids[i].to_lowercase().starts_with(&p))
        .collect();
    hits.sort_by(|&a, &b| {
        let ea = ids[a].eq_ignore_ascii_case(prefix.trim());
        let eb = ids[b].eq_ignore_ascii_case(prefix.trim());
        eb.cmp(&ea).then(ids[a].cmp(ids[b]))
    });
    hits.truncate(limit);
    hits
}

/// The id of the jump field.
pub fn field_id() -> egui::Id {
    egui::Id::unique("zvet-jump-field")
}

/// Draw the jump window when it is open.
pub fn ui(ctx: &egui::Context, state: &mut AppState, out: &mut Vec<Action>) {
    let Some(mut text) = state.tools.jump.clone() else {
        return;
    };
    if ctx.input(|i| i.key_pressed(Key::Escape)) {
        out.push(Action::Tool(ToolAction::CloseJump));
        return;
    }
    let mut open = true;
    egui::Window::new("Go to object")
        .open(&mut open)
        .collapsible(false)
        .resizable(false)
        .anchor(egui::Align2::CENTER_TOP, [0.0, 80.0])
        .show(ctx, |ui| {
            let id = field_id();
            // Asked for until the field has it (a new window's first frame
            // only measures its contents).
            if state.tools.jump_focus {
                ui.memory_mut(|m| m.request_focus(id));
            }
            let r = ui.add(
                TextEdit::singleline(&mut text)
                    .id(id)
                    .hint_text("object id or its beginning")
                    .desired_width(260.0),
            );
            if r.has_focus() {
                state.tools.jump_focus = false;
            }
            let ids: Vec<&str> = state.objects.iter().map(|o| o.id()).collect();
            let hits = find_ids(&ids, &text, MAX_LISTED + 1);
            let enter = r.lost_focus() && ui.input(|i| i.key_pressed(Key::Enter));
            if enter {
                match hits.first() {
                    Some(&i) => out.push(Action::Tool(ToolAction::JumpTo(i))),
                    None => {
                        // Keep the field open for another try.
                        state.tools.jump_focus = true;
                    }
                }
            }
            if text.trim().is_empty() {
                ui.weak("type an id; Enter goes to the first match");
            } else if hits.is_empty() {
                ui.colored_label(
                    ui.visuals().error_fg_color,
                    format!("no object id starts with '{}'", text.trim()),
                );
            } else {
                for (k, &i) in hits.iter().take(MAX_LISTED).enumerate() {
                    let label = if k == 0 {
                        RichText::new(format!("{}   (Enter)", ids[i]))
                            .monospace()
                            .strong()
                    } else {
                        RichText::new(ids[i]).monospace()
                    };
                    if ui.selectable_label(false, label).clicked() {
                        out.push(Action::Tool(ToolAction::JumpTo(i)));
                    }
                }
                if hits.len() > MAX_LISTED {
                    ui.weak("… more: type further");
                }
            }
        });
    if !open {
        out.push(Action::Tool(ToolAction::CloseJump));
    }
    if let Some(j) = state.tools.jump.as_mut() {
        *j = text;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ids_by_prefix_exact_first() {
        let ids = ["SPS-0012", "SPS-0001", "sps-00", "OTHER-1", "SPS-0010"];
        assert_eq!(find_ids(&ids, "sps-00", 10), vec![2, 1, 4, 0]);
        assert_eq!(find_ids(&ids, "SPS-001", 10), vec![4, 0]);
        assert_eq!(find_ids(&ids, "sps-0001", 10), vec![1]);
        assert_eq!(find_ids(&ids, "x", 10), Vec::<usize>::new());
        assert_eq!(find_ids(&ids, "  ", 10), Vec::<usize>::new());
        assert_eq!(find_ids(&ids, "s", 2).len(), 2);
    }
}
