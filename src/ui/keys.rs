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
        "F then 1–6",
        "flag: low signal, sky residual, blend, artefact, broad absorption, wrong target",
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
    ("H  or  F1", "this help"),
    ("Esc", "close help, leave a text field"),
];

/// Read this frame's key presses into `out`.
pub fn read(ctx: &egui::Context, state: &AppState, out: &mut Vec<Action>) {
    // A text field has (or is about to get) the keyboard: keys are text.
    if ctx.egui_wants_keyboard_input() || state.name_prompt.is_some() || state.focus.is_some() {
        return;
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
        if take(none, Key::Z) {
            out.push(Action::Focus(FocusRequest::Redshift));
        }
        if take(none, Key::E) {
            out.push(Action::Focus(FocusRequest::Note));
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

/// Digit keys 1–6 in order.
const DIGITS: [Key; 6] = [Key::Num1, Key::Num2, Key::Num3, Key::Num4, Key::Num5, Key::Num6];
