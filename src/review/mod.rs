/*!
Verdicts and the review log (the log itself: under construction).
*/
mod model;

pub use model::{Change, Confidence, Event, FitSeen, Flag, Verdict, VerdictClass, ZSource};
