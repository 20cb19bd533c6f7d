/*!
The keyboard scheme. A clean object is vetted in two keystrokes: `Space`
accepts what is shown, `N` moves on. The table [`KEYS`] is the single source
for the help overlay; [`read`] turns this frame's key presses into actions,
walking the frame's events so that every press counts once, however fast the
presses come. Nothing here fires while a text field has the keyboard.
*/
use egui::{Key, Modifiers};

use super::action::Action;
use super::state::{AppState, FocusRequest, PlotMove};
use crate::review::{Confidence, Flag, VerdictClass};

/// (keys, what they do) for the help overlay and the README, in reading order.
pub const KEYS: &[(&str, &str)] = &[
    (
        "Space",
        "accept the shown class and z; on a reviewed object: keep its verdict, or ask before replacing it",
    ),
    (
        "Enter  /  Esc",
        "when asked: replace the recorded verdict / keep it",
    ),
    ("N  or  ↓", "next object in the list"),
    ("B  or  ↑", "previous object in the list"),
    (
        "G  Q  S",
        "record galaxy / quasar / star with a z (typed z kept, else that class's best)",
    ),
    ("U", "record unclear (no redshift)"),
    (
        "Shift+S  Shift+P  Shift+G",
        "certainty: secure, probable, guess (on a new object: accept with it)",
    ),
    (
        "F then 1–8",
        "flag: 1 low signal, 2 sky residual, 3 blend, 4 artefact, 5 broad absorption, 6 wrong target, 7 single line, 8 no signal",
    ),
    ("C  /  Shift+C", "show the next / previous candidate"),
    (",  /  .", "nudge the shown z down / up by 0.001·(1+z)"),
    (
        "R",
        "refit near the shown z in the shown class (or click in χ²(z))",
    ),
    ("Z", "type a redshift (Enter records it with the shown class)"),
    ("E", "edit the note (Enter records it)"),
    ("Ctrl+Z  /  Ctrl+Y", "undo / redo on this object"),
    ("O", "observed or rest-frame wavelength axis"),
    ("[  /  ]", "less / more smoothing (flux and model alike)"),
    ("←  →", "pan the spectrum in wavelength"),
    ("+  /  −", "zoom in / out in wavelength"),
    ("0", "whole spectrum again (or double-click the plot)"),
    ("J  or  /", "go to an object by id (or the beginning of one)"),
    ("A", "every inspector's verdict on this object, side by side"),
    ("Shift+A", "list only objects the inspectors disagree on"),
    ("M  /  Shift+M", "lay the next / previous template over the spectrum (or none)"),
    ("I", "catalogue photometry over the spectrum"),
    ("K", "sky spectrum under the flux (when the file has one)"),
    ("\\", "automatic smoothing again (after [ or ])"),
    ("H  or  F1", "this help"),
    ("Esc", "close help or a dialog, leave a text field"),
    ("Ctrl+Q", "quit (every verdict is already in the log)"),
];

/// The id of the text field a focus request names (shared with the verdict panel).
pub fn field_id(f: FocusRequest) -> egui::Id {
    match f {
        FocusRequest::Redshift => egui::Id::unique("zvet-z-field"),
        FocusRequest::Note => egui::Id::unique("zvet-note-field"),
    }
}

/// Give `field` the keyboard now — so letters typed after its key in the
/// same frame already go into it. `current`: the field's text now (the
/// redshift field's is selected, so typing replaces it).
fn focus_field(ctx: &egui::Context, field: FocusRequest, current: &str) {
    let id = field_id(field);
    ctx.memory_mut(|m| m.request_focus(id));
    if field == FocusRequest::Redshift {
        let mut te = egui::text_edit::TextEditState::load(ctx, id).unwrap_or_default();
        te.cursor
            .set_char_range(Some(egui::text::CCursorRange::select_all_str(current)));
        te.store(ctx, id);
    }
}

/// Read this frame's key presses into `out`, each press once and in order
/// (several presses of one key in a frame are several actions). Presses
/// that mean something here are taken out of the frame's input, so no
/// widget acts on them a second time.
pub fn read(ctx: &egui::Context, state: &AppState, out: &mut Vec<Action>) {
    // The name dialog: only Esc (dismiss) and Ctrl+Q (quit) are keys.
    if state.name_prompt.is_some() {
        let esc = ctx.input_mut(|i| {
            if i.consume_key(Modifiers::COMMAND, Key::Q) {
                out.push(Action::Quit);
            }
            i.consume_key(Modifiers::NONE, Key::Escape)
        });
        if esc {
            // The dialog's field lets go of the keyboard with it.
            ctx.memory_mut(|m| m.stop_text_input());
            out.push(Action::Escape);
        }
        return;
    }
    // A text field has (or is about to get) the keyboard: keys are text.
    if ctx.egui_wants_keyboard_input() || state.focus.is_some() {
        return;
    }
    let mut chord = state.flag_chord;
    let mut field = None;
    ctx.input_mut(|i| {
        let mut k = 0;
        while k < i.events.len() {
            let egui::Event::Key {
                key,
                pressed: true,
                modifiers,
                repeat,
                ..
            } = i.events[k]
            else {
                k += 1;
                continue;
            };
            let plain = !(modifiers.command || modifiers.ctrl || modifiers.mac_cmd || modifiers.alt);
            if plain && !modifiers.shift && !chord && matches!(key, Key::E | Key::Z) {
                // Everything typed after `E` or `Z` in this frame is text:
                // drop the key's own character and leave the rest to the field.
                i.events.remove(k);
                let letter = if key == Key::E { "e" } else { "z" };
                if let Some(p) = i.events[k..]
                    .iter()
                    .position(|e| matches!(e, egui::Event::Text(t) if t.eq_ignore_ascii_case(letter)))
                {
                    i.events.remove(k + p);
                }
                field = Some(if key == Key::E {
                    FocusRequest::Note
                } else {
                    FocusRequest::Redshift
                });
                break;
            }
            match action_for(key, modifiers, repeat, &mut chord, state) {
                Some(a) => {
                    out.push(a);
                    i.events.remove(k);
                }
                None => k += 1,
            }
        }
    });
    if let Some(f) = field {
        focus_field(ctx, f, &state.z_text);
        out.push(Action::Focus(f));
    }
}

/// The action of one key press (`None`: not ours). `chord`: `F` was pressed
/// and the next digit names a flag.
fn action_for(key: Key, m: Modifiers, repeat: bool, chord: &mut bool, state: &AppState) -> Option<Action> {
    let cmd = m.command || m.ctrl || m.mac_cmd;
    if cmd && !m.alt {
        return match key {
            Key::Z if m.shift => Some(Action::Redo),
            Key::Z => Some(Action::Undo),
            Key::Y => Some(Action::Redo),
            Key::Q => Some(Action::Quit),
            _ => None,
        };
    }
    if cmd || m.alt {
        return None;
    }
    if key == Key::Escape {
        *chord = false;
        return Some(Action::Escape);
    }
    if *chord {
        let a = chord_key(key, repeat);
        if a.is_some() {
            *chord = false;
        }
        return a;
    }
    // Keys that record: one press, one action — auto-repeat does not record.
    let records = |a: Action| (!repeat).then_some(a);
    if m.shift {
        return match key {
            Key::S => records(Action::SetConfidence(Confidence::Secure)),
            Key::P => records(Action::SetConfidence(Confidence::Probable)),
            Key::G => records(Action::SetConfidence(Confidence::Guess)),
            Key::C => Some(Action::CycleCandidate(-1)),
            // Symbols that need Shift on some layouts.
            Key::Plus | Key::Equals => Some(Action::Move(PlotMove::Zoom(1.5))),
            Key::Minus => Some(Action::Move(PlotMove::Zoom(1.0 / 1.5))),
            Key::Comma => Some(Action::Nudge(-1.0)),
            Key::Period => Some(Action::Nudge(1.0)),
            Key::OpenBracket => Some(Action::Smooth(-1)),
            Key::CloseBracket => Some(Action::Smooth(1)),
            _ => None,
        };
    }
    match key {
        Key::Space => records(Action::AcceptShown),
        Key::Enter if state.pending.is_some() => records(Action::Confirm),
        Key::N | Key::ArrowDown => Some(Action::Step(1)),
        Key::B | Key::ArrowUp => Some(Action::Step(-1)),
        Key::G => records(Action::SetClass(VerdictClass::Galaxy)),
        Key::Q => records(Action::SetClass(VerdictClass::Quasar)),
        Key::S => records(Action::SetClass(VerdictClass::Star)),
        Key::U => records(Action::SetClass(VerdictClass::Unclear)),
        Key::F => {
            if !repeat {
                *chord = true;
            }
            records(Action::FlagChord)
        }
        Key::H | Key::F1 => records(Action::ToggleHelp),
        Key::C => Some(Action::CycleCandidate(1)),
        Key::Comma => Some(Action::Nudge(-1.0)),
        Key::Period => Some(Action::Nudge(1.0)),
        Key::R => records(Action::RefitShown),
        Key::O => records(Action::ToggleRestFrame),
        Key::OpenBracket => Some(Action::Smooth(-1)),
        Key::CloseBracket => Some(Action::Smooth(1)),
        Key::ArrowLeft => Some(Action::Move(PlotMove::Pan(-0.2))),
        Key::ArrowRight => Some(Action::Move(PlotMove::Pan(0.2))),
        Key::Plus | Key::Equals => Some(Action::Move(PlotMove::Zoom(1.5))),
        Key::Minus => Some(Action::Move(PlotMove::Zoom(1.0 / 1.5))),
        Key::Num0 => Some(Action::Move(PlotMove::Reset)),
        _ => None,
    }
}

/// The flag chord: after `F`, digit k toggles the k-th flag.
fn chord_key(key: Key, repeat: bool) -> Option<Action> {
    if repeat {
        return None;
    }
    DIGITS
        .iter()
        .take(Flag::ALL.len())
        .position(|d| *d == key)
        .map(|k| Action::ToggleFlag(Flag::ALL[k]))
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
