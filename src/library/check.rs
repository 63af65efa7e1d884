//! `check`: walk the audit chain, replay it against the tables, re-hash every raw blob,
//! re-prepare every spectrum, recompute the fingerprint, and bring derived data up to date.

use std::collections::{BTreeMap, HashMap};

use rayon::prelude::*;
use serde::Serialize;
use serde_json::Value;

use super::events::{GENESIS_HASH, event_hash};
use super::records::{SpectrumRecord, f32_bytes};
use super::{ContentSum, Library, Recipes, prepare_stored, record_hash};
use crate::error::Result;
use crate::spectrum::sha256_hex;
use crate::technique::Technique;

/// One inconsistency, with the record it concerns.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Finding {
    /// The record: `event:12`, `spectrum:3`, `library`.
    pub record: String,
    /// What is wrong.
    pub problem: String,
}

/// What `check` looked at and found.
#[derive(Debug, Clone, Default, Serialize)]
pub struct CheckReport {
    /// Events walked.
    pub events: usize,
    /// Spectra whose raw points were re-hashed and re-prepared.
    pub spectra: usize,
    /// Inconsistencies; empty when the library is whole.
    pub findings: Vec<Finding>,
    /// True when the text index was behind and has been rebuilt (derived data, not a finding).
    pub text_index_rebuilt: bool,
    /// Why the text index was found damaged (and rebuilt from the database), if it was:
    /// derived data, so not a finding.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub text_index_damage: Option<String>,
    /// Techniques whose vector cache was rebuilt from the database (derived data).
    #[serde(default)]
    pub caches_rebuilt: Vec<crate::technique::Technique>,
}

/// The state of one spectrum as its events describe it.
#[derive(Debug, Default)]
struct Expected {
    technique: String,
    raw_sha256: String,
    revisions: BTreeMap<i64, Value>,
    current: i64,
    status: String,
    reviews: usize,
}

impl Library {
    /// Checks the whole library. `progress(done, total)` is called as spectra are verified.
    pub fn check(&self, progress: &(dyn Fn(usize, usize) + Sync)) -> Result<CheckReport> {
        let mut report = CheckReport::default();
        let mut find =
            |record: String, problem: String| report.findings.push(Finding { record, problem });

        // 1. The chain.
        let mut stmt = self
            .conn
            .prepare("SELECT seq, at, actor, action, record, payload, payload_hash, prev_hash, hash FROM event ORDER BY rowid")?;
        type Row = (
            i64,
            String,
            String,
            String,
            String,
            String,
            String,
            String,
            String,
        );
        let events: Vec<Row> = stmt
            .query_map([], |r| {
                Ok((
                    r.get(0)?,
                    r.get(1)?,
                    r.get(2)?,
                    r.get(3)?,
                    r.get(4)?,
                    r.get(5)?,
                    r.get(6)?,
                    r.get(7)?,
                    r.get(8)?,
                ))
            })?
            .collect::<rusqlite::Result<_>>()?;
        let mut previous_hash = GENESIS_HASH.to_string();
        let mut expected_seq = 1;
        for (seq, at, actor, action, record, payload, payload_hash, prev_hash, hash) in &events {
            let id = format!("event:{seq}");
            if *seq != expected_seq {
                let problem = if *seq > expected_seq {
                    format!(
                        "events {expected_seq}..{} are missing: the sequence jumps to {seq}",
                        seq - 1
                    )
                } else {
                    format!("out of order: found after event {}", expected_seq - 1)
                };
                find(id.clone(), problem);
            }
            if sha256_hex(payload.as_bytes()) != *payload_hash {
                find(
                    id.clone(),
                    "its payload does not match the payload hash (the payload was edited)".into(),
                );
            }
            if *prev_hash != previous_hash {
                find(id.clone(), "it does not follow the event before it (an event was removed, reordered or edited)".into());
            }
            if event_hash(*seq, at, actor, action, record, payload_hash, prev_hash) != *hash {
                find(
                    id.clone(),
                    "its fields do not match its hash (the event was edited)".into(),
                );
            }
            previous_hash = hash.clone();
            expected_seq = seq + 1;
        }
        report.events = events.len();
        let head = self.setting("event_head")?;
        let last = events.last().map(|e| format!("{}:{}", e.0, e.8));
        if head != last {
            find(
                "library".into(),
                format!(
                    "the chain head on record is {} but the last event is {}: the newest events were removed or replaced",
                    head.as_deref().unwrap_or("absent"),
                    last.as_deref().unwrap_or("absent")
                ),
            );
        }

        // 2. Replay the events and compare with the tables.
        let mut expected: BTreeMap<i64, Expected> = BTreeMap::new();
        let mut expected_recipes: BTreeMap<String, Value> = BTreeMap::new();
        for (seq, _, _, action, record, payload, ..) in &events {
            if action == "init" || action == "recipe" {
                replay_recipes(action, payload, &mut expected_recipes);
                continue;
            }
            let Some(id) = record
                .strip_prefix("spectrum:")
                .and_then(|s| s.parse::<i64>().ok())
            else {
                continue;
            };
            let Ok(p) = serde_json::from_str::<Value>(payload) else {
                find(
                    format!("event:{seq}"),
                    "its payload is not valid JSON".into(),
                );
                continue;
            };
            let e = expected.entry(id).or_default();
            match action.as_str() {
                "add" => {
                    e.technique = p["technique"].as_str().unwrap_or_default().to_string();
                    e.raw_sha256 = p["raw_sha256"].as_str().unwrap_or_default().to_string();
                    e.revisions.insert(1, p["metadata"].clone());
                    e.current = 1;
                    e.status = "pending".into();
                }
                "import" => {
                    e.technique = p["technique"].as_str().unwrap_or_default().to_string();
                    e.raw_sha256 = p["raw_sha256"].as_str().unwrap_or_default().to_string();
                    for r in p["revisions"].as_array().into_iter().flatten() {
                        e.revisions
                            .insert(r["number"].as_i64().unwrap_or(0), r["metadata"].clone());
                    }
                    e.current = p["current_revision"].as_i64().unwrap_or(1);
                    e.status = p["status"].as_str().unwrap_or_default().to_string();
                    e.reviews += p["reviews"].as_array().map_or(0, Vec::len);
                }
                "revise" => {
                    let n = p["revision"].as_i64().unwrap_or(0);
                    e.revisions.insert(n, p["metadata"].clone());
                    e.current = n;
                    e.status = "pending".into();
                }
                "review" => {
                    e.reviews += 1;
                    if p["decision"] == "approved" {
                        e.status = "verified".into();
                    }
                }
                "withdraw" => e.status = "withdrawn".into(),
                _ => {}
            }
        }

        let stored_recipes: Vec<(String, String)> = {
            let mut stmt = self.conn.prepare("SELECT technique, recipe FROM recipe")?;
            stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?
                .collect::<rusqlite::Result<_>>()?
        };
        for (technique, text) in &stored_recipes {
            // Compared as parsed JSON, both sides read from text the same way.
            let stored: Value = serde_json::from_str(text).unwrap_or(Value::Null);
            if expected_recipes.get(technique) != Some(&stored) {
                find(
                    format!("recipe:{technique}"),
                    "the recipe differs from the one its events record (edited outside whorl)"
                        .into(),
                );
            }
        }
        for technique in expected_recipes.keys() {
            if !stored_recipes.iter().any(|(t, _)| t == technique) {
                find(
                    format!("recipe:{technique}"),
                    "its events record a recipe but the recipe table has none (deleted)".into(),
                );
            }
        }

        let records = self.all_records()?;
        let on_record: HashMap<i64, &SpectrumRecord> = records.iter().map(|r| (r.id, r)).collect();
        for id in expected.keys() {
            if !on_record.contains_key(id) {
                find(
                    format!("spectrum:{id}"),
                    "the audit trail records it but the spectrum is missing".into(),
                );
            }
        }
        let mut revision_rows: HashMap<i64, Vec<(i64, String)>> = HashMap::new();
        {
            let mut stmt = self.conn.prepare(
                "SELECT spectrum_id, number, metadata FROM revision ORDER BY spectrum_id, number",
            )?;
            let rows = stmt.query_map([], |r| {
                Ok((
                    r.get::<_, i64>(0)?,
                    r.get::<_, i64>(1)?,
                    r.get::<_, String>(2)?,
                ))
            })?;
            for row in rows {
                let (id, n, m) = row?;
                revision_rows.entry(id).or_default().push((n, m));
            }
        }
        let mut review_counts: HashMap<i64, usize> = HashMap::new();
        {
            let mut stmt = self
                .conn
                .prepare("SELECT spectrum_id, count(*) FROM review GROUP BY spectrum_id")?;
            let rows = stmt.query_map([], |r| Ok((r.get::<_, i64>(0)?, r.get::<_, i64>(1)?)))?;
            for row in rows {
                let (id, n) = row?;
                review_counts.insert(id, n as usize);
            }
        }
        let mut sum = ContentSum::default();
        for rec in &records {
            let id = format!("spectrum:{}", rec.id);
            let Some(e) = expected.get(&rec.id) else {
                find(
                    id,
                    "no event records its import (inserted outside whorl)".into(),
                );
                continue;
            };
            if rec.raw_sha256 != e.raw_sha256 || rec.technique.name() != e.technique {
                find(
                    id.clone(),
                    "its raw hash or technique differs from the one recorded when it was imported"
                        .into(),
                );
            }
            if rec.status.name() != e.status {
                find(
                    id.clone(),
                    format!("status is {} but its events say {}", rec.status, e.status),
                );
            }
            if rec.revision != e.current {
                find(
                    id.clone(),
                    format!(
                        "current revision is {} but its events say {}",
                        rec.revision, e.current
                    ),
                );
            }
            let rows = revision_rows
                .get(&rec.id)
                .map(Vec::as_slice)
                .unwrap_or_default();
            if rows.len() != e.revisions.len() {
                find(
                    id.clone(),
                    format!(
                        "{} revisions on record, {} in its events",
                        rows.len(),
                        e.revisions.len()
                    ),
                );
            }
            for (n, text) in rows {
                let stored: Value = serde_json::from_str(text).unwrap_or(Value::Null);
                if e.revisions.get(n) != Some(&stored) {
                    find(
                        id.clone(),
                        format!(
                            "metadata of revision {n} differs from what its event recorded (edited)"
                        ),
                    );
                }
            }
            if review_counts.get(&rec.id).copied().unwrap_or(0) != e.reviews {
                find(
                    id.clone(),
                    "its sign-offs differ from those its events recorded".into(),
                );
            }
            if rec.status.searchable() {
                let meta = serde_json::to_string(&rec.metadata)?;
                sum.add(&record_hash(
                    rec.technique.name(),
                    rec.status.name(),
                    &rec.raw_sha256,
                    &meta,
                ));
            }
        }
        let stored_sum = self
            .setting("content_sum")?
            .and_then(|s| ContentSum::from_hex(&s))
            .unwrap_or_default();
        if stored_sum != sum {
            find(
                "library".into(),
                "the stored fingerprint sum does not match the searchable records".into(),
            );
        }

        // 3. Raw blobs and prepared forms, in parallel.
        let total = records.len();
        let recipes = self.recipes.clone();
        let done = std::sync::atomic::AtomicUsize::new(0);
        for chunk in records.chunks(512) {
            let mut inputs = Vec::with_capacity(chunk.len());
            for rec in chunk {
                let (blob, vector, peaks, coverage): (Vec<u8>, Vec<u8>, String, Option<String>) = self.conn.query_row(
                    "SELECT s.raw, p.vector, p.peaks, p.coverage FROM spectrum s JOIN prepared p ON p.spectrum_id = s.id WHERE s.id = ?1",
                    [rec.id],
                    |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)),
                )?;
                inputs.push((rec, blob, vector, (peaks, coverage)));
            }
            let found: Vec<Finding> = inputs
                .par_iter()
                .flat_map_iter(|(rec, blob, vector, (peaks, coverage))| {
                    let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
                    progress(n, total);
                    verify_blob(&recipes, rec, blob, vector, (peaks, coverage.as_deref()))
                })
                .collect();
            report.findings.extend(found);
        }
        report.spectra = total;

        // 4. Derived data. A text index that was damaged when the library was opened has
        // been started afresh; one whose files fail their checksums is rebuilt here.
        let corrupted = match self.text.corrupted_files() {
            Ok(files) if files.is_empty() => None,
            Ok(files) => Some(format!(
                "files failing their checksums: {}",
                files.join(", ")
            )),
            Err(e) => Some(e.to_string()),
        };
        report.text_index_damage = self.text.damage().map(str::to_string).or(corrupted);
        report.text_index_rebuilt = self.refresh_text_index()?;
        if !report.text_index_rebuilt
            && (self.text.len() != records.len() as u64 || report.text_index_damage.is_some())
        {
            let generation = self.generation()?;
            self.text
                .rebuild(records.iter().map(SpectrumRecord::index_doc), generation)?;
            report.text_index_rebuilt = true;
        }
        for (file, reason) in self.remove_damaged_vector_caches()? {
            report.findings.push(Finding {
                record: format!("cache:{file}"),
                problem: format!(
                    "the vector cache is damaged ({reason}); it was removed and is rebuilt from the database"
                ),
            });
        }
        report.caches_rebuilt = self.rebuild_vector_caches()?;
        Ok(report)
    }
}

/// Applies an `init` event (the library's first recipes) or a `recipe` event (one technique's
/// recipe replaced) to the recipes the audit trail says the library has.
fn replay_recipes(action: &str, payload: &str, recipes: &mut BTreeMap<String, Value>) {
    let Ok(p) = serde_json::from_str::<Value>(payload) else {
        return;
    };
    let given: Vec<&Value> = if action == "init" {
        p["recipes"].as_array().into_iter().flatten().collect()
    } else {
        vec![&p["to"]]
    };
    for r in given {
        if let Some(t) = r["technique"].as_str() {
            recipes.insert(t.to_string(), r.clone());
        }
    }
}

fn verify_blob(
    recipes: &Recipes,
    rec: &SpectrumRecord,
    blob: &[u8],
    vector: &[u8],
    (peaks, coverage): (&str, Option<&str>),
) -> Vec<Finding> {
    let id = format!("spectrum:{}", rec.id);
    let mut out = Vec::new();
    if sha256_hex(blob) != rec.raw_sha256 {
        out.push(Finding {
            record: id,
            problem: "its raw points do not match their hash (the raw blob was edited)".into(),
        });
        return out;
    }
    let again = (|| -> Result<(Vec<u8>, String, String, Option<String>)> {
        let recipe = recipes.get(&rec.technique).ok_or_else(|| {
            crate::Error::invalid(
                format!("no recipe for {}", rec.technique),
                "the library's recipe table is damaged",
            )
        })?;
        let p = prepare_stored(
            rec.id,
            recipe,
            blob,
            &rec.x_unit,
            &rec.y_unit,
            rec.metadata.solvent.as_deref(),
        )?;
        // Libraries prepared before IR and Raman peaks had areas stored 0 for every area;
        // areas enter no score, so those peak lists still agree.
        let mut without_areas = p.peaks.clone();
        if matches!(rec.technique, Technique::Ir | Technique::Raman) {
            without_areas.iter_mut().for_each(|peak| peak.area = 0.0);
        }
        Ok((
            f32_bytes(&p.vector),
            serde_json::to_string(&p.peaks)?,
            serde_json::to_string(&without_areas)?,
            super::store::coverage_json(&p)?,
        ))
    })();
    match again {
        // Libraries prepared before coverage was recorded hold NULL for every spectrum,
        // which reads as the whole grid; a recorded coverage must be the one prepared again.
        Ok((v, p, before_areas, c))
            if v == vector
                && (p == peaks || before_areas == peaks)
                && (coverage.is_none() || coverage == c.as_deref()) => {}
        Ok(_) => out.push(Finding {
            record: id,
            problem:
                "its stored prepared vector or peaks differ from its raw points prepared again"
                    .into(),
        }),
        Err(e) => out.push(Finding {
            record: id,
            problem: format!("its raw points can no longer be prepared: {e}"),
        }),
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::Status;

    #[test]
    fn an_empty_library_checks_clean() {
        let lib = Library::in_memory("t").unwrap();
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
        assert_eq!(report.events, 1);
    }

    #[test]
    fn ir_peaks_stored_without_areas_still_check_clean_and_other_edits_do_not() {
        use crate::library::testing::{add, ir};
        let mut lib = Library::in_memory("t").unwrap();
        let staged = ir(7, "band", "a");
        let id = add(&mut lib, &staged);
        // The peaks as prepared (not parsed back from JSON, which need not round-trip f64).
        let mut peaks = staged.prepared.peaks.clone();
        assert!(peaks.iter().all(|p| p.area > 0.0), "{peaks:?}");
        let set = |peaks: &[crate::prepare::Peak]| {
            lib.conn
                .execute(
                    "UPDATE prepared SET peaks = ?2 WHERE spectrum_id = ?1",
                    rusqlite::params![id, serde_json::to_string(peaks).unwrap()],
                )
                .unwrap();
            lib.check(&|_, _| {}).unwrap().findings
        };
        // As a library prepared before IR areas stored them: every area 0.
        peaks.iter_mut().for_each(|p| p.area = 0.0);
        let found = set(&peaks);
        assert!(found.is_empty(), "{found:?}");
        // Any other change to the peaks is still found.
        peaks[0].area = 1.0;
        assert_eq!(set(&peaks).len(), 1);
    }

    #[test]
    fn coverage_is_checked_and_spectra_stored_before_it_was_recorded_check_clean() {
        use crate::library::synthetic::{Rng, ir_points, staged};
        let mut lib = Library::in_memory("t").unwrap();
        let pts: Vec<(f64, f64)> = ir_points(&mut Rng::new(3))
            .into_iter()
            .filter(|p| p.0 >= 1000.0)
            .collect();
        let s = staged(lib.recipes(), Technique::Ir, pts, "short", &[]).unwrap();
        assert_eq!(s.prepared.coverage.map(|c| c.lo), Some(1000.0));
        let id = crate::library::testing::add(&mut lib, &s);
        assert_eq!(lib.prepared(id).unwrap().coverage, s.prepared.coverage);
        let set = |value: Option<&str>| {
            lib.conn
                .execute(
                    "UPDATE prepared SET coverage = ?2 WHERE spectrum_id = ?1",
                    rusqlite::params![id, value],
                )
                .unwrap();
            lib.check(&|_, _| {}).unwrap().findings
        };
        assert!(set(Some(r#"{"lo":1000.0,"hi":4000.0}"#)).is_empty());
        // As a library prepared before coverage was recorded: NULL, read as the whole grid.
        assert!(set(None).is_empty());
        assert_eq!(lib.prepared(id).unwrap().coverage, None);
        // A coverage other than the raw points give is found.
        assert_eq!(set(Some(r#"{"lo":900.0,"hi":4000.0}"#)).len(), 1);
    }

    #[test]
    fn status_names_are_the_stored_ones() {
        assert_eq!(Status::Verified.name(), "verified");
    }
}
