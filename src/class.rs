/*!
The three kinds of object a spectrum can show, shared by the engine, the
review records and the GUI.
*/
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// Spectral class of an astronomical object as the redshift engine decides it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum ObjectClass {
    /// A galaxy: stellar continuum, absorption and/or narrow nebular emission.
    Galaxy,
    /// A quasar (AGN with broad emission lines).
    Quasar,
    /// A star of our own Galaxy (redshift near zero).
    Star,
}

impl ObjectClass {
    /// All classes in a fixed order.
    pub const ALL: [ObjectClass; 3] = [ObjectClass::Galaxy, ObjectClass::Quasar, ObjectClass::Star];

    /// Lower-case name used in files and on the command line.
    pub fn as_str(self) -> &'static str {
        match self {
            ObjectClass::Galaxy => "galaxy",
            ObjectClass::Quasar => "quasar",
            ObjectClass::Star => "star",
        }
    }
}

impl fmt::Display for ObjectClass {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Error for an unknown class name.
#[derive(Debug, thiserror::Error)]
#[error("unknown class '{0}' (expected galaxy, quasar or star)")]
pub struct UnknownClass(pub String);

impl FromStr for ObjectClass {
    type Err = UnknownClass;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim().to_ascii_lowercase().as_str() {
            "galaxy" | "gal" | "g" => Ok(ObjectClass::Galaxy),
            "quasar" | "qso" | "q" => Ok(ObjectClass::Quasar),
            "star" | "s" => Ok(ObjectClass::Star),
            other => Err(UnknownClass(other.to_string())),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_round_trip() {
        for c in ObjectClass::ALL {
            assert_eq!(c.as_str().parse::<ObjectClass>().unwrap(), c);
        }
        assert!("planet".parse::<ObjectClass>().is_err());
    }
}
