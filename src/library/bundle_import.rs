//! Importing a bundle: every checksum verified first, then the spectra stored with their
//! revisions, sign-offs and status in one transaction.

use std::collections::BTreeMap;
use std::path::Path;

use rayon::prelude::*;

use super::bundle::{BundleInfo, RevisionEntry, verify_bundle};
use super::events::append_event;
use super::manifest::read_bundle_manifest;
use super::records::Review;
use super::state::reweigh;
use super::store::{
    NewRevision, NewSpectrum, find_or_create_compound, insert_prepared, insert_review,
    insert_revision, insert_spectrum, present_by_raw,
};
use super::{Library, Outcome, Staged, stage};
use crate::error::{Error, Location, Result};
use crate::spectrum::Status;

impl Library {
    /// Imports a bundle folder. Every checksum is verified first; if any file is missing,
    /// altered or outside the folder, nothing is imported. The whole bundle is one
    /// transaction. Spectra already present (same technique and raw points) are skipped.
    pub fn import_bundle(&mut self, dir: &Path, actor: &str) -> Result<(BundleInfo, Vec<Outcome>)> {
        let info = verify_bundle(dir)?;
        let manifest = dir.join("manifest.csv");
        let rows = read_bundle_manifest(&manifest)?;
        let recipes = self.recipes.clone();
        let staged: Vec<(usize, Result<Staged>, BTreeMap<String, String>)> = rows
            .into_par_iter()
            .map(|row| {
                (
                    row.line,
                    row.submission.and_then(|s| stage(&recipes, s)),
                    row.provenance,
                )
            })
            .collect();
        let mut good = Vec::with_capacity(staged.len());
        for (line, s, provenance) in staged {
            match s {
                Ok(s) => good.push((line, s, provenance)),
                Err(e) => {
                    return Err(Error::input(
                        Location::line(&manifest, line),
                        format!("this bundle row cannot be imported: {e}"),
                        "the bundle is damaged or was written by an incompatible whorl; nothing was imported",
                    ));
                }
            }
        }
        let source = format!("bundle {} ({})", &info.fingerprint[..16], dir.display());
        let outcomes = self.write(|tx| {
            let mut outcomes = Vec::with_capacity(good.len());
            let mut touched = Vec::new();
            for (line, staged, provenance) in &good {
                let at = || Location::line(&manifest, *line);
                let o = import_one(tx, staged, provenance, actor, &source, &info, at)?;
                if let Outcome::Added { spectrum_id, .. } = o {
                    touched.push(spectrum_id);
                }
                outcomes.push(o);
            }
            Ok((outcomes, touched))
        })?;
        Ok((info, outcomes))
    }
}

fn import_one(
    tx: &rusqlite::Connection,
    staged: &Staged,
    provenance: &BTreeMap<String, String>,
    actor: &str,
    source: &str,
    info: &BundleInfo,
    at: impl Fn() -> Location,
) -> Result<Outcome> {
    let technique = staged.submission.technique.name();
    let raw_sha256 = staged.raw.raw_sha256();
    let field = |k: &str| provenance.get(k).map(String::as_str).unwrap_or("");
    let bad = |what: &str| {
        Error::input(
            at(),
            format!("bundle row has an unreadable {what}"),
            "export the bundle again",
        )
    };
    if field("whorl_raw_sha256") != raw_sha256 {
        return Err(Error::input(
            at(),
            "the raw points do not hash to the value the bundle records",
            "export the bundle again",
        ));
    }
    if let Some(spectrum_id) = present_by_raw(tx, technique, &raw_sha256)? {
        return Ok(Outcome::AlreadyPresent { spectrum_id });
    }
    let status: Status = field("whorl_status").parse().map_err(|_| bad("status"))?;
    let revisions: Vec<RevisionEntry> =
        serde_json::from_str(field("whorl_revisions")).map_err(|_| bad("revision history"))?;
    let reviews: Vec<Review> =
        serde_json::from_str(field("whorl_reviews")).map_err(|_| bad("review history"))?;
    let current: i64 = field("whorl_revision")
        .parse()
        .map_err(|_| bad("revision number"))?;
    let metadata = &staged.submission.metadata;
    if revisions.last().map(|r| r.number) != Some(current)
        || revisions.last().map(|r| &r.metadata) != Some(metadata)
    {
        return Err(bad("current revision (it differs from the row's metadata)"));
    }
    let compound_id = find_or_create_compound(tx, metadata)?;
    let withdrawn = Some(field("whorl_withdrawn_reason")).filter(|s| !s.is_empty());
    let spectrum_id = insert_spectrum(
        tx,
        &NewSpectrum {
            compound_id,
            technique,
            status,
            current_revision: current,
            file_name: field("whorl_original_file"),
            file_sha256: field("whorl_original_file_sha256"),
            raw_sha256: &raw_sha256,
            raw: &staged.raw,
            submitted_by: &staged.submission.submitted_by,
            created_at: field("whorl_created_at"),
            withdrawn_reason: withdrawn,
        },
    )?;
    for r in &revisions {
        insert_revision(
            tx,
            &NewRevision {
                spectrum_id,
                number: r.number,
                metadata_json: &serde_json::to_string(&r.metadata)?,
                created_at: &r.created_at,
                created_by: &r.created_by,
                reason: r.reason.as_deref(),
                compound_id: (r.number == current).then_some(compound_id),
            },
        )?;
    }
    let imported_from = format!("{source}, spectrum {}", field("whorl_original_id"));
    for r in &reviews {
        // The sign-off is kept as given, on the new spectrum, saying where it came from.
        insert_review(
            tx,
            &Review {
                spectrum_id,
                imported_from: Some(imported_from.clone()),
                ..r.clone()
            },
        )?;
    }
    insert_prepared(tx, spectrum_id, &staged.prepared)?;
    let meta_json = serde_json::to_string(metadata)?;
    reweigh(tx, technique, &raw_sha256, None, Some((status, &meta_json)))?;
    let payload = serde_json::json!({
        "spectrum": spectrum_id,
        "compound": compound_id,
        "technique": technique,
        "raw_sha256": raw_sha256,
        "file_sha256": field("whorl_original_file_sha256"),
        "status": status,
        "current_revision": current,
        "revisions": revisions,
        "reviews": reviews,
        "bundle": { "fingerprint": info.fingerprint, "original_id": field("whorl_original_id"), "exported_by": info.exported_by, "exported_at": info.exported_at },
    });
    append_event(
        tx,
        actor,
        "import",
        &format!("spectrum:{spectrum_id}"),
        &payload,
    )?;
    Ok(Outcome::Added {
        spectrum_id,
        compound_id,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::testing::{add, curated, ir, rows};

    fn exported(lib: &Library) -> (tempfile::TempDir, std::path::PathBuf) {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("bundle");
        lib.export(&dir, None, None, "carol", &|_, _| {}).unwrap();
        (tmp, dir)
    }

    fn added(outcomes: &[Outcome]) -> Vec<i64> {
        outcomes
            .iter()
            .filter_map(|o| match o {
                Outcome::Added { spectrum_id, .. } => Some(*spectrum_id),
                Outcome::AlreadyPresent { .. } => None,
            })
            .collect()
    }

    #[test]
    fn an_imported_bundle_keeps_history_status_and_fingerprint() {
        let source = curated();
        let (_tmp, dir) = exported(&source);
        let mut lib = Library::in_memory("t").unwrap();
        let (info, outcomes) = lib.import_bundle(&dir, "dave").unwrap();
        assert_eq!(added(&outcomes), [1, 2, 3]);
        assert_eq!(lib.fingerprint().unwrap(), info.fingerprint);
        assert_eq!(lib.fingerprint().unwrap(), source.fingerprint().unwrap());
        let status = |id| lib.spectrum(id).unwrap().status;
        assert_eq!(
            [status(1), status(2), status(3)],
            [Status::Verified, Status::Pending, Status::Withdrawn]
        );
        // The sign-off comes along, saying where from.
        let reviews = lib.reviews(1).unwrap();
        assert_eq!(reviews.len(), 1);
        assert_eq!(reviews[0].reviewer, "bob");
        assert_eq!(reviews[0].note.as_deref(), Some("matches the CoA"));
        let from = reviews[0].imported_from.as_deref().unwrap();
        assert!(
            from.starts_with(&format!("bundle {}", &info.fingerprint[..16])),
            "{from}"
        );
        assert!(from.ends_with("spectrum 1"), "{from}");
        // Both revisions, the old one as it was; the withdrawal reason.
        assert_eq!(lib.spectrum(2).unwrap().revision, 2);
        assert!(lib.spectrum_at(2, 1).unwrap().0.metadata.tags.is_empty());
        assert_eq!(
            lib.spectrum_at(2, 2).unwrap().1.reason.as_deref(),
            Some("tagged")
        );
        assert_eq!(
            lib.withdrawn_reason(3).unwrap().as_deref(),
            Some("wrong sample")
        );
        let imports = lib
            .events(None)
            .unwrap()
            .into_iter()
            .filter(|e| e.action == "import" && e.actor == "dave")
            .count();
        assert_eq!(imports, 3);
        // The events describe the tables: check replays them and finds nothing.
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
    }

    #[test]
    fn spectra_already_present_are_skipped() {
        let (_tmp, dir) = exported(&curated());
        let mut lib = Library::in_memory("t").unwrap();
        // The library already holds the second spectrum's raw points under its own name.
        let own = add(&mut lib, &ir(2, "methyl ethyl ketone", "erin"));
        let (_, outcomes) = lib.import_bundle(&dir, "dave").unwrap();
        assert_eq!(outcomes[1], Outcome::AlreadyPresent { spectrum_id: own });
        assert_eq!(added(&outcomes).len(), 2);
        assert_eq!(
            lib.spectrum(own).unwrap().metadata.name,
            "methyl ethyl ketone"
        );
        // Imported again, nothing is added and nothing is recorded.
        let (events, spectra) = (lib.last_event().unwrap(), rows(&lib, "spectrum"));
        let (_, again) = lib.import_bundle(&dir, "dave").unwrap();
        assert!(added(&again).is_empty());
        assert_eq!(lib.last_event().unwrap(), events);
        assert_eq!(rows(&lib, "spectrum"), spectra);
        assert_eq!(rows(&lib, "review"), 1);
    }
}
