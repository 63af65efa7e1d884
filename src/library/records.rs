//! Rows of the library as read: spectrum records, hit-list rows, summaries, counts and
//! search candidates, and the queries that read them.

use std::collections::BTreeMap;

use rusqlite::{OptionalExtension, params};
use serde::{Deserialize, Serialize};

use super::Library;
use crate::error::{Error, Result};
use crate::prepare::{Coverage, Peak, Prepared, Recipe};
use crate::spectrum::{Metadata, Status};
use crate::technique::Technique;
use crate::text::IndexDoc;

// `mod.rs` reaches these through `records::`; they live with the events and the state.

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
    /// Who submitted it (as the file or `--by` says).
    pub submitted_by: String,
    /// Who ran the command that stored it; `None` only for a spectrum no event records.
    pub imported_by: Option<String>,
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
    /// The library state hash.
    pub state_hash: String,
    /// Schema version.
    pub schema_version: i64,
}

/// A library spectrum as search needs it.
#[derive(Debug, Clone)]
pub struct Candidate {
    /// Spectrum id.
    pub spectrum_id: i64,
    /// Prepared form.
    pub prepared: Prepared,
}

pub(super) fn f32_bytes(v: &[f32]) -> Vec<u8> {
    v.iter().flat_map(|x| x.to_le_bytes()).collect()
}

/// A prepared spectrum's stored coverage (NULL: the whole grid).
pub(super) fn coverage_from(text: Option<&str>) -> Result<Option<Coverage>> {
    Ok(match text {
        Some(t) => Some(serde_json::from_str(t)?),
        None => None,
    })
}

pub(super) fn f32_from_bytes(b: &[u8]) -> Vec<f32> {
    b.chunks_exact(4)
        .map(|c| f32::from_le_bytes([c[0], c[1], c[2], c[3]]))
        .collect()
}

const RECORD_COLUMNS: &str = "s.id, s.compound_id, s.technique, s.status, s.current_revision, s.file_name, s.file_sha256,
     s.raw_sha256, s.x_unit, s.y_unit, length(s.raw) / 16, s.submitted_by, s.created_at, r.metadata, s.imported_by";

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
            imported_by: row.get(14)?,
            metadata: Metadata::default(),
        },
        metadata,
    ))
}

impl Library {
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
        type Row = (String, Vec<u8>, String, String, String, Option<String>);
        let (technique, vector, peaks, y_unit, warnings, coverage): Row = self
            .conn
            .prepare_cached(
                "SELECT s.technique, p.vector, p.peaks, p.y_unit, p.warnings, p.coverage FROM prepared p JOIN spectrum s ON s.id = p.spectrum_id
                 WHERE p.spectrum_id = ?1",
            )?
            .query_row([id], |r| {
                Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?, r.get(5)?))
            })
            .optional()?
            .ok_or(Error::NotFound { kind: "spectrum", id })?;
        Ok(Prepared {
            technique: technique.parse()?,
            vector: f32_from_bytes(&vector),
            peaks: serde_json::from_str(&peaks)?,
            y_unit: y_unit.parse()?,
            warnings: serde_json::from_str(&warnings)?,
            coverage: coverage_from(coverage.as_deref())?,
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

    /// Counts, recipes and state hash.
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
            state_hash: self.state_hash()?,
            schema_version: super::schema::version(&self.conn)?,
        })
    }

    /// The NMR solvent on record (current revision) of every spectrum of one technique, by
    /// spectrum id: the solvent its prepared form masks (`None` without one).
    pub fn solvents(&self, technique: Technique) -> Result<BTreeMap<i64, Option<String>>> {
        let mut stmt = self.conn.prepare(
            "SELECT s.id, json_extract(r.metadata, '$.solvent') FROM spectrum s
             JOIN revision r ON r.spectrum_id = s.id AND r.number = s.current_revision
             WHERE s.technique = ?1",
        )?;
        let rows = stmt.query_map([technique.name()], |r| {
            Ok((r.get::<_, i64>(0)?, r.get::<_, Option<String>>(1)?))
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// The spectra of one technique in the given statuses, with their prepared forms, in id order.
    pub fn candidates(&self, technique: Technique, statuses: &[Status]) -> Result<Vec<Candidate>> {
        let mut stmt = self.conn.prepare(
            "SELECT s.id, s.status, p.vector, p.peaks, p.y_unit, p.coverage FROM spectrum s
             JOIN prepared p ON p.spectrum_id = s.id WHERE s.technique = ?1 ORDER BY s.id",
        )?;
        let rows = stmt.query_map([technique.name()], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, String>(1)?,
                r.get::<_, Vec<u8>>(2)?,
                r.get::<_, String>(3)?,
                r.get::<_, String>(4)?,
                r.get::<_, Option<String>>(5)?,
            ))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (spectrum_id, status, vector, peaks, y_unit, coverage) = row?;
            let status: Status = status.parse()?;
            if !statuses.contains(&status) {
                continue;
            }
            let peaks: Vec<Peak> = serde_json::from_str(&peaks)?;
            out.push(Candidate {
                spectrum_id,
                prepared: Prepared {
                    technique,
                    vector: f32_from_bytes(&vector),
                    peaks,
                    y_unit: y_unit.parse()?,
                    warnings: vec![],
                    coverage: coverage_from(coverage.as_deref())?,
                },
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

    /// Number of spectra of a technique in a status.
    pub fn count(&self, technique: Technique, status: Status) -> Result<i64> {
        Ok(self.conn.query_row(
            "SELECT count(*) FROM spectrum WHERE technique = ?1 AND status = ?2",
            params![technique.name(), status.name()],
            |r| r.get(0),
        )?)
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
