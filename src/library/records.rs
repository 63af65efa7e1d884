//! Rows of the library: metadata, spectra, events, and the queries and writes over them.

use std::collections::{BTreeMap, HashMap};

use rusqlite::{Connection, OptionalExtension, params};
use serde::{Deserialize, Serialize};

use super::fingerprint::ContentSum;
use super::{Library, Recipes, Staged, now};
use crate::error::{Error, Result};
use crate::prepare::{Peak, Prepared, Recipe};
use crate::spectrum::{Metadata, Status, sha256_hex};
use crate::technique::Technique;
use crate::text::IndexDoc;

/// Everything stored about one spectrum at its current revision.
#[derive(Debug, Clone, Serialize)]
pub struct SpectrumRecord {
    /// Spectrum id.
    pub id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Technique.
    pub technique: Technique,
    /// Review status.
    pub status: Status,
    /// Current revision number.
    pub revision: i64,
    /// File name as imported.
    pub file_name: String,
    /// SHA-256 of the original file bytes.
    pub file_sha256: String,
    /// SHA-256 of the canonical raw points.
    pub raw_sha256: String,
    /// x unit of the raw points.
    pub x_unit: String,
    /// y unit of the raw points (declared or detected).
    pub y_unit: String,
    /// Number of raw points.
    pub points: usize,
    /// Who submitted it.
    pub submitted_by: String,
    /// When it was imported.
    pub created_at: String,
    /// Metadata of the current revision.
    pub metadata: Metadata,
}

impl SpectrumRecord {
    /// The text-index document for this record.
    pub fn index_doc(&self) -> IndexDoc<'_> {
        IndexDoc {
            spectrum_id: self.id,
            compound_id: self.compound_id,
            technique: self.technique.name(),
            status: self.status.name(),
            submitted_by: &self.submitted_by,
            metadata: &self.metadata,
        }
    }
}

/// One line of `list`.
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    /// Spectrum id.
    pub id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Technique.
    pub technique: Technique,
    /// Status.
    pub status: Status,
    /// Current revision.
    pub revision: i64,
    /// Compound name.
    pub name: String,
    /// Formula.
    pub formula: Option<String>,
    /// CAS RN.
    pub cas: Option<String>,
}

/// What a hit list shows of a spectrum: its ids, technique, status and current metadata.
#[derive(Debug, Clone)]
pub struct HitRecord {
    /// Spectrum id.
    pub id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Technique.
    pub technique: Technique,
    /// Review status.
    pub status: Status,
    /// Metadata of the current revision.
    pub metadata: Metadata,
}

/// Counts for `stats`.
#[derive(Debug, Clone, Serialize)]
pub struct Stats {
    /// Compounds.
    pub compounds: i64,
    /// Spectra per technique and status.
    pub spectra: BTreeMap<String, BTreeMap<String, i64>>,
    /// Events in the audit trail.
    pub events: i64,
    /// Recipes per technique.
    pub recipes: Vec<Recipe>,
    /// The library fingerprint.
    pub fingerprint: String,
    /// Schema version.
    pub schema_version: i64,
}

/// A library spectrum as search needs it.
#[derive(Debug, Clone)]
pub struct Candidate {
    /// Spectrum id.
    pub spectrum_id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Status.
    pub status: Status,
    /// Prepared form.
    pub prepared: Prepared,
}

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

/// One row of the audit trail.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Event {
    /// Sequence number.
    pub seq: i64,
    /// UTC time.
    pub at: String,
    /// Who.
    pub actor: String,
    /// What.
    pub action: String,
    /// Which record.
    pub record: String,
    /// The payload (JSON).
    pub payload: serde_json::Value,
    /// SHA-256 of the payload text.
    pub payload_hash: String,
    /// The previous event's hash.
    pub prev_hash: String,
    /// This event's hash.
    pub hash: String,
}

/// The hash that starts the chain.
pub const GENESIS_HASH: &str = "0000000000000000000000000000000000000000000000000000000000000000";

/// The hash of one event: SHA-256 over a JSON array of its fields, which makes the encoding
/// unambiguous whatever the fields contain.
pub fn event_hash(
    seq: i64,
    at: &str,
    actor: &str,
    action: &str,
    record: &str,
    payload_hash: &str,
    prev_hash: &str,
) -> String {
    sha256_hex(
        serde_json::json!([seq, at, actor, action, record, payload_hash, prev_hash])
            .to_string()
            .as_bytes(),
    )
}

/// Appends one event to the chain inside the caller's transaction.
pub fn append_event(
    tx: &Connection,
    actor: &str,
    action: &str,
    record: &str,
    payload: &serde_json::Value,
) -> Result<i64> {
    let (last_seq, prev_hash): (i64, String) = tx
        .query_row(
            "SELECT seq, hash FROM event ORDER BY seq DESC LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .optional()?
        .unwrap_or((0, GENESIS_HASH.to_string()));
    let seq = last_seq + 1;
    let at = now();
    let payload_text = payload.to_string();
    let payload_hash = sha256_hex(payload_text.as_bytes());
    let hash = event_hash(seq, &at, actor, action, record, &payload_hash, &prev_hash);
    tx.execute(
        "INSERT INTO event (seq, at, actor, action, record, payload, payload_hash, prev_hash, hash)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
        params![
            seq,
            at,
            actor,
            action,
            record,
            payload_text,
            payload_hash,
            prev_hash,
            hash
        ],
    )?;
    // The head of the chain is kept beside it, so that deleting the newest events is found too.
    tx.execute(
        "INSERT INTO setting (key, value) VALUES ('event_head', ?1)
         ON CONFLICT (key) DO UPDATE SET value = excluded.value",
        [format!("{seq}:{hash}")],
    )?;
    Ok(seq)
}

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

/// The identity key of a compound: its CAS RN when known, else its lower-cased name.
pub(super) fn compound_key(m: &Metadata) -> String {
    match &m.cas {
        Some(cas) => format!("cas:{cas}"),
        None => format!("name:{}", m.name.to_lowercase()),
    }
}

pub(super) fn f32_bytes(v: &[f32]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

pub(super) fn f32_from_bytes(b: &[u8]) -> Vec<f32> {
    b.chunks_exact(4)
        .map(|c| f32::from_le_bytes([c[0], c[1], c[2], c[3]]))
        .collect()
}

const RECORD_COLUMNS: &str = "s.id, s.compound_id, s.technique, s.status, s.current_revision, s.file_name, s.file_sha256,
     s.raw_sha256, s.x_unit, s.y_unit, length(s.raw) / 16, s.submitted_by, s.created_at, r.metadata";

fn record_from_row(row: &rusqlite::Row<'_>) -> rusqlite::Result<(SpectrumRecord, String)> {
    let technique: String = row.get(2)?;
    let status: String = row.get(3)?;
    let metadata: String = row.get(13)?;
    let conv = |e: Error| {
        rusqlite::Error::FromSqlConversionFailure(0, rusqlite::types::Type::Text, Box::new(e))
    };
    Ok((
        SpectrumRecord {
            id: row.get(0)?,
            compound_id: row.get(1)?,
            technique: technique.parse().map_err(conv)?,
            status: status.parse().map_err(conv)?,
            revision: row.get(4)?,
            file_name: row.get(5)?,
            file_sha256: row.get(6)?,
            raw_sha256: row.get(7)?,
            x_unit: row.get(8)?,
            y_unit: row.get(9)?,
            points: row.get::<_, i64>(10)? as usize,
            submitted_by: row.get(11)?,
            created_at: row.get(12)?,
            metadata: Metadata::default(),
        },
        metadata,
    ))
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

    /// The current record of one spectrum.
    pub fn spectrum(&self, id: i64) -> Result<SpectrumRecord> {
        self.records(&[id])?.pop().ok_or(Error::NotFound {
            kind: "spectrum",
            id,
        })
    }

    /// Current records of the given spectra, in the order asked; unknown ids are left out.
    pub fn records(&self, ids: &[i64]) -> Result<Vec<SpectrumRecord>> {
        let sql = format!(
            "SELECT {RECORD_COLUMNS} FROM spectrum s JOIN revision r ON r.spectrum_id = s.id AND r.number = s.current_revision
             WHERE s.id = ?1"
        );
        let mut stmt = self.conn.prepare_cached(&sql)?;
        let mut out = Vec::with_capacity(ids.len());
        for &id in ids {
            if let Some((mut rec, meta)) = stmt.query_row([id], record_from_row).optional()? {
                rec.metadata = serde_json::from_str(&meta)?;
                out.push(rec);
            }
        }
        Ok(out)
    }

    /// What hit lists show of these spectra, in the order asked (unknown ids left out). Only
    /// columns of `spectrum` before the raw-points blob are read, so a lookup reads the row's
    /// page and not the blob's overflow pages, which matters when the database is larger
    /// than the operating system keeps cached.
    pub fn hit_records(&self, ids: &[i64]) -> Result<Vec<HitRecord>> {
        let mut stmt = self.conn.prepare_cached(
            "SELECT s.id, s.compound_id, s.technique, s.status, r.metadata
             FROM spectrum s JOIN revision r ON r.spectrum_id = s.id AND r.number = s.current_revision
             WHERE s.id = ?1",
        )?;
        let mut out = Vec::with_capacity(ids.len());
        for &id in ids {
            let row = stmt
                .query_row([id], |r| {
                    Ok((
                        r.get::<_, i64>(0)?,
                        r.get::<_, i64>(1)?,
                        r.get::<_, String>(2)?,
                        r.get::<_, String>(3)?,
                        r.get::<_, String>(4)?,
                    ))
                })
                .optional()?;
            if let Some((id, compound_id, technique, status, metadata)) = row {
                out.push(HitRecord {
                    id,
                    compound_id,
                    technique: technique.parse()?,
                    status: status.parse()?,
                    metadata: serde_json::from_str(&metadata)?,
                });
            }
        }
        Ok(out)
    }

    /// Every spectrum's current record, by id.
    pub fn all_records(&self) -> Result<Vec<SpectrumRecord>> {
        let sql = format!(
            "SELECT {RECORD_COLUMNS} FROM spectrum s JOIN revision r ON r.spectrum_id = s.id AND r.number = s.current_revision
             ORDER BY s.id"
        );
        let mut stmt = self.conn.prepare(&sql)?;
        let rows = stmt.query_map([], record_from_row)?;
        let mut out = Vec::new();
        for row in rows {
            let (mut rec, meta) = row?;
            rec.metadata = serde_json::from_str(&meta)?;
            out.push(rec);
        }
        Ok(out)
    }

    /// The raw points of a spectrum as imported.
    pub fn raw_points(&self, id: i64) -> Result<Vec<(f64, f64)>> {
        let blob: Vec<u8> = self
            .conn
            .query_row("SELECT raw FROM spectrum WHERE id = ?1", [id], |r| r.get(0))
            .optional()?
            .ok_or(Error::NotFound {
                kind: "spectrum",
                id,
            })?;
        crate::spectrum::decode_points(&blob).ok_or_else(|| {
            Error::invalid(
                format!("spectrum {id}: raw blob is damaged"),
                "run `whorl check`",
            )
        })
    }

    /// The stored prepared form of a spectrum.
    pub fn prepared(&self, id: i64) -> Result<Prepared> {
        // Cached: a search loads the prepared spectra of its best candidates one by one.
        let (technique, vector, peaks, y_unit, warnings): (String, Vec<u8>, String, String, String) = self
            .conn
            .prepare_cached(
                "SELECT s.technique, p.vector, p.peaks, p.y_unit, p.warnings FROM prepared p JOIN spectrum s ON s.id = p.spectrum_id
                 WHERE p.spectrum_id = ?1",
            )?
            .query_row([id], |r| {
                Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?))
            })
            .optional()?
            .ok_or(Error::NotFound { kind: "spectrum", id })?;
        Ok(Prepared {
            technique: technique.parse()?,
            vector: f32_from_bytes(&vector),
            peaks: serde_json::from_str(&peaks)?,
            y_unit: y_unit.parse()?,
            warnings: serde_json::from_str(&warnings)?,
        })
    }

    /// Summaries for `list`, optionally of one technique.
    pub fn list(&self, technique: Option<Technique>) -> Result<Vec<Summary>> {
        let mut stmt = self.conn.prepare(
            "SELECT s.id, s.compound_id, s.technique, s.status, s.current_revision, r.metadata
             FROM spectrum s JOIN revision r ON r.spectrum_id = s.id AND r.number = s.current_revision
             WHERE ?1 IS NULL OR s.technique = ?1 ORDER BY s.id",
        )?;
        let rows = stmt.query_map([technique.map(Technique::name)], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, i64>(1)?,
                r.get::<_, String>(2)?,
                r.get::<_, String>(3)?,
                r.get::<_, i64>(4)?,
                r.get::<_, String>(5)?,
            ))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (id, compound_id, technique, status, revision, meta) = row?;
            let m: Metadata = serde_json::from_str(&meta)?;
            out.push(Summary {
                id,
                compound_id,
                technique: technique.parse()?,
                status: status.parse()?,
                revision,
                name: m.name,
                formula: m.formula,
                cas: m.cas,
            });
        }
        Ok(out)
    }

    /// Counts, recipes and fingerprint.
    pub fn stats(&self) -> Result<Stats> {
        let compounds = self
            .conn
            .query_row("SELECT count(*) FROM compound", [], |r| r.get(0))?;
        let events = self
            .conn
            .query_row("SELECT count(*) FROM event", [], |r| r.get(0))?;
        let mut spectra: BTreeMap<String, BTreeMap<String, i64>> = BTreeMap::new();
        let mut stmt = self.conn.prepare(
            "SELECT technique, status, count(*) FROM spectrum GROUP BY technique, status",
        )?;
        let rows = stmt.query_map([], |r| {
            Ok((
                r.get::<_, String>(0)?,
                r.get::<_, String>(1)?,
                r.get::<_, i64>(2)?,
            ))
        })?;
        for row in rows {
            let (t, s, n) = row?;
            spectra.entry(t).or_default().insert(s, n);
        }
        Ok(Stats {
            compounds,
            spectra,
            events,
            recipes: self.recipes.values().cloned().collect(),
            fingerprint: self.fingerprint()?,
            schema_version: super::schema::version(&self.conn)?,
        })
    }

    /// The spectra of one technique in the given statuses, with their prepared forms, in id order.
    pub fn candidates(&self, technique: Technique, statuses: &[Status]) -> Result<Vec<Candidate>> {
        let mut stmt = self.conn.prepare(
            "SELECT s.id, s.compound_id, s.status, p.vector, p.peaks, p.y_unit FROM spectrum s
             JOIN prepared p ON p.spectrum_id = s.id WHERE s.technique = ?1 ORDER BY s.id",
        )?;
        let rows = stmt.query_map([technique.name()], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, i64>(1)?,
                r.get::<_, String>(2)?,
                r.get::<_, Vec<u8>>(3)?,
                r.get::<_, String>(4)?,
                r.get::<_, String>(5)?,
            ))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (spectrum_id, compound_id, status, vector, peaks, y_unit) = row?;
            let status: Status = status.parse()?;
            if !statuses.contains(&status) {
                continue;
            }
            let peaks: Vec<Peak> = serde_json::from_str(&peaks)?;
            out.push(Candidate {
                spectrum_id,
                compound_id,
                status,
                prepared: Prepared {
                    technique,
                    vector: f32_from_bytes(&vector),
                    peaks,
                    y_unit: y_unit.parse()?,
                    warnings: vec![],
                },
            });
        }
        Ok(out)
    }

    /// Events in sequence order, for the whole library or for one record (e.g. "spectrum:12").
    pub fn events(&self, record: Option<&str>) -> Result<Vec<Event>> {
        let mut stmt = self.conn.prepare(
            "SELECT seq, at, actor, action, record, payload, payload_hash, prev_hash, hash FROM event
             WHERE ?1 IS NULL OR record = ?1 ORDER BY seq",
        )?;
        let rows = stmt.query_map([record], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, String>(1)?,
                r.get::<_, String>(2)?,
                r.get::<_, String>(3)?,
                r.get::<_, String>(4)?,
                r.get::<_, String>(5)?,
                r.get::<_, String>(6)?,
                r.get::<_, String>(7)?,
                r.get::<_, String>(8)?,
            ))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (seq, at, actor, action, record, payload, payload_hash, prev_hash, hash) = row?;
            out.push(Event {
                seq,
                at,
                actor,
                action,
                record,
                payload: serde_json::from_str(&payload)?,
                payload_hash,
                prev_hash,
                hash,
            });
        }
        Ok(out)
    }

    /// The spectrum whose original file had exactly these bytes, for this technique.
    pub fn present_by_file(&self, technique: Technique, file_sha256: &str) -> Result<Option<i64>> {
        Ok(self
            .conn
            .prepare_cached(
                "SELECT id FROM spectrum WHERE technique = ?1 AND file_sha256 = ?2 LIMIT 1",
            )?
            .query_row(params![technique.name(), file_sha256], |r| r.get(0))
            .optional()?)
    }

    /// The sequence number of the newest event.
    pub fn last_event(&self) -> Result<i64> {
        Ok(self
            .conn
            .query_row("SELECT coalesce(max(seq), 0) FROM event", [], |r| r.get(0))?)
    }

    /// Number of spectra of a technique in a status.
    pub fn count(&self, technique: Technique, status: Status) -> Result<i64> {
        Ok(self.conn.query_row(
            "SELECT count(*) FROM spectrum WHERE technique = ?1 AND status = ?2",
            params![technique.name(), status.name()],
            |r| r.get(0),
        )?)
    }

    /// Events after the given sequence number.
    pub fn events_since(&self, seq: i64) -> Result<Vec<Event>> {
        Ok(self
            .events(None)?
            .into_iter()
            .filter(|e| e.seq > seq)
            .collect())
    }

    /// Compound names by id, for labelling hits.
    pub fn compound_names(&self, ids: &[i64]) -> Result<HashMap<i64, String>> {
        let mut stmt = self
            .conn
            .prepare_cached("SELECT name FROM compound WHERE id = ?1")?;
        let mut out = HashMap::new();
        for &id in ids {
            if let Some(name) = stmt.query_row([id], |r| r.get::<_, String>(0)).optional()? {
                out.insert(id, name);
            }
        }
        Ok(out)
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
    super::curation::reweigh(
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
