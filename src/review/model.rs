/*!
The words of a verdict: class, redshift and where it came from, a certainty
grade (guess, probable, secure), flags, a note; and the events that the review log records.
*/
use crate::ObjectClass;
use chrono::{DateTime, Utc};
use serde::{Deserialize, Serialize};
use std::collections::BTreeSet;

/// Class in a verdict: the engine's three, or undecidable.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum VerdictClass {
    /// Galaxy.
    Galaxy,
    /// Quasar.
    Quasar,
    /// Star.
    Star,
    /// The spectrum does not allow a decision.
    Unclear,
}

impl From<ObjectClass> for VerdictClass {
    fn from(c: ObjectClass) -> Self {
        match c {
            ObjectClass::Galaxy => VerdictClass::Galaxy,
            ObjectClass::Quasar => VerdictClass::Quasar,
            ObjectClass::Star => VerdictClass::Star,
        }
    }
}

impl VerdictClass {
    /// The engine class, or `None` for `Unclear`.
    pub fn object_class(self) -> Option<ObjectClass> {
        match self {
            VerdictClass::Galaxy => Some(ObjectClass::Galaxy),
            VerdictClass::Quasar => Some(ObjectClass::Quasar),
            VerdictClass::Star => Some(ObjectClass::Star),
            VerdictClass::Unclear => None,
        }
    }

    /// Lower-case name.
    pub fn as_str(self) -> &'static str {
        match self {
            VerdictClass::Galaxy => "galaxy",
            VerdictClass::Quasar => "quasar",
            VerdictClass::Star => "star",
            VerdictClass::Unclear => "unclear",
        }
    }
}

/// How sure the inspector is: three grades named as redshift papers grade
/// their identifications, weakest first.
///
/// Logs written before this scale used four words; they are read onto the
/// grades (`doubtful` → guess, `tentative` → probable, `solid` and `certain`
/// → secure), so an old log replays unchanged and is written in the new words
/// from then on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Confidence {
    /// A best guess: one weak feature or a shape; keep it out of training sets.
    #[serde(alias = "doubtful")]
    Guess,
    /// Probably right: one clear feature, or several weak ones that agree.
    #[serde(alias = "tentative")]
    Probable,
    /// Secure: several features agree; the default of a plain accept.
    #[serde(alias = "solid", alias = "certain")]
    Secure,
}

impl Confidence {
    /// All grades, weakest first.
    pub const ALL: [Confidence; 3] = [Confidence::Guess, Confidence::Probable, Confidence::Secure];

    /// Grade number 1–3 (1 guess, 2 probable, 3 secure), as exported.
    pub fn level(self) -> u8 {
        self as u8 + 1
    }

    /// Lower-case name, as written in logs and exports.
    pub fn as_str(self) -> &'static str {
        match self {
            Confidence::Guess => "guess",
            Confidence::Probable => "probable",
            Confidence::Secure => "secure",
        }
    }

    /// The grade of a word, new or old (`None` for anything else).
    pub fn parse(word: &str) -> Option<Confidence> {
        serde_json::from_value(serde_json::Value::String(word.trim().to_ascii_lowercase())).ok()
    }
}

/// Problems an inspector can mark on a spectrum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Flag {
    /// Too little signal to see features.
    LowSignal,
    /// Residuals of night-sky subtraction.
    SkyResidual,
    /// Light of two objects in one spectrum.
    Blend,
    /// Instrumental artefact (cosmic ray, bad column, dead fibre, join).
    Artefact,
    /// Broad absorption troughs (quasars).
    BroadAbsorption,
    /// The spectrum is not the catalogue's object.
    WrongTarget,
    /// The redshift rests on one feature alone (its identity is assumed).
    SingleLine,
    /// No astrophysical signal at all (empty or dead spectrum).
    NoSignal,
}

impl Flag {
    /// All flags in display order.
    pub const ALL: [Flag; 8] = [
        Flag::LowSignal,
        Flag::SkyResidual,
        Flag::Blend,
        Flag::Artefact,
        Flag::BroadAbsorption,
        Flag::WrongTarget,
        Flag::SingleLine,
        Flag::NoSignal,
    ];

    /// snake_case name used in files.
    pub fn as_str(self) -> &'static str {
        match self {
            Flag::LowSignal => "low_signal",
            Flag::SkyResidual => "sky_residual",
            Flag::Blend => "blend",
            Flag::Artefact => "artefact",
            Flag::BroadAbsorption => "broad_absorption",
            Flag::WrongTarget => "wrong_target",
            Flag::SingleLine => "single_line",
            Flag::NoSignal => "no_signal",
        }
    }
}

/// Where the verdict's redshift came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum ZSource {
    /// The engine's best solution, accepted.
    Automatic,
    /// Another engine candidate, chosen by the inspector.
    Candidate,
    /// A refit of the engine restricted near a redshift the inspector chose.
    Refit,
    /// Typed in by hand.
    Typed,
}

impl ZSource {
    /// Lower-case name.
    pub fn as_str(self) -> &'static str {
        match self {
            ZSource::Automatic => "automatic",
            ZSource::Candidate => "candidate",
            ZSource::Refit => "refit",
            ZSource::Typed => "typed",
        }
    }
}

/// The current verdict on one object (what replaying the log yields).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Verdict {
    /// Class, once set.
    pub class: Option<VerdictClass>,
    /// Redshift, once set.
    pub z: Option<f64>,
    /// Its 1σ error, if known.
    pub z_err: Option<f64>,
    /// Where `z` came from.
    pub z_source: Option<ZSource>,
    /// Confidence, once set.
    pub confidence: Option<Confidence>,
    /// Flags raised.
    pub flags: BTreeSet<Flag>,
    /// Free note.
    pub note: String,
}

impl Verdict {
    /// The completeness rule, shared by the window's queue, the export and
    /// the report: a verdict is complete when it has a class, a certainty
    /// grade and — unless the class is `unclear` — a redshift. Keys that
    /// record a verdict always record a complete one; a verdict left
    /// incomplete (a flag or note alone, or an old log's class without a
    /// redshift) counts as not reviewed and is not exported.
    pub fn is_complete(&self) -> bool {
        match self.class {
            None => false,
            Some(VerdictClass::Unclear) => self.confidence.is_some(),
            Some(_) => self.z.is_some_and(f64::is_finite) && self.confidence.is_some(),
        }
    }
}

/// What the engine showed the inspector when the event was recorded.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitSeen {
    /// Automatic class.
    pub class: ObjectClass,
    /// Automatic redshift.
    pub z: f64,
    /// Its χ².
    pub chi2: f64,
}

impl FitSeen {
    /// What an inspector sees of a fit: its best candidate (`None` when the
    /// fit has none or its numbers are not finite, which the log cannot hold).
    pub fn of(fit: &crate::fit::FitResult) -> Option<FitSeen> {
        let b = fit.best()?;
        (b.z.is_finite() && b.chi2.is_finite()).then_some(FitSeen {
            class: b.class,
            z: b.z,
            chi2: b.chi2,
        })
    }
}

/// One action of an inspector on one object.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "action", rename_all = "snake_case")]
pub enum Change {
    /// Set class, redshift and confidence at once (e.g. accepting the fit).
    Verdict {
        /// Class.
        class: VerdictClass,
        /// Redshift (None for unclear).
        z: Option<f64>,
        /// Redshift error.
        z_err: Option<f64>,
        /// Where z came from.
        source: ZSource,
        /// Confidence.
        confidence: Confidence,
    },
    /// Set the class only.
    Class {
        /// Class.
        class: VerdictClass,
    },
    /// Set the redshift only.
    Redshift {
        /// Redshift.
        z: f64,
        /// Its error.
        z_err: Option<f64>,
        /// Where it came from.
        source: ZSource,
    },
    /// Set the confidence.
    Confidence {
        /// Level.
        confidence: Confidence,
    },
    /// Raise or clear a flag.
    Flag {
        /// Which.
        flag: Flag,
        /// Raised (true) or cleared.
        on: bool,
    },
    /// Replace the note.
    Note {
        /// New text.
        text: String,
    },
    /// Undo this inspector's latest not-yet-undone change on the object.
    Undo,
    /// Redo the latest undone change on the object.
    Redo,
}

/// One line of a review log.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Event {
    /// Format version of the line.
    pub v: u32,
    /// Sequence number within this log (1, 2, …).
    pub seq: u64,
    /// When it was recorded (UTC).
    pub time: DateTime<Utc>,
    /// Who recorded it.
    pub inspector: String,
    /// The object.
    pub object_id: String,
    /// The automatic fit the inspector saw, if any.
    pub fit: Option<FitSeen>,
    /// What changed.
    #[serde(flatten)]
    pub change: Change,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn old_grade_words_are_read_onto_the_three_grades() {
        // The four words of logs written before the three-grade scale.
        for (old, new) in [
            ("doubtful", Confidence::Guess),
            ("tentative", Confidence::Probable),
            ("solid", Confidence::Secure),
            ("certain", Confidence::Secure),
        ] {
            let c: Confidence = serde_json::from_str(&format!("\"{old}\"")).unwrap();
            assert_eq!(c, new, "{old}");
            assert_eq!(Confidence::parse(old), Some(new));
        }
        // New words round-trip and are what is written.
        for c in Confidence::ALL {
            let text = serde_json::to_string(&c).unwrap();
            assert_eq!(text, format!("\"{}\"", c.as_str()));
            assert_eq!(serde_json::from_str::<Confidence>(&text).unwrap(), c);
        }
        assert_eq!(Confidence::parse("sure"), None);
        let levels: Vec<u8> = Confidence::ALL.iter().map(|c| c.level()).collect();
        assert_eq!(levels, [1, 2, 3]);
    }

    #[test]
    fn completeness_needs_class_grade_and_a_redshift_unless_unclear() {
        let mut v = Verdict {
            class: Some(VerdictClass::Star),
            ..Default::default()
        };
        assert!(!v.is_complete(), "class alone");
        v.confidence = Some(Confidence::Secure);
        assert!(!v.is_complete(), "class and grade, no z");
        v.z = Some(0.0001);
        assert!(v.is_complete());
        let unclear = Verdict {
            class: Some(VerdictClass::Unclear),
            confidence: Some(Confidence::Guess),
            ..Default::default()
        };
        assert!(unclear.is_complete());
        let flagged = Verdict {
            flags: [Flag::Blend].into(),
            ..Default::default()
        };
        assert!(!flagged.is_complete());
    }
}
