//! The library's own state beside its rows: the recipes, the generation counter, the content
//! sum behind the state hash, and the write transaction that keeps them in step.

use rusqlite::Connection;

use super::state_hash::{ContentSum, record_hash};
use super::{Library, Recipes};
use crate::error::Result;
use crate::prepare::Recipe;
use crate::spectrum::Status;

pub(super) fn load_recipes(conn: &Connection) -> Result<Recipes> {
    let mut stmt = conn.prepare("SELECT recipe FROM recipe")?;
    let rows = stmt.query_map([], |r| r.get::<_, String>(0))?;
    let mut out = Recipes::new();
    for row in rows {
        let recipe: Recipe = serde_json::from_str(&row?)?;
        out.insert(recipe.technique, recipe);
    }
    Ok(out)
}

/// Sets a setting, whether or not it was set before.
pub(super) fn put_setting(tx: &Connection, key: &str, value: &str) -> Result<()> {
    tx.execute(
        "INSERT INTO setting (key, value) VALUES (?1, ?2)
         ON CONFLICT (key) DO UPDATE SET value = excluded.value",
        [key, value],
    )?;
    Ok(())
}

pub(super) fn bump_generation(tx: &Connection) -> Result<i64> {
    tx.execute("UPDATE setting SET value = CAST(CAST(value AS INTEGER) + 1 AS TEXT) WHERE key = 'generation'", [])?;
    Ok(tx.query_row(
        "SELECT CAST(value AS INTEGER) FROM setting WHERE key = 'generation'",
        [],
        |r| r.get(0),
    )?)
}

pub(super) fn update_content_sum(tx: &Connection, f: impl FnOnce(&mut ContentSum)) -> Result<()> {
    let text: String = tx.query_row(
        "SELECT value FROM setting WHERE key = 'content_sum'",
        [],
        |r| r.get(0),
    )?;
    let mut sum = ContentSum::from_hex(&text).unwrap_or_default();
    f(&mut sum);
    tx.execute(
        "UPDATE setting SET value = ?1 WHERE key = 'content_sum'",
        [sum.to_hex()],
    )?;
    Ok(())
}

/// Moves a spectrum's contribution to the state hash from its old state to its new one.
pub(super) fn reweigh(
    tx: &Connection,
    technique: &str,
    raw_sha256: &str,
    old: Option<(Status, &str)>,
    new: Option<(Status, &str)>,
) -> Result<()> {
    update_content_sum(tx, |sum| {
        if let Some((status, meta)) = old.filter(|(s, _)| s.searchable()) {
            sum.remove(&record_hash(technique, status.name(), raw_sha256, meta));
        }
        if let Some((status, meta)) = new.filter(|(s, _)| s.searchable()) {
            sum.add(&record_hash(technique, status.name(), raw_sha256, meta));
        }
    })
}

impl Library {
    /// Runs `f` in one write transaction, bumps the generation, commits, and refreshes the
    /// text-index documents of the spectra `f` reports as touched.
    ///
    /// The generation counts the writes that may change what the derived stores are built
    /// from (spectra, their revisions and metadata, prepared forms, recipes, the content sum):
    /// the text index and every vector cache record the generation they reflect and are
    /// rebuilt when it moves. Every event records the generation its transaction leaves, so
    /// `check` finds a counter set to another number outside whorl. A write that touches none
    /// of that goes through [`Library::write_trail`] instead.
    pub(super) fn write<T>(
        &mut self,
        f: impl FnOnce(&Connection) -> Result<(T, Vec<i64>)>,
    ) -> Result<T> {
        let tx = self
            .conn
            .transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
        // Bumped first, so that the events `f` appends record the generation they make.
        let last_event = |tx: &Connection| -> Result<i64> {
            Ok(tx.query_row("SELECT coalesce(max(seq), 0) FROM event", [], |r| r.get(0))?)
        };
        let before = last_event(&tx)?;
        let mut generation = bump_generation(&tx)?;
        let (value, touched) = f(&tx)?;
        if touched.is_empty() && last_event(&tx)? == before {
            // Nothing recorded, nothing touched (a bundle whose spectra are all present): the
            // derived stores have nothing to catch up with, and the generation stays the
            // newest event's.
            tx.execute(
                "UPDATE setting SET value = CAST(CAST(value AS INTEGER) - 1 AS TEXT) WHERE key = 'generation'",
                [],
            )?;
            generation -= 1;
        }
        tx.commit()?;
        self.sync_text(&touched, generation)?;
        Ok(value)
    }

    /// Runs `f` in one write transaction that leaves the generation alone, for writes that
    /// touch only the audit trail and the account and token tables (a recorded check, an
    /// account or token change, a lock-out). No derived store reads those tables, so the text
    /// index and the vector caches stay current: a check recorded from the audit page does not
    /// make the next search rebuild its cache. The event chain still grows by one link; the
    /// state hash, which no such write can move (it sums spectra and recipes only), is left
    /// as it is. `f` must not write a spectrum, revision, prepared form, recipe or the content
    /// sum: those go through [`Library::write`].
    pub(super) fn write_trail<T>(&mut self, f: impl FnOnce(&Connection) -> Result<T>) -> Result<T> {
        let tx = self
            .conn
            .transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
        let value = f(&tx)?;
        tx.commit()?;
        Ok(value)
    }
}
