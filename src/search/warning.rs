//! Warnings about an unknown and its hit list, each with a stable code beside its message, so
//! that a program reading the JSON or CSV (a LIMS) can act on the kind without parsing words.

use serde::{Deserialize, Serialize};

/// The kind of a [`Warning`]: a stable, machine-readable code. New kinds may be added; the
/// existing ones keep their spelling.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum WarningCode {
    /// Nothing in the library could be compared with the unknown.
    NoCandidates,
    /// The best hit's evidence falls below the weak threshold.
    WeakMatch,
    /// The first hit and the nearest hit of another compound are within the close margin.
    TooClose,
    /// The best hit's reference spectrum and another compound's agree too closely for the
    /// spectrum alone to tell them apart (EI-MS without a retention index).
    SimilarReferences,
    /// The metadata index is behind the database, so a `--where` filter may miss spectra.
    TextIndexBehind,
    /// Pending (not yet reviewed) spectra of the technique were left out of the search.
    PendingNotSearched,
    /// Something about the unknown's preparation (its unit, range, noise, solvent, spikes...),
    /// said in the message.
    UnknownPreparation,
    /// The techniques of an identification rank different compounds first.
    TechniquesDisagree,
    /// The best compound of an identification lacks a reference for a technique searched.
    MissingTechnique,
    /// A warning recorded before warnings had codes (a search saved by an older whorl).
    Unclassified,
}

impl WarningCode {
    /// The code as the JSON and CSV spell it.
    pub fn word(self) -> &'static str {
        match self {
            WarningCode::NoCandidates => "no-candidates",
            WarningCode::WeakMatch => "weak-match",
            WarningCode::TooClose => "too-close",
            WarningCode::SimilarReferences => "similar-references",
            WarningCode::TextIndexBehind => "text-index-behind",
            WarningCode::PendingNotSearched => "pending-not-searched",
            WarningCode::UnknownPreparation => "unknown-preparation",
            WarningCode::TechniquesDisagree => "techniques-disagree",
            WarningCode::MissingTechnique => "missing-technique",
            WarningCode::Unclassified => "unclassified",
        }
    }
}

/// A warning: its code and its plain-language message. Shown as its message; in JSON an
/// object `{"code", "message"}`. Reads back also from a bare string, as searches saved before
/// codes existed have it (code `unclassified`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Warning {
    /// The kind.
    pub code: WarningCode,
    /// What to tell a person.
    pub message: String,
}

impl Warning {
    /// A warning of `code` saying `message`.
    pub fn new(code: WarningCode, message: impl Into<String>) -> Warning {
        Warning {
            code,
            message: message.into(),
        }
    }
}

impl std::fmt::Display for Warning {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl<'de> Deserialize<'de> for Warning {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Warning, D::Error> {
        #[derive(Deserialize)]
        #[serde(untagged)]
        enum Form {
            Coded { code: WarningCode, message: String },
            Bare(String),
        }
        Ok(match Form::deserialize(d)? {
            Form::Coded { code, message } => Warning { code, message },
            Form::Bare(message) => Warning::new(WarningCode::Unclassified, message),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_warning_is_an_object_with_its_code_and_reads_back_from_a_bare_string() {
        let w = Warning::new(WarningCode::TooClose, "a and b differ by only 0.001");
        let json = serde_json::to_string(&w).unwrap();
        assert_eq!(
            json,
            r#"{"code":"too-close","message":"a and b differ by only 0.001"}"#
        );
        assert_eq!(serde_json::from_str::<Warning>(&json).unwrap(), w);
        let old: Warning = serde_json::from_str(r#""best score 0.400 is below 0.600""#).unwrap();
        assert_eq!(old.code, WarningCode::Unclassified);
        assert_eq!(old.to_string(), "best score 0.400 is below 0.600");
        // Every code's word is what serde writes.
        for code in [
            WarningCode::NoCandidates,
            WarningCode::WeakMatch,
            WarningCode::TooClose,
            WarningCode::TextIndexBehind,
            WarningCode::PendingNotSearched,
            WarningCode::UnknownPreparation,
            WarningCode::TechniquesDisagree,
            WarningCode::MissingTechnique,
            WarningCode::Unclassified,
        ] {
            assert_eq!(
                serde_json::to_string(&code).unwrap(),
                format!("\"{}\"", code.word())
            );
        }
    }
}
