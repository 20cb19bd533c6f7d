/*!
The panels of the review window, one file each. Every panel draws from the
state it is given and pushes [`super::action::Action`]s; none changes data itself
(text fields being typed into are the only state a panel edits).
*/
pub mod adjudicate;
pub mod chi2;
pub mod closeups;
pub mod facts;
pub mod help;
pub mod inspector;
pub mod messages;
pub mod overlay;
pub mod queue;
pub mod spectrum;
pub mod topbar;
pub mod verdict;

use crate::review::VerdictClass;
use crate::ObjectClass;
use egui::Color32;

/// Colour of a class, used in every panel (our own palette).
pub fn class_colour(c: VerdictClass) -> Color32 {
    match c {
        VerdictClass::Galaxy => Color32::from_rgb(232, 178, 64),
        VerdictClass::Quasar => Color32::from_rgb(96, 172, 255),
        VerdictClass::Star => Color32::from_rgb(238, 112, 146),
        VerdictClass::Unclear => Color32::from_rgb(150, 150, 150),
    }
}

/// Colour of an engine class.
pub fn object_colour(c: ObjectClass) -> Color32 {
    class_colour(c.into())
}

/// Colour for warnings and disagreements.
pub const WARN: Color32 = Color32::from_rgb(255, 160, 40);
/// Colour of emission-line markers.
pub const EMISSION: Color32 = Color32::from_rgb(80, 210, 170);
/// Colour of absorption-line markers.
pub const ABSORPTION: Color32 = Color32::from_rgb(196, 150, 255);
/// Colour of sky-line markers.
pub const SKY: Color32 = Color32::from_rgb(110, 110, 120);
/// Colour of the model.
pub const MODEL: Color32 = Color32::from_rgb(255, 128, 64);
/// Colour of the flux.
pub const FLUX: Color32 = Color32::from_rgb(205, 214, 230);
