//! What a spectrum's record says beside its points: descriptive metadata and review status.
//!
//! Both live here, below the library and the text index, so that each can use them without
//! knowing the other.

use std::collections::BTreeMap;
use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// Descriptive metadata of one spectrum revision.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Metadata {
    /// Compound name.
    pub name: String,
    /// Molecular formula, Hill order.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub formula: Option<String>,
    /// CAS Registry Number.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cas: Option<String>,
    /// Other names.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub synonyms: Vec<String>,
    /// Free labels.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub tags: Vec<String>,
    /// NMR solvent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub solvent: Option<String>,
    /// Where the material came from.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source: Option<String>,
    /// The instrument that measured it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub instrument: Option<String>,
    /// When it was measured.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub acquired: Option<String>,
    /// Free notes.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub notes: Option<String>,
    /// Any other manifest columns.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub extra: BTreeMap<String, String>,
}

impl Metadata {
    /// The optional one-line text fields that are set, by field name, in the order people
    /// read them (formula, CAS RN, solvent, source, instrument, acquired); the name, the
    /// lists, the notes and the extra columns are not among them.
    pub fn text_fields(&self) -> impl Iterator<Item = (&'static str, &str)> {
        [
            ("formula", &self.formula),
            ("cas", &self.cas),
            ("solvent", &self.solvent),
            ("source", &self.source),
            ("instrument", &self.instrument),
            ("acquired", &self.acquired),
        ]
        .into_iter()
        .filter_map(|(field, value)| Some((field, value.as_deref()?)))
    }
}

/// Where a spectrum stands in review.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Imported, not yet reviewed.
    Pending,
    /// Signed off by a reviewer.
    Verified,
    /// Kept for history, not searched.
    Withdrawn,
}

impl Status {
    /// The stored name.
    pub fn name(self) -> &'static str {
        match self {
            Status::Pending => "pending",
            Status::Verified => "verified",
            Status::Withdrawn => "withdrawn",
        }
    }

    /// Whether spectra in this status count towards the state hash.
    pub fn searchable(self) -> bool {
        self != Status::Withdrawn
    }
}

impl fmt::Display for Status {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Status {
    type Err = Error;

    fn from_str(s: &str) -> Result<Status> {
        match s {
            "pending" => Ok(Status::Pending),
            "verified" => Ok(Status::Verified),
            "withdrawn" => Ok(Status::Withdrawn),
            _ => Err(Error::invalid(
                format!("unknown status '{s}'"),
                "use pending, verified or withdrawn",
            )),
        }
    }
}

/// Extra fields given as `KEY=VALUE` texts (`whorl add --set`, the submit page's lines): a
/// value is required and a key may be given once; the key's own rules (reserved and colliding
/// keys) are the library's, checked when the metadata is staged. `given` names how the pairs
/// were given in a refusal ("--set", "extra field") and `form` how to write one in its hint
/// ("--set KEY=VALUE, e.g. --set ri=1012").
pub fn extra_fields<'a>(
    pairs: impl IntoIterator<Item = &'a str>,
    given: &str,
    form: &str,
) -> Result<BTreeMap<String, String>> {
    let mut extra = BTreeMap::new();
    for kv in pairs {
        let Some((k, v)) = kv.split_once('=') else {
            return Err(Error::invalid(
                format!("{given} '{}' has no '='", crate::error::excerpt(kv, 60)),
                format!("write {form}"),
            ));
        };
        let (k, v) = (k.trim(), v.trim());
        if v.is_empty() {
            return Err(Error::invalid(
                format!("{given} {k}= gives no value"),
                format!("give a value ({form}), or leave the field out"),
            ));
        }
        if extra.insert(k.to_string(), v.to_string()).is_some() {
            return Err(Error::invalid(
                format!("{given} {k} is given twice"),
                "give each extra field once",
            ));
        }
    }
    Ok(extra)
}

/// A text cell made safe to open in a spreadsheet, following the OWASP Foundation's "CSV
/// Injection" guidance (OWASP Cheat Sheet Series, "Injection Prevention", CSV injection
/// section): a cell starting with `=`, `+`, `-`, `@`, a tab or a carriage return is read by
/// spreadsheet programs as a formula, so it is written with a leading single quote, which
/// they show as text. A cell already starting with a quote gets one more, so that
/// [`csv_cell_restored`] gives back exactly the value written (bundles round-trip losslessly).
/// Numbers whorl computes are written as they are: only text from users and files passes here.
pub fn csv_cell(value: &str) -> std::borrow::Cow<'_, str> {
    match value.chars().next() {
        Some('=' | '+' | '-' | '@' | '\t' | '\r' | '\'') => format!("'{value}").into(),
        _ => value.into(),
    }
}

/// The value a [`csv_cell`] was made from: one leading single quote removed.
pub fn csv_cell_restored(cell: &str) -> &str {
    cell.strip_prefix('\'').unwrap_or(cell)
}

#[cfg(test)]
mod csv_cell_tests {
    use super::{csv_cell, csv_cell_restored};

    #[test]
    fn formula_triggers_are_neutralised_and_restored() {
        // The triggers OWASP's CSV-injection guidance lists.
        for v in ["=1+1", "+SUM(A1)", "-2+3", "@cmd", "\tx", "\rx"] {
            assert_eq!(csv_cell(v), format!("'{v}"));
            assert_eq!(csv_cell_restored(&csv_cell(v)), v);
        }
        for v in ["acetone", "'quoted'", "''", "", "1-octanol"] {
            assert_eq!(csv_cell_restored(&csv_cell(v)), v);
        }
        assert_eq!(csv_cell("acetone"), "acetone");
    }
}
