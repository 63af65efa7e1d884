//! Where each hit's reference comes from: who approved its current revision and when, and
//! whether that sign-off was signed in, asserted or arrived with a bundle. Shared by the
//! printable report of the lab server and the HTML report of `whorl search --html`.

use std::collections::HashMap;

use serde::Serialize;

use super::hit::Hit;
use crate::error::Result;
use crate::library::Library;

/// The provenance of one hit's reference.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Provenance {
    /// The hit's rank.
    pub rank: usize,
    /// Compound name.
    pub name: String,
    /// The reference spectrum.
    pub spectrum_id: i64,
    /// Its status now (`verified`, `pending`, `withdrawn`).
    pub status: String,
    /// Its current revision.
    pub revision: i64,
    /// Who approved the current revision (`None` when nobody has).
    pub approved_by: Option<String>,
    /// When (RFC 3339), with `approved_by`.
    pub approved_at: Option<String>,
    /// What the approval rests on: `signed-in` or `asserted` (the kind of its event),
    /// `imported` (a sign-off made in another library), or `none`.
    pub kind: String,
    /// A sentence beside the kind, empty when the kind says it all.
    pub detail: String,
}

/// The provenance of each hit's reference, read from its sign-offs and their events.
pub fn provenance(library: &Library, hits: &[Hit]) -> Result<Vec<Provenance>> {
    let mut out = Vec::with_capacity(hits.len());
    for h in hits {
        let record = library.spectrum(h.spectrum_id)?;
        let approval = library
            .reviews(h.spectrum_id)?
            .into_iter()
            .rev()
            .find(|r| r.decision == "approved" && r.revision == record.revision);
        // The identity kind of a local sign-off is its event's: the review event of this
        // spectrum that records the same revision and time.
        let kinds: HashMap<(i64, String), String> = library
            .events(Some(&format!("spectrum:{}", h.spectrum_id)))?
            .into_iter()
            .filter(|e| e.action == "review")
            .filter_map(|e| {
                let revision = e.payload["revision"].as_i64()?;
                let at = e.payload["at"].as_str()?.to_string();
                Some(((revision, at), e.identity))
            })
            .collect();
        let (approved_by, approved_at, kind, detail) = match approval {
            Some(r) => match &r.imported_from {
                Some(from) => (
                    Some(r.reviewer.clone()),
                    Some(r.at.clone()),
                    "imported".to_string(),
                    format!(
                        "signed off in another library ({from}); pending here until approved locally"
                    ),
                ),
                None => {
                    let kind = kinds
                        .get(&(r.revision, r.at.clone()))
                        .cloned()
                        .unwrap_or_else(|| "asserted".to_string());
                    (
                        Some(r.reviewer.clone()),
                        Some(r.at.clone()),
                        kind,
                        String::new(),
                    )
                }
            },
            None => (
                None,
                None,
                "none".to_string(),
                format!(
                    "revision {} is {}: nobody has approved it",
                    record.revision,
                    record.status.name()
                ),
            ),
        };
        out.push(Provenance {
            rank: h.rank,
            name: h.name.clone(),
            spectrum_id: h.spectrum_id,
            status: record.status.name().to_string(),
            revision: record.revision,
            approved_by,
            approved_at,
            kind,
            detail,
        });
    }
    Ok(out)
}
