//! Importing a bundle: every checksum verified first, then the spectra stored with their
//! revisions, sign-offs and status in one transaction.

use std::collections::BTreeMap;
use std::path::Path;

use rayon::prelude::*;

use super::bundle::{
    BundleInfo, RevisionEntry, content_state_hash, lf_endings, read_sums, verify_listing,
};
use super::curation::StatusChange;
use super::events::append_event;
use super::keys::{SIGNATURE_FILE, read_signature};
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

/// Which bundles an import accepts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Acceptance {
    /// Only bundles signed by a key the library trusts (`whorl key trust`).
    Trusted,
    /// Also unsigned or wrongly signed bundles, recorded as untrusted on every event.
    Untrusted,
}

/// What the signature check of a bundle found.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
#[serde(tag = "trust", rename_all = "snake_case")]
pub enum Trust {
    /// Signed by a key the library trusts.
    Signed {
        /// The key's name.
        key: String,
        /// The public key (hex).
        public_key: String,
    },
    /// Accepted without a trusted signature (`--untrusted`), and why it had none.
    Untrusted {
        /// Why: unsigned, signed by a key not trusted here, or a signature that does not verify.
        why: String,
    },
}

/// What a bundle import did.
#[derive(Debug, Clone)]
pub struct BundleImport {
    /// `bundle.json`.
    pub info: BundleInfo,
    /// Whose signature it carried.
    pub trust: Trust,
    /// One outcome per manifest row.
    pub outcomes: Vec<Outcome>,
}

impl Library {
    /// Imports a bundle folder. Its signature is checked against the keys the library trusts
    /// (an unsigned or wrongly signed bundle is refused unless `accept` is
    /// [`Acceptance::Untrusted`]); then every checksum, then the state hash; if any fails,
    /// nothing is imported. The whole bundle is one transaction. Spectra already present (same
    /// technique and raw points) are skipped; the others arrive pending local review.
    pub fn import_bundle(
        &mut self,
        dir: &Path,
        actor: &str,
        accept: Acceptance,
    ) -> Result<BundleImport> {
        let sums = read_sums(dir)?;
        let trust = self.bundle_trust(dir, sums.as_bytes())?;
        if let (Trust::Untrusted { why }, Acceptance::Trusted) = (&trust, accept) {
            return Err(Error::input(
                Location::file(dir.join(SIGNATURE_FILE)),
                format!("the bundle is not signed by a key this library trusts: {why}"),
                "ask the exporting lab for its public key and trust it (`whorl key trust NAME.pub --reason ...`), or import with --untrusted (its spectra arrive pending, recorded as untrusted); nothing was imported",
            ));
        }
        let info = verify_listing(dir, &sums)?;
        let manifest = dir.join("manifest.csv");
        let rows = read_bundle_manifest(&manifest)?;
        // The state hash written at export must be the one its content gives: a bundle edited
        // and re-summed but not re-hashed (a status changed, a sign-off added) is refused here.
        let recomputed = content_state_hash(dir, &info, &rows)?;
        if recomputed != info.state_hash {
            return Err(Error::input(
                Location::file(dir.join("bundle.json")),
                format!(
                    "the bundle's state hash {} does not match its content, which hashes to {}",
                    short(&info.state_hash),
                    short(&recomputed)
                ),
                "the manifest or bundle.json was changed after export; export the bundle again from its source; nothing was imported",
            ));
        }
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
        let source = format!(
            "{} bundle {} ({})",
            match &trust {
                Trust::Signed { key, .. } => format!("signed ({key})"),
                Trust::Untrusted { .. } => "untrusted".to_string(),
            },
            short(&info.state_hash),
            dir.display()
        );
        let outcomes = self.write(|tx| {
            let mut outcomes = Vec::with_capacity(good.len());
            let mut touched = Vec::new();
            for (line, staged, provenance) in &good {
                let at = || Location::line(&manifest, *line);
                let o = import_one(tx, staged, provenance, actor, (&source, &trust), &info, at)?;
                if let Outcome::Added { spectrum_id, .. } = o {
                    touched.push(spectrum_id);
                }
                outcomes.push(o);
            }
            Ok((outcomes, touched))
        })?;
        Ok(BundleImport {
            info,
            trust,
            outcomes,
        })
    }

    /// Whether `sums` (the bytes of the bundle's `SHA256SUMS`) carry a valid signature by a
    /// key the library trusts.
    fn bundle_trust(&self, dir: &Path, sums: &[u8]) -> Result<Trust> {
        let Some(sig) = read_signature(dir)? else {
            return Ok(Trust::Untrusted {
                why: "it is unsigned".into(),
            });
        };
        let public_key = sig.key.hex();
        if !self
            .trusted_keys()?
            .iter()
            .any(|k| k.public_key == public_key)
        {
            return Ok(Trust::Untrusted {
                why: format!(
                    "it is signed by key {} ({public_key}), which this library does not trust",
                    sig.key.name()
                ),
            });
        }
        // A listing whose line endings a text-mode copy turned into CRLF reads as the same
        // listing (every line, every checksum); it is the one signed if, with LF restored,
        // the signature holds.
        let verifies = sig.signs(sums) || (sums.contains(&b'\r') && sig.signs(&lf_endings(sums)));
        if !verifies {
            return Ok(Trust::Untrusted {
                why: format!(
                    "its signature by key {} does not verify: SHA256SUMS was changed after signing",
                    sig.key.name()
                ),
            });
        }
        Ok(Trust::Signed {
            key: sig.key.name().to_string(),
            public_key,
        })
    }
}

fn import_one(
    tx: &rusqlite::Connection,
    staged: &Staged,
    provenance: &BTreeMap<String, String>,
    actor: &str,
    (source, trust): (&str, &Trust),
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
    let (compound_id, _) = find_or_create_compound(tx, metadata)?;
    let withdrawn = Some(field("whorl_withdrawn_reason")).filter(|s| !s.trim().is_empty());
    // A withdrawal always has its reason (`withdraw` requires one), and only a withdrawn
    // spectrum has one: a row that says otherwise was edited.
    if (status == Status::Withdrawn) != withdrawn.is_some() {
        return Err(Error::input(
            at(),
            if withdrawn.is_some() {
                format!("the row gives a withdrawal reason but its status is {status}")
            } else {
                "the row marks the spectrum withdrawn without a reason".to_string()
            },
            "a bundle written by `whorl export` gives every withdrawn spectrum its reason and no other; export the bundle again; nothing was imported",
        ));
    }
    // Its withdrawals and reinstatements (absent in bundles written before they travelled):
    // history, whose last step must agree with the status the row gives.
    let history: Vec<StatusChange> = match provenance.get("whorl_status_history") {
        Some(h) if !h.trim().is_empty() => {
            serde_json::from_str(h).map_err(|_| bad("withdrawal and reinstatement history"))?
        }
        _ => Vec::new(),
    };
    if let Some(c) = history.iter().find(|c| {
        !matches!(c.action.as_str(), "withdraw" | "reinstate") || c.reason.trim().is_empty()
    }) {
        return Err(Error::input(
            at(),
            format!(
                "the withdrawal and reinstatement history holds '{}' without a reason or with an unknown action",
                crate::error::excerpt(&c.action, 40)
            ),
            "a bundle written by `whorl export` gives each withdrawal and reinstatement its reason; export the bundle again; nothing was imported",
        ));
    }
    let agrees = match history.last() {
        None => true,
        Some(last) if last.action == "withdraw" => withdrawn == Some(last.reason.as_str()),
        Some(_) => status != Status::Withdrawn,
    };
    if !agrees {
        return Err(Error::input(
            at(),
            format!(
                "the row's status ({status}) disagrees with the last step of its withdrawal and reinstatement history"
            ),
            "a bundle written by `whorl export` keeps the two in step; export the bundle again; nothing was imported",
        ));
    }
    // A reference from another library is pending local acceptance whatever its status there:
    // its sign-offs were given under another library's policy, by people this one does not
    // know, possibly for a name it no longer has. A withdrawal grants nothing and is kept.
    let arrives = match status {
        Status::Withdrawn => Status::Withdrawn,
        Status::Pending | Status::Verified => Status::Pending,
    };
    let spectrum_id = insert_spectrum(
        tx,
        &NewSpectrum {
            compound_id,
            technique,
            status: arrives,
            current_revision: current,
            file_name: field("whorl_original_file"),
            file_sha256: field("whorl_original_file_sha256"),
            raw_sha256: &raw_sha256,
            raw: &staged.raw,
            submitted_by: &staged.submission.submitted_by,
            imported_by: actor,
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
    // Steps taken in the bundle's library name it; steps it brought from elsewhere keep theirs.
    let history: Vec<StatusChange> = history
        .into_iter()
        .map(|c| StatusChange {
            library: c.library.or_else(|| Some(imported_from.clone())),
            ..c
        })
        .collect();
    for r in &reviews {
        // The sign-off is kept as given, on the new spectrum, saying where it came from: history,
        // never a local approval.
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
    reweigh(
        tx,
        technique,
        &raw_sha256,
        None,
        Some((arrives, &meta_json)),
    )?;
    let payload = serde_json::json!({
        "spectrum": spectrum_id,
        "compound": compound_id,
        "technique": technique,
        "raw_sha256": raw_sha256,
        "file_sha256": field("whorl_original_file_sha256"),
        "status": arrives,
        "status_in_bundle": status,
        "submitted_by": staged.submission.submitted_by,
        "imported_from": imported_from,
        "signature": trust,
        "current_revision": current,
        "revisions": revisions,
        "reviews": reviews,
        "status_history": history,
        "bundle": { "state_hash": info.state_hash, "original_id": field("whorl_original_id"), "exported_by": info.exported_by, "exported_at": info.exported_at },
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
        same_name: None,
    })
}

/// The first 16 hex digits of a hash, or all of a shorter (damaged) one.
fn short(hash: &str) -> &str {
    hash.get(..16).unwrap_or(hash)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::testing::{add, curated, ir, rows};
    use crate::library::{Decision, KeyPair};
    use std::path::Path;

    fn exported(lib: &Library) -> (tempfile::TempDir, std::path::PathBuf) {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("bundle");
        lib.export(&dir, None, None, "carol", None, &|_, _| {})
            .unwrap();
        (tmp, dir)
    }

    /// Imports a bundle as untrusted (unsigned bundles need it), as "dave".
    fn untrusted(lib: &mut Library, dir: &Path) -> Result<(BundleInfo, Vec<Outcome>)> {
        let done = lib.import_bundle(dir, "dave", Acceptance::Untrusted)?;
        Ok((done.info, done.outcomes))
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
    fn an_imported_bundle_keeps_history_status_and_state_hash() {
        let source = curated();
        let (_tmp, dir) = exported(&source);
        let mut lib = Library::in_memory("t").unwrap();
        let (info, outcomes) = untrusted(&mut lib, &dir).unwrap();
        assert_eq!(added(&outcomes), [1, 2, 3]);
        assert_eq!(info.state_hash, source.state_hash().unwrap());
        let status = |id| lib.spectrum(id).unwrap().status;
        // Verified at home, pending local acceptance here.
        assert_eq!(
            [status(1), status(2), status(3)],
            [Status::Pending, Status::Pending, Status::Withdrawn]
        );
        assert_ne!(lib.state_hash().unwrap(), info.state_hash);
        // The sign-off comes along, saying where from.
        let reviews = lib.reviews(1).unwrap();
        assert_eq!(reviews.len(), 1);
        assert_eq!(reviews[0].reviewer, "bob");
        assert_eq!(reviews[0].note.as_deref(), Some("matches the CoA"));
        let from = reviews[0].imported_from.as_deref().unwrap();
        assert!(
            from.starts_with(&format!("untrusted bundle {}", &info.state_hash[..16])),
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

    /// Rewrites `SHA256SUMS` for the files as they are now, as anyone editing a bundle can.
    fn reseal(dir: &Path) {
        let sums = std::fs::read_to_string(dir.join("SHA256SUMS")).unwrap();
        let mut out = String::new();
        for line in sums.lines() {
            let (_, file) = line.split_once("  ").unwrap();
            let bytes = std::fs::read(dir.join(file)).unwrap();
            out.push_str(&format!(
                "{}  {file}\n",
                crate::spectrum::sha256_hex(&bytes)
            ));
        }
        std::fs::write(dir.join("SHA256SUMS"), out).unwrap();
    }

    /// Edits the manifest cell `column` of the row of original spectrum `id`.
    fn edit_manifest(dir: &Path, id: &str, column: &str, value: &str) {
        let path = dir.join("manifest.csv");
        let mut r = csv::Reader::from_path(&path).unwrap();
        let header = r.headers().unwrap().clone();
        let at = |name: &str| header.iter().position(|h| h == name).unwrap();
        let mut w = csv::Writer::from_writer(Vec::new());
        w.write_record(&header).unwrap();
        for rec in r.records() {
            let mut row: Vec<String> = rec.unwrap().iter().map(str::to_string).collect();
            if row[at("whorl_original_id")] == id {
                row[at(column)] = value.to_string();
            }
            w.write_record(&row).unwrap();
        }
        std::fs::write(&path, w.into_inner().unwrap()).unwrap();
    }

    /// Sets the state hash written in `bundle.json`.
    fn set_state_hash(dir: &Path, hash: &str) {
        let path = dir.join("bundle.json");
        let mut info: serde_json::Value =
            serde_json::from_slice(&std::fs::read(&path).unwrap()).unwrap();
        info["state_hash"] = hash.into();
        std::fs::write(&path, serde_json::to_string_pretty(&info).unwrap() + "\n").unwrap();
    }

    fn refused_at_bundle_json(lib: &mut Library, dir: &Path) -> String {
        match untrusted(lib, dir) {
            Err(Error::Input { at, reason, hint }) => {
                assert_eq!(at.file, dir.join("bundle.json"), "{reason}");
                assert!(!hint.is_empty());
                reason
            }
            other => panic!("expected a refusal, got {other:?}"),
        }
    }

    #[test]
    fn a_bundle_written_when_the_state_hash_was_called_fingerprint_imports() {
        let source = curated();
        let (_tmp, dir) = exported(&source);
        let path = dir.join("bundle.json");
        let text = std::fs::read_to_string(&path).unwrap();
        let old = text
            .replace("\"source_state_hash\"", "\"source_fingerprint\"")
            .replace("\"state_hash\"", "\"fingerprint\"");
        assert!(
            old.contains("\"fingerprint\"") && !old.contains("state_hash"),
            "{old}"
        );
        std::fs::write(&path, old).unwrap();
        reseal(&dir);
        let mut lib = Library::in_memory("t").unwrap();
        let (info, outcomes) = untrusted(&mut lib, &dir).unwrap();
        assert_eq!(added(&outcomes), [1, 2, 3]);
        assert_eq!(info.state_hash, source.state_hash().unwrap());
        // Under the old key, a wrong value is still refused.
        set_state_hash(&dir, &"0".repeat(64));
        let text = std::fs::read_to_string(&path).unwrap();
        let mut info: serde_json::Value = serde_json::from_str(&text).unwrap();
        let zero = info.as_object_mut().unwrap().remove("state_hash").unwrap();
        info.as_object_mut().unwrap().remove("fingerprint");
        info["fingerprint"] = zero;
        std::fs::write(&path, serde_json::to_string_pretty(&info).unwrap()).unwrap();
        reseal(&dir);
        let mut fresh = Library::in_memory("t").unwrap();
        let reason = refused_at_bundle_json(&mut fresh, &dir);
        assert!(reason.contains("state hash"), "{reason}");
    }

    #[test]
    fn a_zeroed_state_hash_is_refused_naming_bundle_json() {
        let (_tmp, dir) = exported(&curated());
        set_state_hash(&dir, &"0".repeat(64));
        reseal(&dir);
        let mut lib = Library::in_memory("t").unwrap();
        let reason = refused_at_bundle_json(&mut lib, &dir);
        assert!(reason.contains("state hash"), "{reason}");
        assert_eq!(rows(&lib, "spectrum"), 0);
        // A short or empty one too, without a panic.
        set_state_hash(&dir, "");
        reseal(&dir);
        refused_at_bundle_json(&mut lib, &dir);
    }

    #[test]
    fn a_status_edited_in_the_manifest_is_refused_by_the_state_hash() {
        let (_tmp, dir) = exported(&curated());
        // Spectrum 2 is pending at home; the edit claims it verified by a made-up reviewer.
        edit_manifest(&dir, "2", "whorl_status", "verified");
        reseal(&dir);
        let mut lib = Library::in_memory("t").unwrap();
        let reason = refused_at_bundle_json(&mut lib, &dir);
        assert!(reason.contains("does not match"), "{reason}");
        assert_eq!(rows(&lib, "spectrum"), 0);
    }

    #[test]
    fn foreign_sign_offs_are_history_and_references_arrive_pending() {
        let source = curated();
        let (_tmp, dir) = exported(&source);
        // A consistent forgery: status, a made-up sign-off and a state hash recomputed to match.
        let forged = serde_json::json!([{
            "id": 9, "spectrum_id": 2, "revision": 2, "reviewer": "mallory",
            "at": "2026-01-01T00:00:00.000Z", "decision": "approved",
            "meaning": "approved", "note": null, "imported_from": null,
        }]);
        edit_manifest(&dir, "2", "whorl_status", "verified");
        edit_manifest(&dir, "2", "whorl_reviews", &forged.to_string());
        reseal(&dir);
        let rows_now = read_bundle_manifest(&dir.join("manifest.csv")).unwrap();
        let info = crate::library::verify_bundle(&dir).unwrap();
        let recomputed = content_state_hash(&dir, &info, &rows_now).unwrap();
        set_state_hash(&dir, &recomputed);
        reseal(&dir);

        let mut lib = Library::in_memory("t").unwrap();
        let (_, outcomes) = untrusted(&mut lib, &dir).unwrap();
        assert_eq!(added(&outcomes), [1, 2, 3]);
        let status = |lib: &Library, id| lib.spectrum(id).unwrap().status;
        // Verified at home or in the forged manifest, pending here; withdrawn stays withdrawn.
        assert_eq!(
            [status(&lib, 1), status(&lib, 2), status(&lib, 3)],
            [Status::Pending, Status::Pending, Status::Withdrawn]
        );
        // The foreign sign-offs are kept, marked as history from elsewhere.
        let reviews = lib.reviews(2).unwrap();
        assert_eq!(reviews.len(), 1);
        assert_eq!(reviews[0].reviewer, "mallory");
        assert!(reviews[0].imported_from.is_some());
        // None of them counts here: a local reviewer other than the submitter and the importer
        // approves; the importer may not.
        assert!(
            lib.review(1, "dave", Decision::Approve, None, None)
                .is_err()
        );
        lib.review(1, "erin", Decision::Approve, None, None)
            .unwrap();
        assert_eq!(status(&lib, 1), Status::Verified);
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
    }

    #[test]
    fn a_compound_renamed_after_sign_off_does_not_arrive_approved() {
        let mut source = Library::in_memory("t").unwrap();
        let id = add(&mut source, &ir(1, "acetone", "alice"));
        source
            .review(id, "bob", Decision::Approve, None, None)
            .unwrap();
        // Renamed after the sign-off: a forger puts the new name in the current revision
        // and keeps the old sign-off and status.
        let (_tmp, dir) = exported(&source);
        let rows_before = read_bundle_manifest(&dir.join("manifest.csv")).unwrap();
        let mut revisions: serde_json::Value =
            serde_json::from_str(&rows_before[0].provenance["whorl_revisions"]).unwrap();
        revisions[0]["metadata"]["name"] = "heroin".into();
        edit_manifest(&dir, "1", "name", "heroin");
        edit_manifest(&dir, "1", "whorl_revisions", &revisions.to_string());
        reseal(&dir);
        let rows_now = read_bundle_manifest(&dir.join("manifest.csv")).unwrap();
        let info = crate::library::verify_bundle(&dir).unwrap();
        set_state_hash(&dir, &content_state_hash(&dir, &info, &rows_now).unwrap());
        reseal(&dir);
        let mut lib = Library::in_memory("t").unwrap();
        untrusted(&mut lib, &dir).unwrap();
        let rec = lib.spectrum(1).unwrap();
        assert_eq!(rec.metadata.name, "heroin");
        assert_eq!(rec.status, Status::Pending);
        assert_eq!(lib.reviews(1).unwrap()[0].reviewer, "bob");
    }

    fn signed_by(lib: &Library, key: &KeyPair) -> (tempfile::TempDir, std::path::PathBuf) {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("bundle");
        lib.export(&dir, None, None, "carol", Some(key), &|_, _| {})
            .unwrap();
        (tmp, dir)
    }

    fn refused_for_trust(lib: &mut Library, dir: &Path) -> String {
        match lib.import_bundle(dir, "dave", Acceptance::Trusted) {
            Err(Error::Input { at, reason, hint }) => {
                assert_eq!(at.file, dir.join("SIGNATURE"), "{reason}");
                assert!(hint.contains("--untrusted"), "{hint}");
                assert_eq!(rows(lib, "spectrum"), 0);
                reason
            }
            other => panic!("expected a refusal, got {other:?}"),
        }
    }

    #[test]
    fn a_bundle_signed_by_a_trusted_key_imports_and_others_need_untrusted() {
        let key = KeyPair::generate("lab-a").unwrap();
        let (_tmp, dir) = signed_by(&curated(), &key);
        let mut lib = Library::in_memory("t").unwrap();
        // Not trusted yet.
        let reason = refused_for_trust(&mut lib, &dir);
        assert!(reason.contains("does not trust"), "{reason}");
        lib.trust_key(&key.public(), "our own key", "admin")
            .unwrap();
        let done = lib
            .import_bundle(&dir, "dave", Acceptance::Trusted)
            .unwrap();
        assert_eq!(
            done.trust,
            Trust::Signed {
                key: "lab-a".into(),
                public_key: key.public().hex()
            }
        );
        assert_eq!(added(&done.outcomes), [1, 2, 3]);
        // Signed and trusted, still pending local review.
        assert_eq!(lib.spectrum(1).unwrap().status, Status::Pending);
        let event = lib.events(Some("spectrum:1")).unwrap().pop().unwrap();
        assert_eq!(event.payload["signature"]["trust"], "signed");
    }

    #[test]
    fn unsigned_and_wrongly_signed_bundles_are_refused_unless_untrusted() {
        let key = KeyPair::generate("lab-a").unwrap();
        let mut lib = Library::in_memory("t").unwrap();
        lib.trust_key(&key.public(), "partner", "admin").unwrap();
        // Unsigned.
        let (_tmp, plain) = exported(&curated());
        let reason = refused_for_trust(&mut lib, &plain);
        assert!(reason.contains("unsigned"), "{reason}");
        // Signed, then SHA256SUMS changed (a blank line: every checksum still holds).
        let (_tmp2, dir) = signed_by(&curated(), &key);
        let mut sums = std::fs::read_to_string(dir.join("SHA256SUMS")).unwrap();
        sums.push('\n');
        std::fs::write(dir.join("SHA256SUMS"), sums).unwrap();
        let reason = refused_for_trust(&mut lib, &dir);
        assert!(reason.contains("does not verify"), "{reason}");
        // Accepted as untrusted: pending, and recorded so on the event and the sign-offs.
        let done = lib
            .import_bundle(&dir, "dave", Acceptance::Untrusted)
            .unwrap();
        assert!(matches!(done.trust, Trust::Untrusted { .. }));
        let event = lib.events(Some("spectrum:1")).unwrap().pop().unwrap();
        assert_eq!(event.payload["signature"]["trust"], "untrusted");
        assert!(
            lib.reviews(1).unwrap()[0]
                .imported_from
                .as_deref()
                .unwrap()
                .starts_with("untrusted bundle")
        );
        assert_eq!(lib.spectrum(1).unwrap().status, Status::Pending);
    }

    #[test]
    fn a_withdrawal_without_its_reason_is_refused() {
        // Spectrum 3 of `curated` is withdrawn; its reason cleared, and the checksums made
        // to fit (the state hash covers only searchable rows).
        let (_tmp, dir) = exported(&curated());
        edit_manifest(&dir, "3", "whorl_withdrawn_reason", "");
        reseal(&dir);
        let mut lib = Library::in_memory("t").unwrap();
        let err = untrusted(&mut lib, &dir).unwrap_err();
        assert!(
            err.to_string().contains("withdrawn without a reason"),
            "{err}"
        );
        assert_eq!(rows(&lib, "spectrum"), 0);
        // A reason on a spectrum that is not withdrawn is refused as well.
        let (_tmp, dir) = exported(&curated());
        edit_manifest(&dir, "1", "whorl_withdrawn_reason", "made up");
        reseal(&dir);
        let err = untrusted(&mut lib, &dir).unwrap_err();
        assert!(
            err.to_string().contains("gives a withdrawal reason"),
            "{err}"
        );
        assert_eq!(rows(&lib, "spectrum"), 0);
    }

    #[test]
    fn a_status_history_that_disagrees_with_the_row_is_refused() {
        // Spectrum 3 of `curated` is withdrawn, its history one withdrawal; spectrum 1 is
        // verified with none. Each edit resealed, as anyone editing a bundle can.
        let step = |action: &str, reason: &str| {
            serde_json::json!([{"action": action, "at": "2026-01-01T00:00:00.000Z", "by": "m.allory", "reason": reason}])
                .to_string()
        };
        let (_tmp, dir) = exported(&curated());
        let rows_before = read_bundle_manifest(&dir.join("manifest.csv")).unwrap();
        let h3 = &rows_before
            .iter()
            .find(|r| r.provenance["whorl_original_id"] == "3")
            .unwrap()
            .provenance["whorl_status_history"];
        let h3: Vec<StatusChange> = serde_json::from_str(h3).unwrap();
        assert_eq!(h3.len(), 1);
        assert_eq!(
            (h3[0].action.as_str(), h3[0].reason.as_str()),
            ("withdraw", "wrong sample")
        );
        for (id, history, says) in [
            ("1", step("withdraw", "made up"), "disagrees"),
            ("3", step("reinstate", "cleared"), "disagrees"),
            ("3", step("withdraw", "another reason"), "disagrees"),
            ("3", step("delete", "gone"), "unknown action"),
            ("3", step("withdraw", " "), "without a reason"),
            ("3", "not json".to_string(), "unreadable"),
        ] {
            let (_tmp, dir) = exported(&curated());
            edit_manifest(&dir, id, "whorl_status_history", &history);
            reseal(&dir);
            let mut lib = Library::in_memory("t").unwrap();
            let err = untrusted(&mut lib, &dir).unwrap_err();
            assert!(err.to_string().contains(says), "{id} {history}: {err}");
            assert_eq!(rows(&lib, "spectrum"), 0);
        }
        // Without the column (a bundle written before it existed), the rows import as before.
        let mut lib = Library::in_memory("t").unwrap();
        let (_tmp, dir) = exported(&curated());
        drop_column(&dir, "whorl_status_history");
        reseal(&dir);
        let (_, outcomes) = untrusted(&mut lib, &dir).unwrap();
        assert_eq!(added(&outcomes), [1, 2, 3]);
        assert!(lib.status_history(3).unwrap().is_empty());
        assert!(lib.check(&|_, _| {}).unwrap().findings.is_empty());
    }

    /// Removes a column from a bundle's manifest.
    fn drop_column(dir: &Path, column: &str) {
        let path = dir.join("manifest.csv");
        let mut r = csv::Reader::from_path(&path).unwrap();
        let header = r.headers().unwrap().clone();
        let at = header.iter().position(|h| h == column).unwrap();
        let keep = |rec: &csv::StringRecord| -> Vec<String> {
            rec.iter()
                .enumerate()
                .filter(|(i, _)| *i != at)
                .map(|(_, c)| c.to_string())
                .collect()
        };
        let mut w = csv::Writer::from_writer(Vec::new());
        w.write_record(keep(&header)).unwrap();
        for rec in r.records() {
            w.write_record(keep(&rec.unwrap())).unwrap();
        }
        std::fs::write(&path, w.into_inner().unwrap()).unwrap();
    }

    #[test]
    fn a_signed_listing_copied_with_crlf_endings_still_verifies() {
        let key = KeyPair::generate("lab-a").unwrap();
        let (_tmp, dir) = signed_by(&curated(), &key);
        let sums = std::fs::read_to_string(dir.join("SHA256SUMS")).unwrap();
        std::fs::write(dir.join("SHA256SUMS"), sums.replace('\n', "\r\n")).unwrap();
        let mut lib = Library::in_memory("t").unwrap();
        lib.trust_key(&key.public(), "partner", "admin").unwrap();
        let done = lib
            .import_bundle(&dir, "dave", Acceptance::Trusted)
            .unwrap();
        assert!(matches!(done.trust, Trust::Signed { .. }));
        // Any other change to the listing still breaks the signature.
        let (_tmp2, dir) = signed_by(&curated(), &key);
        let sums = std::fs::read_to_string(dir.join("SHA256SUMS")).unwrap();
        std::fs::write(dir.join("SHA256SUMS"), sums.replace('\n', "\r\n") + "\r\n").unwrap();
        let mut other = Library::in_memory("t").unwrap();
        other.trust_key(&key.public(), "partner", "admin").unwrap();
        let reason = refused_for_trust(&mut other, &dir);
        assert!(reason.contains("does not verify"), "{reason}");
    }

    #[test]
    fn spectra_already_present_are_skipped() {
        let (_tmp, dir) = exported(&curated());
        let mut lib = Library::in_memory("t").unwrap();
        // The library already holds the second spectrum's raw points under its own name.
        let own = add(&mut lib, &ir(2, "methyl ethyl ketone", "erin"));
        let (_, outcomes) = untrusted(&mut lib, &dir).unwrap();
        assert_eq!(outcomes[1], Outcome::AlreadyPresent { spectrum_id: own });
        assert_eq!(added(&outcomes).len(), 2);
        assert_eq!(
            lib.spectrum(own).unwrap().metadata.name,
            "methyl ethyl ketone"
        );
        // Imported again, nothing is added and nothing is recorded, and the generation stays
        // the newest event's, so `check` finds nothing (the crash test found it moving).
        let (events, spectra) = (lib.last_event().unwrap(), rows(&lib, "spectrum"));
        let generation = lib.generation().unwrap();
        let (_, again) = untrusted(&mut lib, &dir).unwrap();
        assert!(added(&again).is_empty());
        assert_eq!(lib.last_event().unwrap(), events);
        assert_eq!(lib.generation().unwrap(), generation);
        assert_eq!(rows(&lib, "spectrum"), spectra);
        assert_eq!(rows(&lib, "review"), 1);
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
    }
}
