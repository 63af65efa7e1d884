//! Curation: revisions and withdrawal.

use rusqlite::{Connection, OptionalExtension, params};
use serde::{Deserialize, Serialize};

use super::events::append_event;
use super::records::SpectrumRecord;
use super::state::reweigh;
use super::store::{
    NewRevision, find_or_create_compound, insert_revision, set_status, update_prepared,
};
use super::{Library, now, prepare_raw};
use crate::error::{Error, Result};
use crate::prepare::Solvent;
use crate::spectrum::{Metadata, Status};
use crate::spectrum::{XUnit, YUnit};

/// Changes to metadata in a revision; `None` leaves a field as it is, an empty string clears it.
#[derive(Debug, Clone, Default)]
pub struct MetadataPatch {
    /// New name.
    pub name: Option<String>,
    /// New formula.
    pub formula: Option<String>,
    /// New CAS RN.
    pub cas: Option<String>,
    /// Replaces all synonyms.
    pub synonyms: Option<Vec<String>>,
    /// Replaces all tags.
    pub tags: Option<Vec<String>>,
    /// New NMR solvent (the spectrum is prepared again).
    pub solvent: Option<String>,
    /// New source.
    pub source: Option<String>,
    /// New instrument.
    pub instrument: Option<String>,
    /// New acquisition date.
    pub acquired: Option<String>,
    /// New notes.
    pub notes: Option<String>,
    /// Extra fields to set (`Some`) or remove (`None`).
    pub extra: Vec<(String, Option<String>)>,
}

impl MetadataPatch {
    /// Applies the patch to a copy of `m`.
    pub fn apply(&self, m: &Metadata) -> Metadata {
        let mut out = m.clone();
        let set = |slot: &mut Option<String>, v: &Option<String>| {
            if let Some(v) = v {
                *slot = Some(v.clone()).filter(|s| !s.trim().is_empty());
            }
        };
        if let Some(n) = &self.name {
            out.name = n.clone();
        }
        set(&mut out.formula, &self.formula);
        set(&mut out.cas, &self.cas);
        set(&mut out.solvent, &self.solvent);
        set(&mut out.source, &self.source);
        set(&mut out.instrument, &self.instrument);
        set(&mut out.acquired, &self.acquired);
        set(&mut out.notes, &self.notes);
        if let Some(s) = &self.synonyms {
            out.synonyms = s.clone();
        }
        if let Some(t) = &self.tags {
            out.tags = t.clone();
        }
        for (k, v) in &self.extra {
            match v {
                Some(v) if !v.trim().is_empty() => {
                    out.extra
                        .insert(crate::library::extra_key(k), v.trim().to_string());
                }
                _ => {
                    out.extra.remove(&crate::library::extra_key(k));
                }
            }
        }
        out
    }
}

impl Library {
    /// Adds a revision with changed metadata. The new revision replaces the old one in search
    /// and goes back to `pending`; the old one stays readable. Returns the new revision number.
    pub fn revise(
        &mut self,
        id: i64,
        patch: &MetadataPatch,
        actor: &str,
        reason: Option<&str>,
    ) -> Result<i64> {
        let rec = self.spectrum(id)?;
        if rec.status == Status::Withdrawn {
            return Err(Error::invalid(
                format!("spectrum {id} is withdrawn and kept as it was"),
                "add a new measurement with `whorl add` instead",
            ));
        }
        let metadata = super::normalise_metadata(rec.technique, patch.apply(&rec.metadata))?;
        if metadata == rec.metadata {
            return Err(Error::invalid(
                format!("the revision changes nothing in spectrum {id}"),
                "give at least one metadata option with a new value (see `whorl revise --help`)",
            ));
        }
        let recipe = self.recipe(rec.technique)?.clone();
        let reprepared = if metadata.solvent != rec.metadata.solvent {
            let solvent = metadata
                .solvent
                .as_deref()
                .map(str::parse::<Solvent>)
                .transpose()?;
            let x_unit: XUnit = rec.x_unit.parse()?;
            let y_unit: YUnit = rec.y_unit.parse()?;
            let label = std::path::PathBuf::from(format!("spectrum {id}"));
            Some(prepare_raw(
                &label,
                &recipe,
                &self.raw_points(id)?,
                x_unit,
                y_unit,
                solvent,
            )?)
        } else {
            None
        };
        let number = rec.revision + 1;
        let old_json = serde_json::to_string(&rec.metadata)?;
        let new_json = serde_json::to_string(&metadata)?;
        let reason = reason
            .map(str::trim)
            .filter(|r| !r.is_empty())
            .map(str::to_string);
        self.write(|tx| {
            correct_sole_compound(tx, id, &metadata)?;
            let (compound_id, _) = find_or_create_compound(tx, &metadata)?;
            insert_revision(
                tx,
                &NewRevision {
                    spectrum_id: id,
                    number,
                    metadata_json: &new_json,
                    created_at: &now(),
                    created_by: actor,
                    reason: reason.as_deref(),
                    compound_id: Some(compound_id),
                },
            )?;
            tx.execute(
                "UPDATE spectrum SET current_revision = ?2, status = 'pending', compound_id = ?3 WHERE id = ?1",
                params![id, number, compound_id],
            )?;
            if let Some(p) = &reprepared {
                // Prepared with the stored y unit, so the y unit written is the one stored.
                update_prepared(tx, id, p)?;
            }
            reweigh(tx, rec.technique.name(), &rec.raw_sha256, Some((rec.status, &old_json)), Some((Status::Pending, &new_json)))?;
            let payload = serde_json::json!({
                "spectrum": id, "revision": number, "replaces": rec.revision, "compound": compound_id,
                "metadata": metadata, "reason": reason,
            });
            append_event(tx, actor, "revise", &format!("spectrum:{id}"), &payload)?;
            Ok((number, vec![id]))
        })
    }

    /// Takes a spectrum out of search, keeping it and its history.
    pub fn withdraw(&mut self, id: i64, actor: &str, reason: &str) -> Result<()> {
        let rec = self.spectrum(id)?;
        let reason = reason.trim();
        if reason.is_empty() {
            return Err(Error::invalid(
                "a withdrawal needs a reason",
                "say why with --reason TEXT",
            ));
        }
        if rec.status == Status::Withdrawn {
            return Err(Error::invalid(
                format!("spectrum {id} is already withdrawn"),
                "see `whorl log` for when and why",
            ));
        }
        let meta = serde_json::to_string(&rec.metadata)?;
        self.write(|tx| {
            set_status(tx, id, Status::Withdrawn, Some(reason))?;
            reweigh(tx, rec.technique.name(), &rec.raw_sha256, Some((rec.status, &meta)), None)?;
            let payload = serde_json::json!({ "spectrum": id, "revision": rec.revision, "reason": reason, "previous_status": rec.status });
            append_event(tx, actor, "withdraw", &format!("spectrum:{id}"), &payload)?;
            Ok(((), vec![id]))
        })
    }

    /// Brings a withdrawn spectrum back: it returns to `pending` at its current revision, so
    /// the review policy applies to it again (its earlier sign-offs stay as history and grant
    /// nothing), and it counts in the state hash again. The withdrawal's reason is cleared
    /// from the spectrum and kept in the audit trail, beside the `reinstate` event with its
    /// own reason. Which role may reinstate is the face's business (the server's curators).
    pub fn reinstate(&mut self, id: i64, actor: &str, reason: &str) -> Result<()> {
        let rec = self.spectrum(id)?;
        let reason = reason.trim();
        if reason.is_empty() {
            return Err(Error::invalid(
                "a reinstatement needs a reason",
                "say why the spectrum comes back with --reason TEXT",
            ));
        }
        if rec.status != Status::Withdrawn {
            return Err(Error::invalid(
                format!(
                    "spectrum {id} is {}, not withdrawn: there is nothing to reinstate",
                    rec.status
                ),
                "only a withdrawn spectrum can be reinstated (see `whorl show ID`)",
            ));
        }
        let withdrawn_for = self.withdrawn_reason(id)?;
        let meta = serde_json::to_string(&rec.metadata)?;
        self.write(|tx| {
            // The event first: a trigger lets a spectrum leave withdrawal only when the newest
            // event is its reinstatement.
            let payload = serde_json::json!({
                "spectrum": id, "revision": rec.revision, "reason": reason,
                "withdrawn_for": withdrawn_for,
            });
            append_event(tx, actor, "reinstate", &format!("spectrum:{id}"), &payload)?;
            tx.execute(
                "UPDATE spectrum SET status = 'pending', withdrawn_reason = NULL WHERE id = ?1",
                [id],
            )?;
            reweigh(
                tx,
                rec.technique.name(),
                &rec.raw_sha256,
                None,
                Some((Status::Pending, &meta)),
            )?;
            Ok(((), vec![id]))
        })
    }

    /// A spectrum as it was at one revision: that revision's metadata, the current status.
    pub fn spectrum_at(&self, id: i64, number: i64) -> Result<(SpectrumRecord, RevisionInfo)> {
        let mut rec = self.spectrum(id)?;
        let row = self
            .conn
            .query_row(
                "SELECT metadata, created_at, created_by, reason, compound_id FROM revision WHERE spectrum_id = ?1 AND number = ?2",
                params![id, number],
                |r| {
                    let info = RevisionInfo { number, created_at: r.get(1)?, created_by: r.get(2)?, reason: r.get(3)? };
                    Ok((r.get::<_, String>(0)?, info, r.get::<_, Option<i64>>(4)?))
                },
            )
            .optional()?;
        let (meta, info, compound_id) = row.ok_or_else(|| {
            Error::invalid(
                format!(
                    "spectrum {id} has no revision {number} (revisions 1..{})",
                    rec.revision
                ),
                "see `whorl log ID` for its revisions",
            )
        })?;
        // An earlier revision names the compound it named when written; the current one, the
        // compound the spectrum belongs to now (a compound merge moves it, not its revisions).
        if number != rec.revision
            && let Some(c) = compound_id
        {
            rec.compound_id = c;
        }
        rec.metadata = serde_json::from_str(&meta)?;
        rec.revision = number;
        Ok((rec, info))
    }

    /// The reason a spectrum was withdrawn, if it was.
    pub fn withdrawn_reason(&self, id: i64) -> Result<Option<String>> {
        Ok(self
            .conn
            .query_row(
                "SELECT withdrawn_reason FROM spectrum WHERE id = ?1",
                [id],
                |r| r.get(0),
            )
            .optional()?
            .flatten())
    }
}

/// One withdrawal or reinstatement of a spectrum, as its history travels in bundles.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StatusChange {
    /// `withdraw` or `reinstate`.
    pub action: String,
    /// When (UTC), in the library where it happened.
    pub at: String,
    /// Who.
    pub by: String,
    /// Why.
    pub reason: String,
    /// The library it happened in, as an imported sign-off names it (absent: this library).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub library: Option<String>,
}

impl Library {
    /// A spectrum's withdrawals and reinstatements, oldest first: those that came with it from
    /// another library (kept in its `import` event), then this library's own events.
    pub fn status_history(&self, id: i64) -> Result<Vec<StatusChange>> {
        let mut out = Vec::new();
        for e in self.events(Some(&format!("spectrum:{id}")))? {
            match e.action.as_str() {
                "import" => {
                    if let Some(h) = e.payload.get("status_history") {
                        out.extend(serde_json::from_value::<Vec<StatusChange>>(h.clone())?);
                    }
                }
                "withdraw" | "reinstate" => out.push(StatusChange {
                    reason: e.payload["reason"].as_str().unwrap_or_default().to_string(),
                    action: e.action,
                    at: e.at,
                    by: e.actor,
                    library: None,
                }),
                _ => {}
            }
        }
        Ok(out)
    }
}

/// Who made a revision, when and why.
#[derive(Debug, Clone, Serialize)]
pub struct RevisionInfo {
    /// Revision number.
    pub number: i64,
    /// When.
    pub created_at: String,
    /// Who.
    pub created_by: String,
    /// Why (absent for the first revision).
    pub reason: Option<String>,
}

/// A revision that corrects the formula of a compound only this spectrum belongs to corrects
/// the compound too; a compound shared with other spectra keeps its formula (and the revision
/// is refused by `find_or_create_compound`, naming the conflict).
fn correct_sole_compound(tx: &Connection, id: i64, metadata: &Metadata) -> Result<()> {
    let Some(formula) = &metadata.formula else {
        return Ok(());
    };
    let key = super::store::compound_key(metadata);
    let sharing: Option<(i64, i64)> = tx
        .query_row(
            "SELECT c.id, (SELECT count(*) FROM spectrum s WHERE s.compound_id = c.id AND s.id != ?2)
             FROM compound c WHERE c.key = ?1",
            params![key, id],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .optional()?;
    if let Some((compound, 0)) = sharing
        && super::store::merged_target(tx, compound)? == compound
    {
        tx.execute(
            "UPDATE compound SET formula = ?2 WHERE id = ?1",
            params![compound, formula],
        )?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::testing::{add, ir, rows, submitted};
    use crate::library::{Decision, prepare_stored};
    use crate::technique::Technique;

    fn notes(text: &str) -> MetadataPatch {
        MetadataPatch {
            notes: Some(text.into()),
            ..Default::default()
        }
    }

    #[test]
    fn a_revision_adds_a_row_and_goes_back_to_pending() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        lib.review(id, "bob", Decision::Approve, None, None)
            .unwrap();
        let before = lib.state_hash().unwrap();
        let number = lib
            .revise(id, &notes("from the 2023 lot"), "alice", Some("lot noted"))
            .unwrap();
        assert_eq!(number, 2);
        let rec = lib.spectrum(id).unwrap();
        assert_eq!((rec.revision, rec.status), (2, Status::Pending));
        assert_eq!(rec.metadata.notes.as_deref(), Some("from the 2023 lot"));
        assert_eq!(rows(&lib, "revision"), 2);
        // The old revision stays readable as it was, with its sign-off.
        let (old, _) = lib.spectrum_at(id, 1).unwrap();
        assert_eq!(old.metadata.notes, None);
        let (_, info) = lib.spectrum_at(id, 2).unwrap();
        assert_eq!(
            (info.created_by.as_str(), info.reason.as_deref()),
            ("alice", Some("lot noted"))
        );
        assert_eq!(lib.reviews(id).unwrap()[0].revision, 1);
        assert!(lib.spectrum_at(id, 3).is_err());
        let event = lib.events(Some("spectrum:1")).unwrap().pop().unwrap();
        assert_eq!(event.action, "revise");
        assert_eq!(
            (
                event.payload["revision"].as_i64(),
                event.payload["replaces"].as_i64()
            ),
            (Some(2), Some(1))
        );
        assert_ne!(lib.state_hash().unwrap(), before);
        // A revision that changes nothing is refused.
        let err = lib
            .revise(id, &notes("from the 2023 lot"), "alice", None)
            .unwrap_err();
        assert!(err.to_string().contains("changes nothing"), "{err}");
    }

    #[test]
    fn a_new_solvent_prepares_the_spectrum_again() {
        let mut lib = Library::in_memory("t").unwrap();
        // A 1H profile with a line at the CDCl3 residual (7.26 ppm) and one at the DMSO-d6
        // residual (2.50 ppm) (Gottlieb et al., J. Org. Chem. 1997), and one of the compound.
        let line = |x: f64, at: f64| 1.0 / (1.0 + ((x - at) / 0.01).powi(2));
        let points: Vec<(f64, f64)> = (0..2600)
            .map(|i| 12.0 - 0.005 * f64::from(i))
            .map(|x| (x, line(x, 7.26) + line(x, 2.5) + 3.0 * line(x, 1.2)))
            .collect();
        let mut s = submitted(Technique::Nmr1h, points, "sample", "alice");
        s.submission.metadata.solvent = Some("CDCl3".into());
        // Staged as the import would have prepared it: with its solvent.
        s.prepared = prepare_stored(
            0,
            lib.recipe(Technique::Nmr1h).unwrap(),
            &s.raw.canonical_bytes(),
            s.raw.x_unit.name(),
            s.raw.y_unit.name(),
            Some("CDCl3"),
        )
        .unwrap();
        let id = add(&mut lib, &s);
        let before = lib.prepared(id).unwrap();
        let patch = MetadataPatch {
            solvent: Some("DMSO-d6".into()),
            ..Default::default()
        };
        lib.revise(id, &patch, "alice", None).unwrap();
        let after = lib.prepared(id).unwrap();
        let expected = prepare_stored(
            id,
            lib.recipe(Technique::Nmr1h).unwrap(),
            &s.raw.canonical_bytes(),
            s.raw.x_unit.name(),
            s.raw.y_unit.name(),
            Some("DMSO-d6"),
        )
        .unwrap();
        assert_ne!(after.vector, before.vector);
        assert_eq!(after.vector, expected.vector);
        assert_eq!(after.y_unit, before.y_unit);
        // `check` prepares every spectrum again and compares vector and peaks as stored.
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
    }

    #[test]
    fn a_withdrawn_spectrum_leaves_search_and_the_state_hash() {
        let mut lib = Library::in_memory("t").unwrap();
        add(&mut lib, &ir(1, "acetone", "alice"));
        let without = lib.state_hash().unwrap();
        let id = add(&mut lib, &ir(2, "butanone", "alice"));
        assert_ne!(lib.state_hash().unwrap(), without);
        let err = lib.withdraw(id, "alice", "  ").unwrap_err();
        assert!(err.to_string().contains("needs a reason"), "{err}");
        lib.withdraw(id, "alice", " wrong sample ").unwrap();
        let rec = lib.spectrum(id).unwrap();
        assert_eq!(rec.status, Status::Withdrawn);
        assert_eq!(
            lib.withdrawn_reason(id).unwrap().as_deref(),
            Some("wrong sample")
        );
        let searchable = lib
            .candidates(Technique::Ir, &[Status::Pending, Status::Verified])
            .unwrap();
        assert!(searchable.iter().all(|c| c.spectrum_id != id));
        assert_eq!(searchable.len(), 1);
        // The state hash is that of the library without it.
        assert_eq!(lib.state_hash().unwrap(), without);
        let event = lib.events(Some("spectrum:2")).unwrap().pop().unwrap();
        assert_eq!(event.action, "withdraw");
        assert_eq!(event.payload["previous_status"], "pending");
        assert_eq!(event.payload["reason"], "wrong sample");
        // Kept as it was: neither withdrawn again nor revised.
        assert!(lib.withdraw(id, "alice", "again").is_err());
        assert!(lib.revise(id, &notes("x"), "alice", None).is_err());
    }

    #[test]
    fn a_reinstated_spectrum_is_pending_again_and_needs_a_new_sign_off() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        lib.review(id, "bob", Decision::Approve, None, None)
            .unwrap();
        let verified = lib.state_hash().unwrap();
        // Only a withdrawn spectrum, and only with a reason.
        let err = lib.reinstate(id, "carol", "back").unwrap_err();
        assert!(err.to_string().contains("not withdrawn"), "{err}");
        lib.withdraw(id, "carol", "suspected mix-up").unwrap();
        let withdrawn = lib.state_hash().unwrap();
        let err = lib.reinstate(id, "carol", " ").unwrap_err();
        assert!(err.to_string().contains("needs a reason"), "{err}");
        lib.reinstate(id, "carol", " lot confirmed by the supplier ")
            .unwrap();
        let rec = lib.spectrum(id).unwrap();
        assert_eq!((rec.status, rec.revision), (Status::Pending, 1));
        assert_eq!(lib.withdrawn_reason(id).unwrap(), None);
        // Searchable again, pending: in the state hash, but not as the verified spectrum was.
        let fp = lib.state_hash().unwrap();
        assert!(fp != withdrawn && fp != verified);
        let event = lib.events(Some("spectrum:1")).unwrap().pop().unwrap();
        assert_eq!(event.action, "reinstate");
        assert_eq!(event.payload["reason"], "lot confirmed by the supplier");
        assert_eq!(event.payload["withdrawn_for"], "suspected mix-up");
        // The old approval grants nothing: a new sign-off makes it verified again, under the
        // policy (the submitter still may not sign off).
        assert!(
            lib.review(id, "alice", Decision::Approve, None, None)
                .is_err()
        );
        lib.review(id, "bob", Decision::Approve, None, None)
            .unwrap();
        assert_eq!(lib.spectrum(id).unwrap().status, Status::Verified);
        assert_eq!(lib.state_hash().unwrap(), verified);
        // It can be withdrawn again, for a new reason, and `check` replays all of it.
        lib.withdraw(id, "carol", "second thoughts").unwrap();
        assert_eq!(
            lib.withdrawn_reason(id).unwrap().as_deref(),
            Some("second thoughts")
        );
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
    }

    #[test]
    fn only_a_reinstate_event_takes_a_spectrum_out_of_withdrawal() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        lib.withdraw(id, "carol", "suspected mix-up").unwrap();
        // Written behind whorl's back, the triggers refuse it.
        for sql in [
            "UPDATE spectrum SET status = 'pending', withdrawn_reason = NULL WHERE id = 1",
            "UPDATE spectrum SET status = 'verified' WHERE id = 1",
            "UPDATE spectrum SET withdrawn_reason = NULL WHERE id = 1",
            "UPDATE spectrum SET withdrawn_reason = 'other' WHERE id = 1",
        ] {
            let err = lib.conn.execute(sql, []).unwrap_err();
            assert!(
                err.to_string().contains("kept as recorded")
                    || err.to_string().contains("reinstate"),
                "{sql}: {err}"
            );
        }
        // With the triggers dropped, `check` still finds a reinstatement no event records.
        lib.conn
            .execute_batch(
                "DROP TRIGGER spectrum_reinstatement_is_audited;
                 DROP TRIGGER spectrum_withdrawal_reason_is_fixed;
                 UPDATE spectrum SET status = 'pending', withdrawn_reason = NULL WHERE id = 1;",
            )
            .unwrap();
        let found = lib.check(&|_, _| {}).unwrap().findings;
        assert!(
            found.iter().any(|f| f
                .problem
                .contains("status is pending but its events say withdrawn")),
            "{found:?}"
        );
    }

    #[test]
    fn check_finds_a_withdrawal_reason_left_after_a_reinstatement() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        lib.withdraw(id, "carol", "suspected mix-up").unwrap();
        lib.reinstate(id, "carol", "confirmed").unwrap();
        lib.conn
            .execute_batch(
                "DROP TRIGGER spectrum_withdrawal_reason_is_fixed;
                 UPDATE spectrum SET withdrawn_reason = 'forged' WHERE id = 1;",
            )
            .unwrap();
        let found = lib.check(&|_, _| {}).unwrap().findings;
        assert!(
            found.iter().any(|f| f.problem.contains("reinstated it")),
            "{found:?}"
        );
    }
}
