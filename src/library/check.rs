//! `check`: walk the audit chain, replay it against the tables, re-hash every raw blob,
//! re-prepare every spectrum, recompute the state hash, and bring derived data up to date.

use std::collections::{BTreeMap, HashMap, HashSet};

use rayon::prelude::*;
use serde::Serialize;
use serde_json::Value;

use super::events::{ASSERTED, GENESIS_HASH, SIGNED_IN, event_hash_with};
use super::records::{Review, SpectrumRecord, f32_bytes};
use super::seal::{ROWS, differences, event_seals, seal};
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
    /// Records (spectra, accounts, tokens, trusted keys) whose newest event carries no seal of
    /// their rows (written by a version of whorl before seals): the columns their events do
    /// not replay field by field are not covered for them.
    #[serde(default)]
    pub unsealed: usize,
}

/// The state of one spectrum as its events describe it.
#[derive(Debug, Default)]
struct Expected {
    technique: String,
    raw_sha256: String,
    revisions: BTreeMap<i64, Value>,
    current: i64,
    status: String,
    /// Who the file or `--by` named as submitter (absent from events older than it).
    submitted_by: Option<String>,
    /// Who ran the add or import: the event's actor.
    imported_by: Option<String>,
    /// The sign-offs, in the order they were written.
    reviews: Vec<ExpectedReview>,
    /// Who wrote each revision, where the events say.
    authors: BTreeMap<i64, String>,
    /// What its events say of the withdrawal reason: `Some(Some(r))` withdrawn for `r`,
    /// `Some(None)` none (reinstated since), `None` unknown (an import records none).
    withdrawn_reason: Option<Option<String>>,
}

/// One sign-off as its event recorded it; `at` and `imported_from` are absent from events
/// written before they were recorded there.
#[derive(Debug)]
struct ExpectedReview {
    revision: Option<i64>,
    reviewer: Option<String>,
    decision: Option<String>,
    meaning: Option<String>,
    note: Option<String>,
    at: Option<String>,
    imported_from: Option<Option<String>>,
}

impl ExpectedReview {
    fn from_payload(p: &Value) -> ExpectedReview {
        let text = |k: &str| p.get(k).and_then(Value::as_str).map(str::to_string);
        ExpectedReview {
            revision: p.get("revision").and_then(Value::as_i64),
            reviewer: text("reviewer"),
            decision: text("decision"),
            meaning: text("meaning"),
            note: text("note"),
            at: text("at"),
            imported_from: None,
        }
    }

    /// The fields of `row` that differ from what the event recorded.
    fn differences(&self, row: &Review) -> Vec<&'static str> {
        let mut out = Vec::new();
        let differs = |want: &Option<String>, got: &str| want.as_deref().is_some_and(|w| w != got);
        if self.revision.is_some_and(|r| r != row.revision) {
            out.push("revision");
        }
        if differs(&self.reviewer, &row.reviewer) {
            out.push("reviewer");
        }
        if differs(&self.decision, &row.decision) {
            out.push("decision");
        }
        if differs(&self.meaning, &row.meaning) {
            out.push("meaning");
        }
        if self.note.as_deref() != row.note.as_deref()
            && (self.note.is_some() || row.note.is_some())
        {
            out.push("note");
        }
        if differs(&self.at, &row.at) {
            out.push("time");
        }
        if let Some(from) = &self.imported_from
            && from.as_deref() != row.imported_from.as_deref()
        {
            out.push("origin");
        }
        out
    }
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
        let identities: HashMap<i64, String> = {
            let mut stmt = self.conn.prepare("SELECT seq, identity FROM event")?;
            stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?
                .collect::<rusqlite::Result<_>>()?
        };
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
            let identity = identities.get(seq).map_or(ASSERTED, String::as_str);
            if identity != ASSERTED && identity != SIGNED_IN {
                find(
                    id.clone(),
                    format!("its identity kind '{identity}' is neither asserted nor signed-in"),
                );
            }
            if event_hash_with(
                *seq,
                at,
                actor,
                action,
                record,
                payload_hash,
                prev_hash,
                identity,
            ) != *hash
            {
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
        // The review policy starts forbidden (schema 0002) and changes only by `policy` events.
        let mut expected_policy = false;
        let mut expected_keys: Vec<Value> = Vec::new();
        // The sign-off policy: absent until a `policy` event sets it.
        let mut expected_sign_offs: Option<String> = None;
        // The settings the `init` event recorded (absent from libraries made before).
        let mut init_settings = Value::Null;
        // The newest event of each sealed record, with its seal if it carries one.
        let mut seals: BTreeMap<String, (i64, Option<BTreeMap<String, String>>)> = BTreeMap::new();
        // The newest recipe change of each technique.
        let mut recipe_changed: HashMap<String, i64> = HashMap::new();
        // The newest digest sealed of each compound row, by any event: for the compounds no
        // spectrum points to any more, which no spectrum's newest seal covers.
        let mut compound_seals: BTreeMap<String, (i64, String)> = BTreeMap::new();
        for (seq, _, actor, action, record, payload, ..) in &events {
            // An event seals its own record, or (a compound merge) every record it names.
            let parsed = serde_json::from_str::<Value>(payload).unwrap_or(Value::Null);
            for (sealed, rows) in event_seals(record, &parsed) {
                seals.insert(sealed, (*seq, rows));
            }
            if let Some(rows) = parsed.get(ROWS).and_then(Value::as_object) {
                for (row, digest) in rows {
                    if let (true, Some(d)) = (row.starts_with("compound:"), digest.as_str()) {
                        compound_seals.insert(row.clone(), (*seq, d.to_string()));
                    }
                }
            }
            if action == "init" || action == "recipe" {
                replay_recipes(action, payload, &mut expected_recipes);
                if let Ok(p) = serde_json::from_str::<Value>(payload) {
                    if action == "init" {
                        init_settings = p["settings"].clone();
                    } else if let Some(t) = p["to"]["technique"].as_str() {
                        recipe_changed.insert(t.to_string(), *seq);
                    }
                }
                continue;
            }
            if action == "policy" || action == "key-trust" {
                let Ok(p) = serde_json::from_str::<Value>(payload) else {
                    find(
                        format!("event:{seq}"),
                        "its payload is not valid JSON".into(),
                    );
                    continue;
                };
                if action == "policy" {
                    if let Some(allow) = p["allow_self_review"].as_bool() {
                        expected_policy = allow;
                    }
                    if let Some(value) = p["sign_offs"].as_str() {
                        expected_sign_offs = Some(value.to_string());
                    }
                } else {
                    let mut p = p;
                    if let Some(object) = p.as_object_mut() {
                        object.remove(ROWS);
                        object.remove(super::events::GENERATION);
                    }
                    expected_keys.push(p);
                }
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
                    // A new spectrum has no withdrawal reason until a `withdraw` event.
                    e.withdrawn_reason = Some(None);
                    e.submitted_by = p["submitted_by"].as_str().map(str::to_string);
                    e.imported_by = Some(actor.clone());
                    if let Some(by) = &e.submitted_by {
                        e.authors.insert(1, by.clone());
                    }
                }
                "import" => {
                    e.submitted_by = p["submitted_by"].as_str().map(str::to_string);
                    e.imported_by = Some(actor.clone());
                    e.technique = p["technique"].as_str().unwrap_or_default().to_string();
                    e.raw_sha256 = p["raw_sha256"].as_str().unwrap_or_default().to_string();
                    for r in p["revisions"].as_array().into_iter().flatten() {
                        let n = r["number"].as_i64().unwrap_or(0);
                        e.revisions.insert(n, r["metadata"].clone());
                        if let Some(by) = r["created_by"].as_str() {
                            e.authors.insert(n, by.to_string());
                        }
                    }
                    e.current = p["current_revision"].as_i64().unwrap_or(1);
                    e.status = p["status"].as_str().unwrap_or_default().to_string();
                    // One that arrived searchable has no reason; one that arrived withdrawn
                    // has the reason of the last step of its history, when the event kept it.
                    e.withdrawn_reason = if e.status != "withdrawn" {
                        Some(None)
                    } else {
                        p["status_history"]
                            .as_array()
                            .and_then(|h| h.last())
                            .filter(|c| c["action"] == "withdraw")
                            .and_then(|c| c["reason"].as_str())
                            .map(|r| Some(r.to_string()))
                    };
                    let from = p
                        .get("imported_from")
                        .map(|f| f.as_str().map(str::to_string));
                    for r in p["reviews"].as_array().into_iter().flatten() {
                        let mut want = ExpectedReview::from_payload(r);
                        want.imported_from = from.clone();
                        e.reviews.push(want);
                    }
                }
                "revise" => {
                    let n = p["revision"].as_i64().unwrap_or(0);
                    e.revisions.insert(n, p["metadata"].clone());
                    e.authors.insert(n, actor.clone());
                    e.current = n;
                    e.status = "pending".into();
                }
                "review" => {
                    let mut want = ExpectedReview::from_payload(&p);
                    want.imported_from = Some(None);
                    e.reviews.push(want);
                    if p["decision"] == "approved" {
                        e.status = "verified".into();
                    }
                }
                "withdraw" => {
                    e.status = "withdrawn".into();
                    e.withdrawn_reason = Some(p["reason"].as_str().map(str::to_string));
                }
                "reinstate" => {
                    e.status = "pending".into();
                    e.withdrawn_reason = Some(None);
                }
                _ => {}
            }
        }

        for (record, problem) in super::accounts::replay(
            &self.conn,
            events
                .iter()
                .map(|e| (e.3.as_str(), e.4.as_str(), e.5.as_str())),
        )? {
            find(record, problem);
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

        let policy = self.setting("allow_self_review")?;
        if policy.as_deref() != Some(if expected_policy { "true" } else { "false" }) {
            find(
                "setting:allow_self_review".into(),
                format!(
                    "the self-review policy is {} but its events say {} (changed outside whorl policy)",
                    policy.as_deref().unwrap_or("absent"),
                    expected_policy
                ),
            );
        }
        let sign_offs = self.setting("sign_offs")?;
        if sign_offs != expected_sign_offs {
            find(
                "setting:sign_offs".into(),
                format!(
                    "the sign-off policy is {} but its events say {} (changed outside whorl policy)",
                    sign_offs.as_deref().unwrap_or("absent"),
                    expected_sign_offs.as_deref().unwrap_or("absent")
                ),
            );
        }
        if let Some(recorded) = init_settings.as_object() {
            for (key, want) in recorded {
                let got = self.setting(key)?;
                if got.as_deref() != want.as_str() {
                    find(
                        format!("setting:{key}"),
                        format!(
                            "it is {} but the library's init event recorded {want} (edited)",
                            got.as_deref().unwrap_or("absent")
                        ),
                    );
                }
            }
        }

        // The generation counts write transactions, for the derived stores to see that they
        // are behind. Every event records the generation its transaction left, so the counter
        // must be the newest event's (events written before they recorded it say nothing).
        let generation = self.setting("generation")?;
        let recorded = events.iter().rev().find_map(|e| {
            let p = serde_json::from_str::<Value>(&e.5).ok()?;
            Some((e.0, p.get(super::events::GENERATION)?.as_u64()?))
        });
        match (
            generation.as_deref().and_then(|g| g.parse::<u64>().ok()),
            recorded,
        ) {
            (None, _) => find(
                "setting:generation".into(),
                format!(
                    "it is {}, not a count of write transactions (edited)",
                    generation.as_deref().unwrap_or("absent")
                ),
            ),
            (Some(now), Some((seq, then))) if now != then => find(
                "setting:generation".into(),
                format!(
                    "it is {now} but event {seq}, the newest, recorded {then} (edited outside whorl)"
                ),
            ),
            _ => {}
        }

        // Every sealed record's rows against the seal of its newest event. A spectrum whose
        // technique's recipe changed since keeps the prepared y unit and warnings the change
        // wrote: those are compared with its raw points prepared again below instead.
        let mut unsealed = 0;
        let mut rederive: HashSet<i64> = HashSet::new();
        let mut seal_findings: Vec<Finding> = Vec::new();
        for (record, (seq, rows)) in &seals {
            let Some(sealed) = rows else {
                unsealed += 1;
                continue;
            };
            let Some(mut now) = seal(&self.conn, record)? else {
                continue;
            };
            let mut sealed = sealed.clone();
            if let Some(id) = record
                .strip_prefix("spectrum:")
                .and_then(|s| s.parse::<i64>().ok())
                && expected
                    .get(&id)
                    .and_then(|e| recipe_changed.get(&e.technique))
                    .is_some_and(|changed| changed > seq)
            {
                let prepared = format!("prepared:{id}");
                sealed.remove(&prepared);
                now.remove(&prepared);
                rederive.insert(id);
            }
            let changed = differences(&sealed, &now);
            if !changed.is_empty() {
                let rows: Vec<String> = changed
                    .iter()
                    .map(|(row, how)| format!("{row} {how}"))
                    .collect();
                seal_findings.push(Finding {
                    record: record.clone(),
                    problem: format!(
                        "its rows differ from those its event {seq} sealed (changed outside whorl): {}",
                        rows.join(", ")
                    ),
                });
            }
        }

        // Compounds no spectrum points to (left behind by a revision that renamed its spectrum,
        // or merged away) against the newest event that sealed them; compounds are never
        // deleted (a trigger), so one sealed once must still be there.
        let ids = |sql: &str| -> Result<HashSet<i64>> {
            let mut stmt = self.conn.prepare(sql)?;
            Ok(stmt
                .query_map([], |r| r.get(0))?
                .collect::<rusqlite::Result<_>>()?)
        };
        let compounds = ids("SELECT id FROM compound")?;
        let named = ids("SELECT compound_id FROM spectrum")?;
        let mut orphans: Vec<i64> = compounds.difference(&named).copied().collect();
        orphans.sort_unstable();
        for id in orphans {
            let row = format!("compound:{id}");
            let now = super::seal::compound_seal(&self.conn, id)?;
            match compound_seals.get(&row) {
                None => unsealed += 1,
                Some((seq, digest)) if now.get(&row) != Some(digest) => {
                    seal_findings.push(Finding {
                        record: row.clone(),
                        problem: format!(
                            "a compound no spectrum names; its row differs from the one event {seq} sealed (changed outside whorl)"
                        ),
                    })
                }
                Some(_) => {}
            }
        }
        for (row, (seq, _)) in &compound_seals {
            let id = row["compound:".len()..].parse::<i64>().unwrap_or(-1);
            // A compound a spectrum still names is its spectrum's seal's to report.
            if !compounds.contains(&id) && !named.contains(&id) {
                seal_findings.push(Finding {
                    record: row.clone(),
                    problem: format!(
                        "event {seq} sealed this compound but its row is gone (deleted outside whorl)"
                    ),
                });
            }
        }

        let keys = self.trusted_keys()?;
        let on_record: Vec<Value> = keys
            .iter()
            .map(serde_json::to_value)
            .collect::<serde_json::Result<_>>()?;
        for k in &on_record {
            if !expected_keys.contains(k) {
                find(
                    format!("key:{}", k["public_key"].as_str().unwrap_or("?")),
                    "a trusted key no event records, or one edited since (trusted outside whorl key trust)".into(),
                );
            }
        }
        for k in &expected_keys {
            if !on_record.contains(k) {
                find(
                    format!("key:{}", k["public_key"].as_str().unwrap_or("?")),
                    "its event records a trusted key the table no longer holds as recorded".into(),
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
        let mut revision_rows: HashMap<i64, Vec<(i64, String, String)>> = HashMap::new();
        {
            let mut stmt = self.conn.prepare(
                "SELECT spectrum_id, number, metadata, created_by FROM revision ORDER BY spectrum_id, number",
            )?;
            let rows = stmt.query_map([], |r| {
                Ok((
                    r.get::<_, i64>(0)?,
                    r.get::<_, i64>(1)?,
                    r.get::<_, String>(2)?,
                    r.get::<_, String>(3)?,
                ))
            })?;
            for row in rows {
                let (id, n, m, by) = row?;
                revision_rows.entry(id).or_default().push((n, m, by));
            }
        }
        let mut review_rows: HashMap<i64, Vec<Review>> = HashMap::new();
        for id in expected.keys().chain(records.iter().map(|r| &r.id)) {
            if !review_rows.contains_key(id) {
                review_rows.insert(*id, self.reviews(*id)?);
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
            for (n, text, by) in rows {
                if let Some(want) = e.authors.get(n)
                    && want != by
                {
                    find(
                        id.clone(),
                        format!(
                            "revision {n} was written by {want} in its event but {by} on record (edited)"
                        ),
                    );
                }
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
            let signed = review_rows
                .get(&rec.id)
                .map(Vec::as_slice)
                .unwrap_or_default();
            if signed.len() != e.reviews.len() {
                find(
                    id.clone(),
                    format!(
                        "its sign-offs differ from those its events recorded ({} on record, {} in its events)",
                        signed.len(),
                        e.reviews.len()
                    ),
                );
            }
            for (row, want) in signed.iter().zip(&e.reviews) {
                let fields = want.differences(row);
                if !fields.is_empty() {
                    find(
                        format!("review:{}", row.id),
                        format!(
                            "the sign-off of {id} by {} differs from its event in: {} (edited)",
                            row.reviewer,
                            fields.join(", ")
                        ),
                    );
                }
            }
            if let Some(want) = &e.withdrawn_reason {
                let reason = self.withdrawn_reason(rec.id)?;
                if reason != *want {
                    find(
                        id.clone(),
                        match want {
                            Some(want) => format!(
                                "withdrawn for \"{}\" on record but \"{want}\" in its event (edited)",
                                reason.as_deref().unwrap_or("")
                            ),
                            None => format!(
                                "a withdrawal reason \"{}\" on record, but its events reinstated it (edited)",
                                reason.as_deref().unwrap_or("")
                            ),
                        },
                    );
                }
            }
            if let Some(want) = &e.submitted_by
                && *want != rec.submitted_by
            {
                find(
                    id.clone(),
                    format!(
                        "submitted by {} on record but {want} in its event (edited)",
                        rec.submitted_by
                    ),
                );
            }
            if let Some(want) = &e.imported_by
                && Some(want) != rec.imported_by.as_ref()
            {
                find(
                    id.clone(),
                    format!(
                        "imported by {} on record but {want} in its event (edited)",
                        rec.imported_by.as_deref().unwrap_or("nobody")
                    ),
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
                "the stored state hash sum does not match the searchable records".into(),
            );
        }

        // A record the replay above already found keeps that finding, which says more.
        let already: HashSet<String> = report.findings.iter().map(|f| f.record.clone()).collect();
        report.findings.extend(
            seal_findings
                .into_iter()
                .filter(|f| !already.contains(&f.record)),
        );

        // 3. Raw blobs and prepared forms, in parallel.
        let total = records.len();
        let recipes = self.recipes.clone();
        let done = std::sync::atomic::AtomicUsize::new(0);
        for chunk in records.chunks(512) {
            let mut inputs = Vec::with_capacity(chunk.len());
            for rec in chunk {
                let (blob, vector, peaks, coverage, y_unit, warnings): (Vec<u8>, Vec<u8>, String, Option<String>, String, String) = self.conn.query_row(
                    "SELECT s.raw, p.vector, p.peaks, p.coverage, p.y_unit, p.warnings FROM spectrum s JOIN prepared p ON p.spectrum_id = s.id WHERE s.id = ?1",
                    [rec.id],
                    |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?, r.get(5)?)),
                )?;
                let labels = rederive.contains(&rec.id).then_some((y_unit, warnings));
                inputs.push((rec, blob, vector, (peaks, coverage), labels));
            }
            let found: Vec<Finding> = inputs
                .par_iter()
                .flat_map_iter(|(rec, blob, vector, (peaks, coverage), labels)| {
                    let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
                    progress(n, total);
                    verify_blob(
                        &recipes,
                        rec,
                        blob,
                        vector,
                        (peaks, coverage.as_deref()),
                        labels.as_ref().map(|(u, w)| (u.as_str(), w.as_str())),
                    )
                })
                .collect();
            report.findings.extend(found);
        }
        report.spectra = total;
        report.unsealed = unsealed;

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

/// A spectrum prepared again, as stored: vector bytes, peaks JSON, peaks JSON without IR and
/// Raman areas, coverage JSON, and (y unit, warnings JSON).
type PreparedAgain = (Vec<u8>, String, String, Option<String>, (String, String));

fn verify_blob(
    recipes: &Recipes,
    rec: &SpectrumRecord,
    blob: &[u8],
    vector: &[u8],
    (peaks, coverage): (&str, Option<&str>),
    labels: Option<(&str, &str)>,
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
    let again = (|| -> Result<PreparedAgain> {
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
            (
                p.y_unit.name().to_string(),
                serde_json::to_string(&p.warnings)?,
            ),
        ))
    })();
    match again {
        // Libraries prepared before coverage was recorded hold NULL for every spectrum,
        // which reads as the whole grid; a recorded coverage must be the one prepared again.
        // The y unit and warnings a recipe change wrote are those prepared again.
        Ok((v, p, before_areas, c, (unit, warned)))
            if v == vector
                && (p == peaks || before_areas == peaks)
                && (coverage.is_none() || coverage == c.as_deref())
                && labels.is_none_or(|(u, w)| u == unit && w == warned) => {}
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

/// The most findings a recorded check keeps in its event (the count is always whole).
pub const RECORDED_FINDINGS: usize = 20;

/// A check as the audit trail records it: a `check` event on record `library`, appended by
/// [`Library::record_check`] after the check ran, so that the trail says when the chain was
/// last checked, by whom (signed in or asserted) and what was found. The replay in
/// [`Library::check`] passes over these events: they change no state.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct CheckRecord {
    /// The event's sequence number.
    pub seq: i64,
    /// When it was recorded (UTC, RFC 3339).
    pub at: String,
    /// Who ran the check.
    pub by: String,
    /// `signed-in` or `asserted`, as every event.
    pub identity: String,
    /// Events walked.
    pub events: usize,
    /// Spectra re-hashed and re-prepared.
    pub spectra: usize,
    /// How many inconsistencies were found.
    pub findings: usize,
    /// The first of them (at most [`RECORDED_FINDINGS`]).
    pub first_findings: Vec<Finding>,
}

impl Library {
    /// Records a check's result in the audit trail as a `check` event by `actor`, in one
    /// write transaction; returns the event's sequence number. Called after [`Library::check`]
    /// by the faces that run a check for someone (the server's check), so the trail shows when
    /// the chain was last checked and what was found.
    pub fn record_check(&mut self, actor: &str, report: &CheckReport) -> Result<i64> {
        let first: Vec<Value> = report
            .findings
            .iter()
            .take(RECORDED_FINDINGS)
            .map(|f| serde_json::json!({ "record": f.record, "problem": f.problem }))
            .collect();
        let payload = serde_json::json!({
            "events": report.events,
            "spectra": report.spectra,
            "findings": report.findings.len(),
            "first_findings": first,
        });
        // A check changes no spectrum, so the derived stores stay current (`write_trail`).
        self.write_trail(|tx| super::events::append_event(tx, actor, "check", "library", &payload))
    }

    /// The newest check recorded in the audit trail, if any.
    pub fn last_check(&self) -> Result<Option<CheckRecord>> {
        use rusqlite::OptionalExtension;
        let row: Option<(i64, String, String, String, String)> = self
            .conn
            .query_row(
                "SELECT seq, at, actor, identity, payload FROM event
                 WHERE action = 'check' AND record = 'library' ORDER BY seq DESC LIMIT 1",
                [],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?)),
            )
            .optional()?;
        let Some((seq, at, by, identity, payload)) = row else {
            return Ok(None);
        };
        let p: Value = serde_json::from_str(&payload).unwrap_or(Value::Null);
        let count = |k: &str| p[k].as_u64().unwrap_or(0) as usize;
        let first_findings = p["first_findings"]
            .as_array()
            .into_iter()
            .flatten()
            .map(|f| Finding {
                record: f["record"].as_str().unwrap_or_default().to_string(),
                problem: f["problem"].as_str().unwrap_or_default().to_string(),
            })
            .collect();
        Ok(Some(CheckRecord {
            seq,
            at,
            by,
            identity,
            events: count("events"),
            spectra: count("spectra"),
            findings: count("findings"),
            first_findings,
        }))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::Status;

    /// A recorded check, like an account change, touches no spectrum: the generation and the
    /// state hash stay, so the vector cache in use is still current and is reused, not built
    /// again; a spectrum added moves both and the next search builds a new one.
    #[test]
    fn a_recorded_check_leaves_the_vector_cache_current() {
        use crate::cache::kind_for;
        use crate::library::testing::{add, ir};
        use crate::library::{Role, Snapshot};
        use crate::score::Measure;
        use std::sync::Arc;
        let mut lib = Library::in_memory("t").unwrap();
        add(&mut lib, &ir(1, "acetone", "alice"));
        let kind = kind_for(Technique::Ir, Measure::default_for(Technique::Ir)).unwrap();
        let report = lib.check(&|_, _| {}).unwrap();
        let cache = lib.vector_cache(Technique::Ir, kind).unwrap();
        let before: Snapshot = lib.snapshot().unwrap();
        lib.record_check("alice", &report).unwrap();
        lib.add_account("erin", Role::Reader, "root").unwrap();
        assert_eq!(lib.snapshot().unwrap(), before);
        let again = lib.vector_cache(Technique::Ir, kind).unwrap();
        assert!(
            Arc::ptr_eq(&cache, &again),
            "the check made the cache rebuild"
        );
        add(&mut lib, &ir(2, "butanone", "bob"));
        assert_ne!(lib.snapshot().unwrap().generation, before.generation);
        let rebuilt = lib.vector_cache(Technique::Ir, kind).unwrap();
        assert!(
            !Arc::ptr_eq(&cache, &rebuilt),
            "a new spectrum left the cache as it was"
        );
        assert_eq!(rebuilt.rows(), 2);
    }

    #[test]
    fn a_recorded_check_is_the_last_check_and_checks_clean() {
        let mut lib = Library::in_memory("t").unwrap();
        assert_eq!(lib.last_check().unwrap(), None, "nothing recorded yet");
        let mut report = lib.check(&|_, _| {}).unwrap();
        report.findings.push(Finding {
            record: "spectrum:9".into(),
            problem: "made up for the test".into(),
        });
        let seq = lib.record_check("alice", &report).unwrap();
        let clean = lib.check(&|_, _| {}).unwrap();
        lib.record_check("bob", &clean).unwrap();
        let last = lib.last_check().unwrap().expect("recorded");
        assert_eq!(
            (last.by.as_str(), last.findings, last.seq),
            ("bob", 0, seq + 1)
        );
        assert_eq!(last.identity, ASSERTED);
        assert_eq!(
            last.events, 2,
            "the init and alice's check event were walked"
        );
        // The check events are part of the chain and change no state: the library checks clean.
        let again = lib.check(&|_, _| {}).unwrap();
        assert!(again.findings.is_empty(), "{:?}", again.findings);
        assert_eq!(again.events, 3);
        // Alice's record kept her finding.
        let events = lib.events(Some("library")).unwrap();
        let alice = events.iter().find(|e| e.actor == "alice").unwrap();
        assert_eq!(alice.action, "check");
        assert_eq!(alice.payload["findings"], 1);
        assert_eq!(alice.payload["first_findings"][0]["record"], "spectrum:9");
    }

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

    /// Events as a version of whorl before seals wrote them: each payload without its `rows`,
    /// the chain hashed again over them (what an older library holds).
    fn strip_seals(lib: &Library) {
        let rows: Vec<(i64, String, String, String, String, String, String)> = lib
            .conn
            .prepare(
                "SELECT seq, at, actor, action, record, payload, identity FROM event ORDER BY seq",
            )
            .unwrap()
            .query_map([], |r| {
                Ok((
                    r.get(0)?,
                    r.get(1)?,
                    r.get(2)?,
                    r.get(3)?,
                    r.get(4)?,
                    r.get(5)?,
                    r.get(6)?,
                ))
            })
            .unwrap()
            .collect::<rusqlite::Result<_>>()
            .unwrap();
        lib.conn
            .execute_batch("DROP TRIGGER event_no_update")
            .unwrap();
        let mut prev = GENESIS_HASH.to_string();
        for (seq, at, actor, action, record, payload, identity) in rows {
            let mut p: Value = serde_json::from_str(&payload).unwrap();
            p.as_object_mut().unwrap().remove(ROWS);
            let text = p.to_string();
            let payload_hash = sha256_hex(text.as_bytes());
            let hash = event_hash_with(
                seq,
                &at,
                &actor,
                &action,
                &record,
                &payload_hash,
                &prev,
                &identity,
            );
            lib.conn
                .execute(
                    "UPDATE event SET payload = ?2, payload_hash = ?3, prev_hash = ?4, hash = ?5 WHERE seq = ?1",
                    rusqlite::params![seq, text, payload_hash, prev, hash],
                )
                .unwrap();
            lib.conn
                .execute(
                    "UPDATE setting SET value = ?1 WHERE key = 'event_head'",
                    [format!("{seq}:{hash}")],
                )
                .unwrap();
            prev = hash;
        }
    }

    #[test]
    fn records_written_before_seals_are_counted_as_not_covered_and_not_failed() {
        use crate::library::testing::{add, ir};
        let mut lib = Library::in_memory("t").unwrap();
        let a = add(&mut lib, &ir(1, "acetone", "alice"));
        add(&mut lib, &ir(2, "butanone", "alice"));
        let sealed = lib.check(&|_, _| {}).unwrap();
        assert!(sealed.findings.is_empty(), "{:?}", sealed.findings);
        assert_eq!(sealed.unsealed, 0);
        let edit = "UPDATE spectrum SET file_name = 'other.csv' WHERE id = ?1";
        strip_seals(&lib);
        lib.conn
            .execute_batch("DROP TRIGGER spectrum_identity_is_fixed")
            .unwrap();
        let older = lib.check(&|_, _| {}).unwrap();
        assert!(older.findings.is_empty(), "{:?}", older.findings);
        assert_eq!(older.unsealed, 2);
        // Not covered: an edit of a column no event replays goes unseen in such a record...
        lib.conn.execute(edit, [a]).unwrap();
        assert!(lib.check(&|_, _| {}).unwrap().findings.is_empty());
        // ...until a new event on it seals its rows as they are then.
        lib.review(a, "bob", crate::library::Decision::Approve, None, None)
            .unwrap();
        let report = lib.check(&|_, _| {}).unwrap();
        assert_eq!(report.unsealed, 1);
        lib.conn
            .execute(
                "UPDATE spectrum SET file_name = 'third.csv' WHERE id = ?1",
                [a],
            )
            .unwrap();
        let findings = lib.check(&|_, _| {}).unwrap().findings;
        assert_eq!(findings.len(), 1, "{findings:?}");
        assert_eq!(findings[0].record, format!("spectrum:{a}"));
        assert!(
            findings[0]
                .problem
                .contains(&format!("spectrum:{a} edited")),
            "{findings:?}"
        );
    }

    #[test]
    fn after_a_recipe_change_the_prepared_unit_and_warnings_are_those_prepared_again() {
        use crate::library::testing::{add, ir};
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        let mut recipe = lib.recipe(Technique::Ir).unwrap().clone();
        recipe.grid.step *= 2.0;
        lib.change_recipe(recipe, "admin", "coarser grid", &|_, _| {})
            .unwrap();
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
        for edit in [
            "UPDATE prepared SET warnings = '[\"made up\"]' WHERE spectrum_id = ?1",
            "UPDATE prepared SET y_unit = 'transmittance' WHERE spectrum_id = ?1",
        ] {
            let before: (String, String) = lib
                .conn
                .query_row(
                    "SELECT y_unit, warnings FROM prepared WHERE spectrum_id = ?1",
                    [id],
                    |r| Ok((r.get(0)?, r.get(1)?)),
                )
                .unwrap();
            lib.conn.execute(edit, [id]).unwrap();
            let findings = lib.check(&|_, _| {}).unwrap().findings;
            assert_eq!(findings.len(), 1, "{edit}: {findings:?}");
            assert!(
                findings[0].problem.contains("prepared again"),
                "{findings:?}"
            );
            lib.conn
                .execute(
                    "UPDATE prepared SET y_unit = ?2, warnings = ?3 WHERE spectrum_id = ?1",
                    rusqlite::params![id, before.0, before.1],
                )
                .unwrap();
        }
    }

    #[test]
    fn a_generation_set_to_another_count_is_found_and_a_true_one_is_not() {
        use crate::library::testing::{add, ir};
        let mut lib = Library::in_memory("t").unwrap();
        add(&mut lib, &ir(1, "acetone", "alice"));
        add(&mut lib, &ir(2, "toluene", "alice"));
        // A write that leaves the generation alone (a recorded check) keeps them in step too.
        let report = lib.check(&|_, _| {}).unwrap();
        lib.record_check("alice", &report).unwrap();
        let generation = lib.generation().unwrap();
        assert!(lib.check(&|_, _| {}).unwrap().findings.is_empty());
        // Set back to what a stale cache records, or forward: either is another count.
        for other in [generation - 1, generation + 1, 0] {
            lib.conn
                .execute(
                    "UPDATE setting SET value = ?1 WHERE key = 'generation'",
                    [other.to_string()],
                )
                .unwrap();
            let findings = lib.check(&|_, _| {}).unwrap().findings;
            assert_eq!(findings.len(), 1, "{other}: {findings:?}");
            assert_eq!(findings[0].record, "setting:generation");
            assert!(findings[0].problem.contains("recorded"), "{findings:?}");
        }
    }

    #[test]
    fn a_compound_no_spectrum_names_is_still_sealed() {
        use crate::library::MetadataPatch;
        use crate::library::testing::{add, ir};
        let mut lib = Library::in_memory("t").unwrap();
        let a = add(&mut lib, &ir(1, "acetone", "alice"));
        let b = add(&mut lib, &ir(2, "propanone", "alice"));
        let c = add(&mut lib, &ir(3, "toluene", "alice"));
        let compound_of = |lib: &Library, id: i64| -> i64 {
            lib.conn
                .query_row(
                    "SELECT compound_id FROM spectrum WHERE id = ?1",
                    [id],
                    |r| r.get(0),
                )
                .unwrap()
        };
        // Left behind by a revision that renames its only spectrum...
        let renamed = compound_of(&lib, c);
        let patch = MetadataPatch {
            name: Some("methylbenzene".into()),
            ..Default::default()
        };
        lib.revise(c, &patch, "alice", Some("preferred name"))
            .unwrap();
        assert_ne!(compound_of(&lib, c), renamed);
        // ...and merged away.
        let merged = compound_of(&lib, b);
        lib.merge_compounds(merged, compound_of(&lib, a), "bob", "one substance", false)
            .unwrap();
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
        assert_eq!(report.unsealed, 0);
        for orphan in [renamed, merged] {
            for edit in [
                "UPDATE compound SET name = name || 'x' WHERE id = ?1",
                "UPDATE compound SET formula = 'C9H9' WHERE id = ?1",
                "UPDATE compound SET cas = '50-00-0' WHERE id = ?1",
            ] {
                let before: (String, Option<String>, Option<String>) = lib
                    .conn
                    .query_row(
                        "SELECT name, formula, cas FROM compound WHERE id = ?1",
                        [orphan],
                        |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
                    )
                    .unwrap();
                lib.conn.execute(edit, [orphan]).unwrap();
                let findings = lib.check(&|_, _| {}).unwrap().findings;
                lib.conn
                    .execute(
                        "UPDATE compound SET name = ?2, formula = ?3, cas = ?4 WHERE id = ?1",
                        rusqlite::params![orphan, before.0, before.1, before.2],
                    )
                    .unwrap();
                assert_eq!(findings.len(), 1, "{orphan} {edit}: {findings:?}");
                assert_eq!(findings[0].record, format!("compound:{orphan}"));
            }
        }
        // Deleted, with the trigger that forbids it dropped and foreign keys off first.
        lib.conn
            .execute_batch("DROP TRIGGER compound_no_delete; PRAGMA foreign_keys = OFF;")
            .unwrap();
        lib.conn
            .execute("DELETE FROM compound WHERE id = ?1", [renamed])
            .unwrap();
        let findings = lib.check(&|_, _| {}).unwrap().findings;
        assert!(
            findings
                .iter()
                .any(|f| f.record == format!("compound:{renamed}") && f.problem.contains("gone")),
            "{findings:?}"
        );
    }

    #[test]
    fn a_generation_that_is_no_count_is_found() {
        let lib = Library::in_memory("t").unwrap();
        lib.conn
            .execute(
                "UPDATE setting SET value = value || 'x' WHERE key = 'generation'",
                [],
            )
            .unwrap();
        let findings = lib.check(&|_, _| {}).unwrap().findings;
        assert_eq!(findings.len(), 1, "{findings:?}");
        assert_eq!(findings[0].record, "setting:generation");
    }

    #[test]
    fn status_names_are_the_stored_ones() {
        assert_eq!(Status::Verified.name(), "verified");
    }
}
