//! Curation: review sign-off, revisions, withdrawal.

use rusqlite::{Connection, OptionalExtension, params};
use serde::{Deserialize, Serialize};

use super::events::append_event;
use super::records::{SpectrumRecord, f32_bytes};
use super::state::reweigh;
use super::store::find_or_create_compound;
use super::{Library, now, prepare_raw};
use crate::error::{Error, Result};
use crate::prepare::Solvent;
use crate::spectrum::{Metadata, Status};
use crate::spectrum::{XUnit, YUnit};

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

/// One sign-off.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Review {
    /// Row id.
    pub id: i64,
    /// The spectrum.
    pub spectrum_id: i64,
    /// The revision reviewed.
    pub revision: i64,
    /// Who signed.
    pub reviewer: String,
    /// When (UTC).
    pub at: String,
    /// "approved" or "rejected".
    pub decision: String,
    /// What the signature means.
    pub meaning: String,
    /// The reviewer's note.
    pub note: Option<String>,
    /// Set when the sign-off came in with a bundle: where from.
    pub imported_from: Option<String>,
}

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

fn same_person(a: &str, b: &str) -> bool {
    a.trim().eq_ignore_ascii_case(b.trim())
}

impl Library {
    /// Whether the library lets a submitter review their own spectra (off by default).
    pub fn allow_self_review(&self) -> Result<bool> {
        Ok(self.setting("allow_self_review")?.as_deref() == Some("true"))
    }

    /// Sets the self-review policy, recording who changed it.
    pub fn set_self_review(&mut self, allow: bool, actor: &str) -> Result<()> {
        self.write(|tx| {
            tx.execute(
                "INSERT INTO setting (key, value) VALUES ('allow_self_review', ?1)
                 ON CONFLICT (key) DO UPDATE SET value = excluded.value",
                [allow.to_string()],
            )?;
            append_event(
                tx,
                actor,
                "policy",
                "library",
                &serde_json::json!({ "allow_self_review": allow }),
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
        let allow_self = self.allow_self_review()?;
        let mut checked = Vec::with_capacity(ids.len());
        for &id in ids {
            let rec = self.reviewable(id, reviewer, allow_self)?;
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
                tx.execute(
                    "INSERT INTO review (spectrum_id, revision, reviewer, at, decision, meaning, note)
                     VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
                    params![id, rec.revision, reviewer, at, decision.name(), meaning, note],
                )?;
                let review_id = tx.last_insert_rowid();
                if decision == Decision::Approve {
                    tx.execute("UPDATE spectrum SET status = 'verified' WHERE id = ?1", [id])?;
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
                    "meaning": meaning, "note": note, "reviewer": reviewer,
                });
                append_event(tx, reviewer, "review", &format!("spectrum:{id}"), &payload)?;
                reviews.push(Review {
                    id: review_id,
                    spectrum_id: id,
                    revision: rec.revision,
                    reviewer: reviewer.to_string(),
                    at: at.clone(),
                    decision: decision.name().to_string(),
                    meaning: meaning.clone(),
                    note: note.clone(),
                    imported_from: None,
                });
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
        if let Some(r) = self
            .reviews(id)?
            .into_iter()
            .rev()
            .find(|r| r.revision == rec.revision && r.decision == "rejected")
        {
            return Err(Error::invalid(
                format!(
                    "revision {} of spectrum {id} was rejected by {} at {}",
                    rec.revision, r.reviewer, r.at
                ),
                "correct it with `whorl revise` (the new revision is reviewed in turn) or `whorl withdraw` it",
            ));
        }
        if !allow_self
            && (same_person(reviewer, &rec.submitted_by) || same_person(reviewer, &revision_author))
        {
            return Err(Error::invalid(
                format!(
                    "{reviewer} submitted spectrum {id}{}; the reviewer must be someone else",
                    if same_person(reviewer, &rec.submitted_by) {
                        ""
                    } else {
                        "'s current revision"
                    }
                ),
                "ask a second analyst to review it (--by WHO); self-review is off by library policy",
            ));
        }
        Ok(rec)
    }

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
            let x_unit: XUnit = parse_unit(&rec.x_unit)?;
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
            let compound_id = find_or_create_compound(tx, &metadata)?;
            tx.execute(
                "INSERT INTO revision (spectrum_id, number, metadata, created_at, created_by, reason, compound_id)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
                params![id, number, new_json, now(), actor, reason, compound_id],
            )?;
            tx.execute(
                "UPDATE spectrum SET current_revision = ?2, status = 'pending', compound_id = ?3 WHERE id = ?1",
                params![id, number, compound_id],
            )?;
            if let Some(p) = &reprepared {
                tx.execute(
                    "UPDATE prepared SET vector = ?2, peaks = ?3, warnings = ?4 WHERE spectrum_id = ?1",
                    params![id, f32_bytes(&p.vector), serde_json::to_string(&p.peaks)?, serde_json::to_string(&p.warnings)?],
                )?;
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
            tx.execute("UPDATE spectrum SET status = 'withdrawn', withdrawn_reason = ?2 WHERE id = ?1", params![id, reason])?;
            reweigh(tx, rec.technique.name(), &rec.raw_sha256, Some((rec.status, &meta)), None)?;
            let payload = serde_json::json!({ "spectrum": id, "revision": rec.revision, "reason": reason, "previous_status": rec.status });
            append_event(tx, actor, "withdraw", &format!("spectrum:{id}"), &payload)?;
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
        rec.metadata = serde_json::from_str(&meta)?;
        rec.revision = number;
        if let Some(c) = compound_id {
            rec.compound_id = c;
        }
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
    if let Some((compound, 0)) = sharing {
        tx.execute(
            "UPDATE compound SET formula = ?2 WHERE id = ?1",
            params![compound, formula],
        )?;
    }
    Ok(())
}

/// Parses a stored x unit name.
pub(super) fn parse_unit(name: &str) -> Result<XUnit> {
    name.parse()
}
