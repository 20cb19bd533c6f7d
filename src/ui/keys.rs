/*!
The keyboard scheme. A clean object is vetted in two keystrokes: `Space`
accepts what is shown, `N` moves on. The table [`KEYS`] is the single source
for the help overlay; [`read`] turns this frame's key presses into actions.
Nothing here fires while a text field has the keyboard.
*/
use egui::{Key, Modifiers};

use super::action::Action;
use super::state::{AppState, FocusRequest, PlotMove};
use crate::review::{Confidence, Flag, VerdictClass};

/// (keys, what they do) for the help overlay, in reading order.
pub const KEYS: &[(&str, &str)] = &[
    (
        "Space",
        "accept the shown class and z (confidence: as set, else solid)",
    ),
    ("N  or  ↓", "next object in the list"),
    ("B  or  ↑", "previous object in the list"),
    ("G  Q  S  U", "class: galaxy, quasar, star, unclear"),
    ("1  2  3  4", "confidence: doubtful, tentative, solid, certain"),
    (
        "F then 1–8",
        "flag: 1 low signal, 2 sky residual, 3 blend, 4 artefact, 5 broad absorption, 6 wrong target, 7 single line, 8 no signal",
    ),
    ("C  /  Shift+C", "show the next / previous candidate"),
    (",  /  .", "nudge the shown z down / up by 0.001·(1+z)"),
    ("R", "refit near the shown z (or click in the χ²(z) plot)"),
    ("Z", "type a redshift (Enter records it)"),
    ("E", "edit the note (Enter records it)"),
    ("Ctrl+Z  /  Ctrl+Y", "undo / redo on this object"),
    ("O", "observed or rest-frame wavelength axis"),
    ("[  /  ]", "less / more smoothing"),
    ("←  →", "pan the spectrum"),
    ("+  /  −", "zoom in / out"),
    ("0", "whole spectrum again"),
    ("J  or  /", "go to an object by id (or the beginning of one)"),
    ("A", "every inspector's verdict on this object, side by side"),
    ("Shift+A", "list only objects the inspectors disagree on"),
    ("M  /  Shift+M", "lay the next / previous template over the spectrum (or none)"),
    ("I", "catalogue photometry over the spectrum"),
    ("K", "sky spectrum under the flux (when the file has one)"),
    ("\\", "automatic smoothing again (after [ or ])"),
    ("H  or  F1", "this help"),
    ("Esc", "close help, leave a text field"),
];

/// The id of the text field a focus request names (shared with the verdict panel).
pub fn field_id(f: FocusRequest) -> egui::Id {
    match f {
        FocusRequest::Redshift => egui::Id::unique("zvet-z-field"),
        FocusRequest::Note => egui::Id::unique("zvet-note-field"),
    }
}

/// If `key` was pressed, give its text field the keyboard now — so letters
/// typed in the same frame already go into the field — and drop the key's own
/// character. True when it happened.
/// `current`: the field's text now (the redshift field's is selected).
fn focus_on(ctx: &egui::Context, key: Key, letter: &str, field: FocusRequest, current: &str) -> bool {
    let hit = ctx.input_mut(|i| {
        if !i.consume_key(Modifiers::NONE, key) {
            return false;
        }
        if let Some(p) = i
            .events
            .iter()
            .position(|e| matches!(e, egui::Event::Text(t) if t.eq_ignore_ascii_case(letter)))
        {
            i.events.remove(p);
        }
        true
    });
    if hit {
        let id = field_id(field);
        ctx.memory_mut(|m| m.request_focus(id));
        if field == FocusRequest::Redshift {
            // Select the old z so that typing replaces it.
            let mut te = egui::text_edit::TextEditState::load(ctx, id).unwrap_or_default();
            te.cursor
                .set_char_range(Some(egui::text::CCursorRange::select_all_str(current)));
            te.store(ctx, id);
        }
    }
    hit
}

/// Read this frame's key presses into `out`.
pub fn read(ctx: &egui::Context, state: &AppState, out: &mut Vec<Action>) {
    // A text field has (or is about to get) the keyboard: keys are text.
    if ctx.egui_wants_keyboard_input() || state.name_prompt.is_some() || state.focus.is_some() {
        return;
    }
    // Fields first: everything typed after `E` or `Z` in this frame is text.
    for (key, letter, field) in [
        (Key::E, "e", FocusRequest::Note),
        (Key::Z, "z", FocusRequest::Redshift),
    ] {
        // Ctrl+Z is undo, not the redshift field.
        if key == Key::Z && ctx.input(|i| i.modifiers.command) {
            continue;
        }
        if focus_on(ctx, key, letter, field, &state.z_text) {
            out.push(Action::Focus(field));
            return;
        }
    }
    ctx.input_mut(|i| {
        let mut take = |m: Modifiers, k: Key| i.consume_key(m, k);
        let none = Modifiers::NONE;
        if take(Modifiers::COMMAND, Key::Z) {
            out.push(Action::Undo);
        }
        if take(Modifiers::COMMAND, Key::Y) {
            out.push(Action::Redo);
        }
        if take(none, Key::Escape) {
            out.push(Action::Escape);
        }
        if take(none, Key::H) || take(none, Key::F1) {
            out.push(Action::ToggleHelp);
        }
        if state.flag_chord {
            for (k, key) in DIGITS.iter().enumerate().take(Flag::ALL.len()) {
                if take(none, *key) {
                    out.push(Action::ToggleFlag(Flag::ALL[k]));
                }
            }
            return;
        }
        if take(none, Key::Space) {
            out.push(Action::AcceptShown);
        }
        if take(none, Key::N) || take(none, Key::ArrowDown) {
            out.push(Action::Step(1));
        }
        if take(none, Key::B) || take(none, Key::ArrowUp) {
            out.push(Action::Step(-1));
        }
        for (key, class) in [
            (Key::G, VerdictClass::Galaxy),
            (Key::Q, VerdictClass::Quasar),
            (Key::S, VerdictClass::Star),
            (Key::U, VerdictClass::Unclear),
        ] {
            if take(none, key) {
                out.push(Action::SetClass(class));
            }
        }
        for (k, conf) in Confidence::ALL.iter().enumerate() {
            if take(none, DIGITS[k]) {
                out.push(Action::SetConfidence(*conf));
            }
        }
        if take(none, Key::F) {
            out.push(Action::FlagChord);
        }
        if take(Modifiers::SHIFT, Key::C) {
            out.push(Action::CycleCandidate(-1));
        } else if take(none, Key::C) {
            out.push(Action::CycleCandidate(1));
        }
        if take(none, Key::Comma) {
            out.push(Action::Nudge(-1.0));
        }
        if take(none, Key::Period) {
            out.push(Action::Nudge(1.0));
        }
        if take(none, Key::R) {
            out.push(Action::RefitShown);
        }
        if take(none, Key::O) {
            out.push(Action::ToggleRestFrame);
        }
        if take(none, Key::OpenBracket) {
            out.push(Action::Smooth(-1));
        }
        if take(none, Key::CloseBracket) {
            out.push(Action::Smooth(1));
        }
        if take(none, Key::ArrowLeft) {
            out.push(Action::Move(PlotMove::Pan(-0.2)));
        }
        if take(none, Key::ArrowRight) {
            out.push(Action::Move(PlotMove::Pan(0.2)));
        }
        if take(none, Key::Plus) || take(none, Key::Equals) {
            out.push(Action::Move(PlotMove::Zoom(1.5)));
        }
        if take(none, Key::Minus) {
            out.push(Action::Move(PlotMove::Zoom(1.0 / 1.5)));
        }
        if take(none, Key::Num0) {
            out.push(Action::Move(PlotMove::Reset));
        }
    });
}

/// Digit keys 1–8 in order.
const DIGITS: [Key; 8] = [
    Key::Num1,
    Key::Num2,
    Key::Num3,
    Key::Num4,
    Key::Num5,
    Key::Num6,
    Key::Num7,
    Key::Num8,
];

/// The digit that toggles `f` after `F` (1-based, its place in [`Flag::ALL`]).
pub fn flag_digit(f: Flag) -> usize {
    Flag::ALL.iter().position(|x| *x == f).map_or(0, |k| k + 1)
}
