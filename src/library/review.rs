//! Sign-offs: a reviewer approves or rejects the current revision of a pending spectrum,
//! under the library's self-review policy.

use rusqlite::params;

use super::events::{SIGNED_IN, append_event, identity_of};
use super::identity::same_person;
use super::records::{Review, SpectrumRecord};
use super::state::{put_setting, reweigh};
use super::store::{insert_review, set_status};
use super::{Library, now};
use crate::error::{Error, Result};
use crate::spectrum::Status;

/// A reviewer's decision.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Decision {
    /// The spectrum is fit to be a reference: it becomes `verified`.
    Approve,
    /// It is not: it stays `pending` and needs a revision (or withdrawal).
    Reject,
}

impl Decision {
    fn name(self) -> &'static str {
        match self {
            Decision::Approve => "approved",
            Decision::Reject => "rejected",
        }
    }

    /// What the signature means when the reviewer does not say (21 CFR 11.50 asks that a
    /// signature state its meaning).
    pub fn default_meaning(self) -> &'static str {
        match self {
            Decision::Approve => {
                "reviewed against its source records and approved as a reference spectrum"
            }
            Decision::Reject => "reviewed and not approved as a reference spectrum",
        }
    }
}

impl Library {
    /// Whether the library lets a submitter review their own spectra (off by default).
    pub fn allow_self_review(&self) -> Result<bool> {
        Ok(self.setting("allow_self_review")?.as_deref() == Some("true"))
    }

    /// Sets the self-review policy, recording who changed it and why (a reason is required).
    pub fn set_self_review(&mut self, allow: bool, actor: &str, reason: &str) -> Result<()> {
        let reason = reason.trim();
        if reason.is_empty() {
            return Err(Error::invalid(
                "a change of the review policy needs a reason",
                "say why, e.g. --reason \"single-analyst site, approved by QA on 2026-03-02\"",
            ));
        }
        self.write(|tx| {
            // The event first: a trigger lets the setting change only to what the newest
            // event records.
            append_event(
                tx,
                actor,
                "policy",
                "library",
                &serde_json::json!({ "allow_self_review": allow, "reason": reason }),
            )?;
            put_setting(tx, "allow_self_review", &allow.to_string())?;
            Ok(((), vec![]))
        })
    }

    /// Whether sign-offs must be signed (made through the server by a signed-in account); off
    /// by default, so the command line's asserted sign-offs are accepted.
    pub fn signed_sign_offs_only(&self) -> Result<bool> {
        Ok(self.setting("sign_offs")?.as_deref() == Some("signed-only"))
    }

    /// Sets whether sign-offs must be signed, with a reason, recorded as a `policy` event.
    pub fn set_signed_sign_offs_only(
        &mut self,
        only: bool,
        reason: &str,
        actor: &str,
    ) -> Result<()> {
        if reason.trim().is_empty() {
            return Err(Error::invalid(
                "a change of the sign-off policy needs a reason",
                "say why with --reason TEXT",
            ));
        }
        let value = if only { "signed-only" } else { "any" };
        self.write(|tx| {
            put_setting(tx, "sign_offs", value)?;
            append_event(
                tx,
                actor,
                "policy",
                "library",
                &serde_json::json!({ "sign_offs": value, "reason": reason.trim() }),
            )?;
            Ok(((), vec![]))
        })
    }

    /// Sign-offs of a spectrum, oldest first.
    pub fn reviews(&self, spectrum_id: i64) -> Result<Vec<Review>> {
        let mut stmt = self.conn.prepare(
            "SELECT id, spectrum_id, revision, reviewer, at, decision, meaning, note, imported_from
             FROM review WHERE spectrum_id = ?1 ORDER BY id",
        )?;
        let rows = stmt.query_map([spectrum_id], |r| {
            Ok(Review {
                id: r.get(0)?,
                spectrum_id: r.get(1)?,
                revision: r.get(2)?,
                reviewer: r.get(3)?,
                at: r.get(4)?,
                decision: r.get(5)?,
                meaning: r.get(6)?,
                note: r.get(7)?,
                imported_from: r.get(8)?,
            })
        })?;
        Ok(rows.collect::<rusqlite::Result<Vec<_>>>()?)
    }

    /// Records a reviewer's sign-off on the current revision of a pending spectrum.
    pub fn review(
        &mut self,
        id: i64,
        reviewer: &str,
        decision: Decision,
        meaning: Option<&str>,
        note: Option<&str>,
    ) -> Result<Review> {
        let mut done = self.review_many(&[id], reviewer, decision, meaning, note)?;
        Ok(done.pop().expect("one sign-off per spectrum"))
    }

    /// Records the same sign-off on several spectra in one transaction; refuses all of them if
    /// any one cannot be signed (see [`Library::review`] for the rules).
    pub fn review_many(
        &mut self,
        ids: &[i64],
        reviewer: &str,
        decision: Decision,
        meaning: Option<&str>,
        note: Option<&str>,
    ) -> Result<Vec<Review>> {
        self.review_pinned(ids, None, reviewer, decision, meaning, note)
    }

    /// [`Library::review_many`], with the revision the reviewer looked at: when `revision` is
    /// given, a spectrum whose current revision differs (revised between looking and signing)
    /// is refused. A spectrum named twice is refused: one sign-off per spectrum.
    pub fn review_pinned(
        &mut self,
        ids: &[i64],
        revision: Option<i64>,
        reviewer: &str,
        decision: Decision,
        meaning: Option<&str>,
        note: Option<&str>,
    ) -> Result<Vec<Review>> {
        let mut seen = std::collections::HashSet::new();
        if let Some(id) = ids.iter().find(|&&id| !seen.insert(id)) {
            return Err(Error::invalid(
                format!("spectrum {id} is named more than once; one sign-off per spectrum"),
                "name each spectrum once",
            ));
        }
        if self.signed_sign_offs_only()? && identity_of(&self.conn)? != SIGNED_IN {
            return Err(Error::invalid(
                "this library accepts only signed sign-offs: a reviewer must sign in to the lab server",
                "sign off through the server (POST /api/v1/spectra/ID/review, with your password); an administrator changes this with `whorl policy --sign-offs any --reason TEXT`",
            ));
        }
        let allow_self = self.allow_self_review()?;
        let mut checked = Vec::with_capacity(ids.len());
        for &id in ids {
            let rec = self.reviewable(id, reviewer, allow_self)?;
            if let Some(n) = revision.filter(|&n| n != rec.revision) {
                return Err(Error::invalid(
                    format!(
                        "spectrum {id} is at revision {}, not the revision {n} given to sign off",
                        rec.revision
                    ),
                    "look at the current revision (`whorl show ID`) and review that one",
                ));
            }
            let metadata_json = serde_json::to_string(&rec.metadata)?;
            checked.push((rec, metadata_json));
        }
        let meaning = meaning
            .map(str::trim)
            .filter(|m| !m.is_empty())
            .unwrap_or(decision.default_meaning())
            .to_string();
        let note = note
            .map(str::trim)
            .filter(|n| !n.is_empty())
            .map(str::to_string);
        let at = now();
        self.write(|tx| {
            let mut reviews = Vec::with_capacity(checked.len());
            for (rec, metadata_json) in &checked {
                let id = rec.id;
                let mut review = Review {
                    id: 0,
                    spectrum_id: id,
                    revision: rec.revision,
                    reviewer: reviewer.to_string(),
                    at: at.clone(),
                    decision: decision.name().to_string(),
                    meaning: meaning.clone(),
                    note: note.clone(),
                    imported_from: None,
                };
                review.id = insert_review(tx, &review)?;
                if decision == Decision::Approve {
                    set_status(tx, id, Status::Verified, None)?;
                    reweigh(
                        tx,
                        rec.technique.name(),
                        &rec.raw_sha256,
                        Some((Status::Pending, metadata_json)),
                        Some((Status::Verified, metadata_json)),
                    )?;
                }
                let payload = serde_json::json!({
                    "spectrum": id, "revision": rec.revision, "decision": decision.name(),
                    "meaning": meaning, "note": note, "reviewer": reviewer, "at": at,
                });
                append_event(tx, reviewer, "review", &format!("spectrum:{id}"), &payload)?;
                reviews.push(review);
            }
            Ok((reviews, ids.to_vec()))
        })
    }

    /// The spectrum's current record, if `reviewer` may sign it off now.
    fn reviewable(&self, id: i64, reviewer: &str, allow_self: bool) -> Result<SpectrumRecord> {
        let rec = self.spectrum(id)?;
        let revision_author: String = self.conn.query_row(
            "SELECT created_by FROM revision WHERE spectrum_id = ?1 AND number = ?2",
            params![id, rec.revision],
            |r| r.get(0),
        )?;
        match rec.status {
            Status::Withdrawn => {
                return Err(Error::invalid(
                    format!(
                        "spectrum {id} is withdrawn; withdrawn spectra are kept for history and cannot be reviewed"
                    ),
                    "add a new measurement with `whorl add` if the compound needs a reference again",
                ));
            }
            Status::Verified => {
                return Err(Error::invalid(
                    format!(
                        "spectrum {id} (revision {}) is already verified",
                        rec.revision
                    ),
                    "to change it, make a new revision with `whorl revise`; that revision is reviewed in turn",
                ));
            }
            Status::Pending => {}
        }
        if let Some(r) = self.reviews(id)?.into_iter().rev().find(|r| {
            r.revision == rec.revision && r.decision == "rejected" && r.imported_from.is_none()
        }) {
            return Err(Error::invalid(
                format!(
                    "revision {} of spectrum {id} was rejected by {} at {}",
                    rec.revision, r.reviewer, r.at
                ),
                "correct it with `whorl revise` (the new revision is reviewed in turn) or `whorl withdraw` it",
            ));
        }
        // The four-eyes rule: the reviewer is neither who the file says submitted it, nor who
        // stored it (ran the add or import), nor who wrote the revision under review.
        let imported_by = rec.imported_by.as_deref().unwrap_or(&rec.submitted_by);
        let role = if same_person(reviewer, &rec.submitted_by) {
            Some("submitted spectrum")
        } else if same_person(reviewer, imported_by) {
            Some("imported spectrum")
        } else if same_person(reviewer, &revision_author) {
            Some("wrote the current revision of spectrum")
        } else {
            None
        };
        if let (false, Some(role)) = (allow_self, role) {
            return Err(Error::invalid(
                format!("{reviewer} {role} {id}; the reviewer must be someone else"),
                "ask a second analyst to review it (--by WHO); self-review is off by library policy",
            ));
        }
        Ok(rec)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::MetadataPatch;
    use crate::library::testing::{add, ir, rows};

    fn approve(lib: &mut Library, id: i64, by: &str) -> Result<Review> {
        lib.review(id, by, Decision::Approve, None, None)
    }

    #[test]
    fn a_submitter_cannot_approve_their_own_spectrum() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        let events = lib.last_event().unwrap();
        // The same person whatever the case and spacing of the name.
        for who in ["alice", " Alice "] {
            let err = approve(&mut lib, id, who).unwrap_err().to_string();
            assert!(err.contains("submitted spectrum 1"), "{err}");
        }
        assert_eq!(lib.spectrum(id).unwrap().status, Status::Pending);
        assert_eq!(rows(&lib, "review"), 0);
        assert_eq!(lib.last_event().unwrap(), events);
    }

    #[test]
    fn another_reviewer_can_approve() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        let before = lib.state_hash().unwrap();
        let review = approve(&mut lib, id, "bob").unwrap();
        assert_eq!(lib.spectrum(id).unwrap().status, Status::Verified);
        let stored = lib.reviews(id).unwrap();
        assert_eq!(stored.len(), 1);
        assert_eq!(stored[0].id, review.id);
        assert_eq!(
            (stored[0].reviewer.as_str(), stored[0].decision.as_str()),
            ("bob", "approved")
        );
        assert_eq!(stored[0].meaning, Decision::Approve.default_meaning());
        assert_eq!(stored[0].imported_from, None);
        let event = lib.events(Some("spectrum:1")).unwrap().pop().unwrap();
        assert_eq!(
            (event.action.as_str(), event.actor.as_str()),
            ("review", "bob")
        );
        // The status is part of what the state hash covers.
        assert_ne!(lib.state_hash().unwrap(), before);
        // Approved once is enough.
        let err = approve(&mut lib, id, "carol").unwrap_err().to_string();
        assert!(err.contains("already verified"), "{err}");
    }

    #[test]
    fn the_author_of_the_current_revision_cannot_approve_it() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        let patch = MetadataPatch {
            notes: Some("dried over sieves".into()),
            ..Default::default()
        };
        lib.revise(id, &patch, "carol", None).unwrap();
        let err = approve(&mut lib, id, "carol").unwrap_err().to_string();
        assert!(err.contains("current revision"), "{err}");
        approve(&mut lib, id, "bob").unwrap();
    }

    #[test]
    fn the_policy_switch_lets_a_submitter_approve_and_is_audited() {
        let mut lib = Library::in_memory("t").unwrap();
        let a = add(&mut lib, &ir(1, "acetone", "alice"));
        let b = add(&mut lib, &ir(2, "butanone", "alice"));
        assert!(!lib.allow_self_review().unwrap());
        assert!(lib.set_self_review(true, "admin", " ").is_err());
        assert!(!lib.allow_self_review().unwrap());
        lib.set_self_review(true, "admin", "single-analyst night shift")
            .unwrap();
        assert!(lib.allow_self_review().unwrap());
        approve(&mut lib, a, "alice").unwrap();
        let policy = lib.events(Some("library")).unwrap().pop().unwrap();
        assert_eq!(
            (policy.action.as_str(), policy.actor.as_str()),
            ("policy", "admin")
        );
        assert_eq!(policy.payload["allow_self_review"], true);
        assert_eq!(policy.payload["reason"], "single-analyst night shift");
        lib.set_self_review(false, "admin", "day shift").unwrap();
        assert!(approve(&mut lib, b, "alice").is_err());
    }

    #[test]
    fn a_rejected_revision_is_not_approved_later() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        lib.review(id, "bob", Decision::Reject, None, Some("baseline drifts"))
            .unwrap();
        assert_eq!(lib.spectrum(id).unwrap().status, Status::Pending);
        let err = approve(&mut lib, id, "carol").unwrap_err().to_string();
        assert!(err.contains("was rejected by bob"), "{err}");
        // A new revision is reviewed in turn.
        let patch = MetadataPatch {
            notes: Some("baseline corrected at the instrument".into()),
            ..Default::default()
        };
        lib.revise(id, &patch, "alice", Some("rejected")).unwrap();
        approve(&mut lib, id, "carol").unwrap();
    }

    #[test]
    fn one_refusal_refuses_the_whole_batch_of_sign_offs() {
        let mut lib = Library::in_memory("t").unwrap();
        let a = add(&mut lib, &ir(1, "acetone", "alice"));
        let b = add(&mut lib, &ir(2, "butanone", "bob"));
        let err = lib
            .review_many(&[a, b], "bob", Decision::Approve, None, None)
            .unwrap_err()
            .to_string();
        assert!(err.contains("spectrum 2"), "{err}");
        assert_eq!(lib.spectrum(a).unwrap().status, Status::Pending);
        assert_eq!(rows(&lib, "review"), 0);
        let done = lib
            .review_many(&[a, b], "carol", Decision::Approve, Some("checked"), None)
            .unwrap();
        assert_eq!(done.len(), 2);
        assert!(done.iter().all(|r| r.meaning == "checked"));
    }

    #[test]
    fn a_spectrum_named_twice_gets_one_sign_off_or_none() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        let err = lib
            .review_many(&[id, id], "bob", Decision::Approve, None, None)
            .unwrap_err()
            .to_string();
        assert!(err.contains("more than once"), "{err}");
        assert_eq!(rows(&lib, "review"), 0);
    }

    #[test]
    fn a_pinned_revision_must_be_the_current_one() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        let patch = MetadataPatch {
            notes: Some("dried".into()),
            ..Default::default()
        };
        lib.revise(id, &patch, "alice", Some("notes")).unwrap();
        let err = lib
            .review_pinned(&[id], Some(1), "bob", Decision::Approve, None, None)
            .unwrap_err()
            .to_string();
        assert!(err.contains("at revision 2"), "{err}");
        assert_eq!(rows(&lib, "review"), 0);
        let done = lib
            .review_pinned(&[id], Some(2), "bob", Decision::Approve, None, None)
            .unwrap();
        assert_eq!(done[0].revision, 2);
    }

    #[test]
    fn a_withdrawn_spectrum_cannot_be_reviewed() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        lib.withdraw(id, "alice", "wrong sample").unwrap();
        let err = approve(&mut lib, id, "bob").unwrap_err().to_string();
        assert!(err.contains("withdrawn"), "{err}");
    }
}
