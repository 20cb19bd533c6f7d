/*!
What the inspector asked for while a frame was drawn. Panels and the keyboard
reader push [`Action`]s into a list; the app applies them after every panel is
drawn (see `apply.rs`), so drawing never changes data half-way through a frame.
*/
use crate::queue::{Filter, SortKey};
use crate::review::{Confidence, Flag, VerdictClass};
use crate::ObjectClass;
use std::path::PathBuf;

use super::state::{FocusRequest, PlotMove};

/// What kind of thing a path names, for opening.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OpenKind {
    /// Spectrum files or folders of them.
    Spectra,
    /// A photometric catalogue (CSV).
    Catalog,
    /// A template set folder.
    Templates,
    /// A campaign folder.
    Campaign,
}

impl OpenKind {
    /// All kinds, in menu order.
    pub const ALL: [OpenKind; 4] = [
        OpenKind::Spectra,
        OpenKind::Catalog,
        OpenKind::Templates,
        OpenKind::Campaign,
    ];

    /// Label for buttons.
    pub fn label(self) -> &'static str {
        match self {
            OpenKind::Spectra => "spectra",
            OpenKind::Catalog => "catalogue",
            OpenKind::Templates => "template set",
            OpenKind::Campaign => "campaign",
        }
    }
}

/// One request of the inspector, applied after the frame.
#[must_use = "push the action into the frame's list"]
#[derive(Debug, Clone, PartialEq)]
pub enum Action {
    /// Select object by index.
    Select(usize),
    /// Move along the displayed list (+1 next, −1 previous).
    Step(isize),
    /// Accept the shown solution (class, z and its source) with the current
    /// or default grade; on a reviewed object keep or ask (`apply.rs`).
    AcceptShown,
    /// Confirm the replacement of a recorded verdict the window asked about.
    Confirm,
    /// Record a verdict of this class (see the verdict rules in `apply.rs`).
    SetClass(VerdictClass),
    /// Set the certainty grade (accepting the shown solution when the
    /// verdict is not complete yet).
    SetConfidence(Confidence),
    /// Raise or clear a flag (whichever it is not now).
    ToggleFlag(Flag),
    /// Replace the note.
    SetNote(String),
    /// Record a typed redshift (text as typed).
    TypeZ(String),
    /// Show candidate `k` of the listed fit.
    Preview(usize),
    /// Show the next (+1) or previous (−1) candidate.
    CycleCandidate(isize),
    /// Show candidate `k` and accept it.
    AcceptCandidate(usize),
    /// Move the shown z by this many steps of 0.001·(1+z).
    Nudge(f64),
    /// Refit restricted to a window around `z` (all classes when `class` is None).
    RefitNear {
        /// Centre of the window.
        z: f64,
        /// Class to fit, or all.
        class: Option<ObjectClass>,
    },
    /// Refit around the shown z in the shown class.
    RefitShown,
    /// Undo the latest change on the selected object.
    Undo,
    /// Redo the latest undone change.
    Redo,
    /// Replace the filter.
    SetFilter(Filter),
    /// Replace the sort key.
    SetSort(SortKey),
    /// Re-sort the list now.
    Resort,
    /// Move the spectrum view.
    Move(PlotMove),
    /// Toggle observed / rest-frame axis.
    ToggleRestFrame,
    /// Widen (+1) or narrow (−1) the smoothing.
    Smooth(isize),
    /// Open or close the help overlay.
    ToggleHelp,
    /// Close overlays, leave chords.
    Escape,
    /// Focus a text field.
    Focus(FocusRequest),
    /// Wait for a flag number.
    FlagChord,
    /// Use this inspector name (opens that inspector's log).
    SetInspector(String),
    /// Ask for the inspector name again.
    AskInspector,
    /// Open paths as the given kind.
    Open(OpenKind, Vec<PathBuf>),
    /// Open a file dialog for the given kind.
    Browse(OpenKind),
    /// Give up the background fits that have not started.
    CancelFits,
    /// Close the window (everything is already in the log).
    Quit,
    /// A request for one of the tools (adjudication, jump, overlays).
    Tool(super::tools::ToolAction),
}
