//! A clause's and a lab test's compaction effort as typed values.
//!
//! Why two types: a clause may ask for "any" effort or for "custom" (the project's own), while
//! a lab test always has one effort, a published preset or a named custom one. Both are stored
//! as text (`effort` columns) and decoded here once; pages, the ledger and the PDF match on
//! the enum, never on the code.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Deserializer, Serialize, Serializer};

use super::UnknownCode;
use crate::reduction::lab::{EffortFamily, EffortPreset};

/// What a lab test's stored effort starts with when it is the project's own effort.
const CUSTOM_PREFIX: &str = "custom: ";

/// The effort a clause asks its lots' curves to have (a clause's `effort` column).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ClauseEffort {
    /// No effort required: any curve of the source may be the reference.
    Any,
    /// The project's own effort (a custom lab effort).
    Custom,
    /// One published effort.
    Preset(EffortPreset),
}

impl ClauseEffort {
    /// The stored and JSON code: "any", "custom" or the preset's code.
    pub fn code(self) -> &'static str {
        match self {
            Self::Any => "any",
            Self::Custom => "custom",
            Self::Preset(p) => p.code(),
        }
    }

    /// Every code a clause may give, presets first (for refusals and the API document).
    pub fn codes() -> impl Iterator<Item = &'static str> {
        EffortPreset::ALL
            .into_iter()
            .map(EffortPreset::code)
            .chain(["custom", "any"])
    }

    /// Reads a code; `None` for one this build does not know.
    pub fn parse_code(code: &str) -> Option<Self> {
        match code.trim() {
            "any" => Some(Self::Any),
            "custom" => Some(Self::Custom),
            other => EffortPreset::parse_code(other).map(Self::Preset),
        }
    }

    /// The effort family a lot's curve must have; `None` when the clause names no family.
    pub fn family(self) -> Option<EffortFamily> {
        match self {
            Self::Preset(p) => Some(EffortFamily::of_preset(p)),
            Self::Any | Self::Custom => None,
        }
    }

    /// What the clause judges against, in words ("a lab curve of any effort").
    pub fn words(self) -> String {
        match self {
            Self::Any => "a lab curve of any effort".into(),
            Self::Custom => "a lab curve of a custom effort".into(),
            Self::Preset(p) => format!("a lab curve of {}", p.label()),
        }
    }
}

/// A lab test's effort (a lab test's `effort` column): a published preset, or the project's
/// own effort by name (stored as "custom: NAME", its energy in `effort_energy_kj_m3`).
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub enum LabEffort {
    /// One published effort.
    Preset(EffortPreset),
    /// The project's own effort, by the name it was given.
    Custom(String),
}

impl LabEffort {
    /// The stored and JSON text: the preset's code or "custom: NAME".
    pub fn code(&self) -> String {
        match self {
            Self::Preset(p) => p.code().to_string(),
            Self::Custom(name) => format!("{CUSTOM_PREFIX}{name}"),
        }
    }

    /// Reads a stored effort; `None` for text that is neither a preset nor a named custom effort.
    pub fn parse_code(code: &str) -> Option<Self> {
        if let Some(name) = code.strip_prefix(CUSTOM_PREFIX) {
            return Some(Self::Custom(name.to_string()));
        }
        EffortPreset::parse_code(code).map(Self::Preset)
    }

    /// The family of the effort: a preset's own, a custom effort's by its energy.
    pub fn family(&self, energy_kj_m3: f64) -> EffortFamily {
        match self {
            Self::Preset(p) => EffortFamily::of_preset(*p),
            Self::Custom(_) => EffortFamily::of_energy(energy_kj_m3),
        }
    }

    /// The effort in words for pages and certificates: the preset's label, or the stored text
    /// of a custom effort ("custom: site rammer").
    pub fn label(&self) -> String {
        match self {
            Self::Preset(p) => p.label().to_string(),
            Self::Custom(_) => self.code(),
        }
    }
}

/// Text codes both effort types share: `FromStr`, `Display`, serde as the code, and the
/// database encoding as text ([`super::stored_as_text`]: an unknown stored code fails the read).
macro_rules! effort_text {
    ($ty:ty, $kind:literal) => {
        impl FromStr for $ty {
            type Err = UnknownCode;
            fn from_str(code: &str) -> Result<Self, Self::Err> {
                Self::parse_code(code).ok_or_else(|| UnknownCode {
                    kind: $kind,
                    code: code.to_string(),
                })
            }
        }

        impl fmt::Display for $ty {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str(&self.code())
            }
        }

        impl Serialize for $ty {
            fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
                s.serialize_str(&self.code())
            }
        }

        impl<'de> Deserialize<'de> for $ty {
            fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
                let code = String::deserialize(d)?;
                code.parse().map_err(serde::de::Error::custom)
            }
        }

        super::stored_as_text!($ty);
    };
}

effort_text!(ClauseEffort, "clause effort");
effort_text!(LabEffort, "lab effort");

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clause_efforts_round_trip_and_name_their_family() {
        for code in ClauseEffort::codes() {
            let e: ClauseEffort = code.parse().unwrap();
            assert_eq!(e.code(), code);
            assert_eq!(serde_json::to_value(e).unwrap(), code);
        }
        assert_eq!(ClauseEffort::Any.family(), None);
        assert_eq!(ClauseEffort::Custom.family(), None);
        assert_eq!(
            "aashto_t180".parse::<ClauseEffort>().unwrap().family(),
            Some(EffortFamily::Modified)
        );
        assert_eq!(
            "astm_d1557_4in".parse::<ClauseEffort>().unwrap().family(),
            Some(EffortFamily::Modified)
        );
        assert!("heavy".parse::<ClauseEffort>().is_err());
    }

    #[test]
    fn a_custom_lab_effort_keeps_its_name_and_takes_its_family_from_its_energy() {
        let e: LabEffort = "custom: site rammer".parse().unwrap();
        assert_eq!(e, LabEffort::Custom("site rammer".into()));
        assert_eq!(e.code(), "custom: site rammer");
        assert_eq!(e.label(), "custom: site rammer");
        // 2,500 kJ/m³ is above the 1,273 kJ/m³ family boundary (geometric mean of 600 and 2,700).
        assert_eq!(e.family(2500.0), EffortFamily::Modified);
        let p: LabEffort = "aashto_t99".parse().unwrap();
        assert_eq!(p.label(), "AASHTO T 99 standard, 4-in mold");
        assert_eq!(p.family(5000.0), EffortFamily::Standard);
        assert!("custom".parse::<LabEffort>().is_err());
        assert!("any".parse::<LabEffort>().is_err());
    }
}
