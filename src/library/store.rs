//! Storing staged spectra: one transaction per batch, a savepoint per spectrum, and the rows,
//! compound and audit event of each new spectrum.

use rusqlite::{Connection, OptionalExtension, params};
use serde::Serialize;

use super::events::append_event;
use super::records::f32_bytes;
use super::state::{bump_generation, reweigh};
use super::{Library, Staged, now};
use crate::error::{Error, Result};
use crate::prepare::Prepared;
use crate::spectrum::{Metadata, Status};

/// What storing one staged spectrum did.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(tag = "outcome", rename_all = "snake_case")]
pub enum Outcome {
    /// A new spectrum.
    Added {
        /// Its id.
        spectrum_id: i64,
        /// Its compound.
        compound_id: i64,
    },
    /// The same raw points were already in the library for this technique.
    AlreadyPresent {
        /// The id already holding them.
        spectrum_id: i64,
    },
}

impl Library {
    /// Stores staged spectra in one transaction. Each entry of the result says what happened
    /// to the staged spectrum at the same position, or why it was refused (for example a
    /// formula that contradicts the compound already on record). With `all_or_nothing`, one
    /// refusal rolls the whole batch back. Already-present spectra are not refusals.
    pub fn store(
        &mut self,
        batch: &[Staged],
        actor: &str,
        all_or_nothing: bool,
    ) -> Result<Vec<Result<Outcome>>> {
        let mut tx = self
            .conn
            .transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
        let mut outcomes = Vec::with_capacity(batch.len());
        let mut added = Vec::new();
        for staged in batch {
            // A savepoint per spectrum: a refusal halfway through one leaves nothing of it behind.
            let sp = tx.savepoint()?;
            let outcome = store_one(&sp, staged, actor);
            if outcome.is_ok() {
                sp.commit()?;
            }
            if let Ok(Outcome::Added { spectrum_id, .. }) = outcome {
                added.push(spectrum_id);
            }
            outcomes.push(outcome);
        }
        let refused = outcomes.iter().any(|o| o.is_err());
        if added.is_empty() || (all_or_nothing && refused) {
            drop(tx); // rolls back
            return Ok(outcomes);
        }
        let generation = bump_generation(&tx)?;
        tx.commit()?;
        self.sync_text(&added, generation)?;
        Ok(outcomes)
    }
}

/// The identity key of a compound: its CAS RN when known, else its lower-cased name.
pub(super) fn compound_key(m: &Metadata) -> String {
    match &m.cas {
        Some(cas) => format!("cas:{cas}"),
        None => format!("name:{}", m.name.to_lowercase()),
    }
}

fn store_one(tx: &Connection, staged: &Staged, actor: &str) -> Result<Outcome> {
    let sub = &staged.submission;
    let technique = sub.technique.name();
    let raw_sha256 = staged.raw.raw_sha256();
    if let Some(spectrum_id) = present_by_raw(tx, technique, &raw_sha256)? {
        return Ok(Outcome::AlreadyPresent { spectrum_id });
    }
    let m = &sub.metadata;
    let compound_id = find_or_create_compound(tx, m)?;
    let file_name = sub
        .path
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let created_at = now();
    tx.execute(
        "INSERT INTO spectrum (compound_id, technique, status, current_revision, file_name, file_sha256, raw_sha256, raw,
                               x_unit, y_unit, submitted_by, created_at)
         VALUES (?1, ?2, 'pending', 1, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)",
        params![
            compound_id,
            technique,
            file_name,
            staged.raw.file_sha256,
            raw_sha256,
            staged.raw.canonical_bytes(),
            staged.raw.x_unit.name(),
            staged.raw.y_unit.name(),
            sub.submitted_by,
            created_at,
        ],
    )?;
    let spectrum_id = tx.last_insert_rowid();
    let metadata_json = serde_json::to_string(m)?;
    tx.execute(
        "INSERT INTO revision (spectrum_id, number, metadata, created_at, created_by, reason, compound_id)
         VALUES (?1, 1, ?2, ?3, ?4, NULL, ?5)",
        params![spectrum_id, metadata_json, created_at, sub.submitted_by, compound_id],
    )?;
    insert_prepared(tx, spectrum_id, &staged.prepared)?;
    reweigh(
        tx,
        technique,
        &raw_sha256,
        None,
        Some((Status::Pending, &metadata_json)),
    )?;
    let payload = serde_json::json!({
        "spectrum": spectrum_id,
        "compound": compound_id,
        "technique": technique,
        "file": file_name,
        "file_sha256": staged.raw.file_sha256,
        "raw_sha256": raw_sha256,
        "submitted_by": sub.submitted_by,
        "metadata": m,
    });
    append_event(
        tx,
        actor,
        "add",
        &format!("spectrum:{spectrum_id}"),
        &payload,
    )?;
    Ok(Outcome::Added {
        spectrum_id,
        compound_id,
    })
}

/// The compound a metadata record names: found by its identity key, or created. Refuses a
/// formula that contradicts the compound already on record.
pub(super) fn find_or_create_compound(tx: &Connection, m: &Metadata) -> Result<i64> {
    let key = compound_key(m);
    let found: Option<(i64, Option<String>)> = tx
        .query_row(
            "SELECT id, formula FROM compound WHERE key = ?1",
            [&key],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .optional()?;
    match found {
        Some((id, Some(formula))) if m.formula.as_ref().is_some_and(|f| f != &formula) => {
            Err(Error::invalid(
                format!(
                    "compound {id} ('{}') is on record with formula {formula}, but this spectrum says {}",
                    m.name,
                    m.formula.as_deref().unwrap_or("")
                ),
                "correct the formula, or give the CAS RN if this is a different substance",
            ))
        }
        Some((id, _)) => Ok(id),
        None => {
            tx.execute(
                "INSERT INTO compound (key, name, formula, cas, created_at) VALUES (?1, ?2, ?3, ?4, ?5)",
                params![key, m.name, m.formula, m.cas, now()],
            )?;
            Ok(tx.last_insert_rowid())
        }
    }
}

/// The spectrum holding exactly these raw points for this technique, if any: the identity
/// that makes imports idempotent.
pub(super) fn present_by_raw(
    tx: &Connection,
    technique: &str,
    raw_sha256: &str,
) -> Result<Option<i64>> {
    Ok(tx
        .query_row(
            "SELECT id FROM spectrum WHERE technique = ?1 AND raw_sha256 = ?2",
            params![technique, raw_sha256],
            |r| r.get(0),
        )
        .optional()?)
}

/// Stores the prepared form of a new spectrum.
pub(super) fn insert_prepared(tx: &Connection, spectrum_id: i64, p: &Prepared) -> Result<()> {
    tx.execute(
        "INSERT INTO prepared (spectrum_id, vector, peaks, y_unit, warnings) VALUES (?1, ?2, ?3, ?4, ?5)",
        params![
            spectrum_id,
            f32_bytes(&p.vector),
            serde_json::to_string(&p.peaks)?,
            p.y_unit.name(),
            serde_json::to_string(&p.warnings)?
        ],
    )?;
    Ok(())
}
