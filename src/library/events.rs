//! The audit trail: events chained by their hashes, appended inside the caller's transaction.

use rusqlite::{Connection, OptionalExtension, params};
use serde::{Deserialize, Serialize};

use super::state::put_setting;
use super::{Library, now};
use crate::error::Result;
use crate::spectrum::sha256_hex;

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
    /// `asserted` (a name given on the command line) or `signed-in` (an account that signed
    /// in to the server with its password or a token).
    #[serde(default = "asserted")]
    pub identity: String,
}

fn asserted() -> String {
    ASSERTED.to_string()
}

/// The identity of an event whose actor is a name given on the command line.
pub const ASSERTED: &str = "asserted";
/// The identity of an event whose actor signed in (session or token).
pub const SIGNED_IN: &str = "signed-in";

/// The payload key under which every event records the generation its transaction leaves.
pub const GENERATION: &str = "generation";

/// The hash of one event: SHA-256 over a JSON array of its fields, which makes the encoding
/// unambiguous whatever the fields contain. Asserted events hash as they always have; a
/// signed-in event adds its kind to the array, so that turning an asserted event into a
/// signed-in one (or back) breaks the chain.
#[allow(clippy::too_many_arguments)]
pub fn event_hash_with(
    seq: i64,
    at: &str,
    actor: &str,
    action: &str,
    record: &str,
    payload_hash: &str,
    prev_hash: &str,
    identity: &str,
) -> String {
    let mut fields = serde_json::json!([seq, at, actor, action, record, payload_hash, prev_hash]);
    if identity != ASSERTED
        && let Some(array) = fields.as_array_mut()
    {
        array.push(identity.into());
    }
    sha256_hex(fields.to_string().as_bytes())
}

/// The name of the connection's temporary table whose presence marks its writes as made by a
/// signed-in account ([`Library::act_signed_in`]).
const SIGNED_IN_MARK: &str = "whorl_signed_in";

/// Whether this connection writes as a signed-in account.
pub(super) fn identity_of(tx: &Connection) -> Result<&'static str> {
    let marked: bool = tx.query_row(
        "SELECT count(*) > 0 FROM sqlite_temp_master WHERE type = 'table' AND name = ?1",
        [SIGNED_IN_MARK],
        |r| r.get(0),
    )?;
    Ok(if marked { SIGNED_IN } else { ASSERTED })
}

/// The hash that starts the chain.
pub const GENESIS_HASH: &str = "0000000000000000000000000000000000000000000000000000000000000000";

/// The hash of an asserted event ([`event_hash_with`] with [`ASSERTED`]), for the tests.
#[cfg(test)]
pub fn event_hash(
    seq: i64,
    at: &str,
    actor: &str,
    action: &str,
    record: &str,
    payload_hash: &str,
    prev_hash: &str,
) -> String {
    event_hash_with(
        seq,
        at,
        actor,
        action,
        record,
        payload_hash,
        prev_hash,
        ASSERTED,
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
    // Every event records the generation its transaction leaves (a write bumps it before it
    // appends its events), so that `check` can compare the counter with the newest event.
    let generation: i64 = tx.query_row(
        "SELECT CAST(value AS INTEGER) FROM setting WHERE key = 'generation'",
        [],
        |r| r.get(0),
    )?;
    let mut payload = payload.clone();
    if let Some(object) = payload.as_object_mut() {
        object.insert(GENERATION.into(), generation.into());
    }
    // Events on a record seal the rows it stands for, as this transaction leaves them.
    let payload_text = super::seal::sealed_payload(tx, record, &payload)?.to_string();
    let payload_hash = sha256_hex(payload_text.as_bytes());
    let identity = identity_of(tx)?;
    let hash = event_hash_with(
        seq,
        &at,
        actor,
        action,
        record,
        &payload_hash,
        &prev_hash,
        identity,
    );
    tx.execute(
        "INSERT INTO event (seq, at, actor, action, record, payload, payload_hash, prev_hash, hash, identity)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)",
        params![
            seq,
            at,
            actor,
            action,
            record,
            payload_text,
            payload_hash,
            prev_hash,
            hash,
            identity
        ],
    )?;
    // The head of the chain is kept beside it, so that deleting the newest events is found too.
    put_setting(tx, "event_head", &format!("{seq}:{hash}"))?;
    Ok(seq)
}

impl Library {
    /// Marks every event this open library writes from now on as made by a signed-in account:
    /// a face that authenticated the caller (the server) calls it before writing as them. The
    /// mark lives in a temporary table of this connection, so it ends with the `Library`.
    pub fn act_signed_in(&self) -> Result<()> {
        self.conn.execute_batch(&format!(
            "CREATE TEMP TABLE IF NOT EXISTS {SIGNED_IN_MARK} (x INTEGER)"
        ))?;
        Ok(())
    }

    /// Events in sequence order, for the whole library or for one record (e.g. "spectrum:12").
    pub fn events(&self, record: Option<&str>) -> Result<Vec<Event>> {
        self.events_where("?1 IS NULL OR record = ?1", record)
    }

    /// Events of one action (e.g. "compound-merge"), in sequence order.
    pub fn events_of_action(&self, action: &str) -> Result<Vec<Event>> {
        self.events_where("action = ?1", Some(action))
    }

    /// Events matching `condition` (SQL over the event table, with `?1` bound to `param`).
    fn events_where(&self, condition: &str, param: Option<&str>) -> Result<Vec<Event>> {
        let mut stmt = self.conn.prepare(&format!(
            "SELECT seq, at, actor, action, record, payload, payload_hash, prev_hash, hash, identity
             FROM event WHERE {condition} ORDER BY seq"
        ))?;
        let rows = stmt.query_map([param], |r| {
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
                r.get::<_, String>(9)?,
            ))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (seq, at, actor, action, record, payload, payload_hash, prev_hash, hash, identity) =
                row?;
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
                identity,
            });
        }
        Ok(out)
    }

    /// The sequence number of the newest event.
    pub fn last_event(&self) -> Result<i64> {
        Ok(self
            .conn
            .query_row("SELECT coalesce(max(seq), 0) FROM event", [], |r| r.get(0))?)
    }

    /// Events after the given sequence number.
    pub fn events_since(&self, seq: i64) -> Result<Vec<Event>> {
        Ok(self
            .events(None)?
            .into_iter()
            .filter(|e| e.seq > seq)
            .collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::Decision;
    use crate::library::testing::{add, ir};

    /// A library with a few events of different kinds: init, two adds, a review.
    fn busy_library() -> Library {
        let mut lib = Library::in_memory("t").unwrap();
        let a = add(&mut lib, &ir(1, "acetone", "alice"));
        add(&mut lib, &ir(2, "butanone", "alice"));
        lib.review(a, "bob", Decision::Approve, None, None).unwrap();
        lib
    }

    /// The stored text of each event, as `check` reads it.
    fn raw_events(lib: &Library) -> Vec<(i64, String, String, String)> {
        let mut stmt = lib
            .conn
            .prepare("SELECT seq, payload, payload_hash, hash FROM event ORDER BY seq")
            .unwrap();
        stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))
            .unwrap()
            .collect::<rusqlite::Result<_>>()
            .unwrap()
    }

    /// Pins the event hash encoding, which existing libraries' chains depend on. The value is
    /// SHA-256 of the fields as a compact JSON array, computed independently with Python's
    /// `hashlib.sha256(json.dumps(fields, separators=(",", ":")).encode())`.
    #[test]
    fn the_event_hash_is_sha256_of_its_fields_as_a_json_array() {
        let payload_hash = sha256_hex(br#"{"a":1}"#);
        let hash = event_hash(
            7,
            "2024-05-01T12:00:00.000Z",
            "alice",
            "add",
            "spectrum:3",
            &payload_hash,
            GENESIS_HASH,
        );
        assert_eq!(
            hash,
            "7362aafbf64acfcbf9237c69049c86b5538ae90b80061c2808290bf0d2f31735"
        );
    }

    #[test]
    fn each_event_links_to_the_one_before() {
        let lib = busy_library();
        let events = lib.events(None).unwrap();
        let actions: Vec<&str> = events.iter().map(|e| e.action.as_str()).collect();
        assert_eq!(actions, ["init", "add", "add", "review"]);
        let mut previous = GENESIS_HASH.to_string();
        for (i, e) in events.iter().enumerate() {
            assert_eq!(e.seq, i as i64 + 1);
            assert_eq!(e.prev_hash, previous, "event {}", e.seq);
            let again = event_hash(
                e.seq,
                &e.at,
                &e.actor,
                &e.action,
                &e.record,
                &e.payload_hash,
                &e.prev_hash,
            );
            assert_eq!(again, e.hash, "event {}", e.seq);
            previous = e.hash.clone();
        }
        // The head kept beside the chain names the newest event.
        let last = events.last().unwrap();
        assert_eq!(
            lib.setting("event_head").unwrap(),
            Some(format!("{}:{}", last.seq, last.hash))
        );
        assert_eq!(lib.last_event().unwrap(), last.seq);
    }

    #[test]
    fn recomputing_the_hashes_finds_an_edited_payload() {
        let lib = busy_library();
        for (seq, payload, payload_hash, _) in raw_events(&lib) {
            assert_eq!(sha256_hex(payload.as_bytes()), payload_hash, "event {seq}");
        }
        // Edit the second event's payload behind the append-only trigger's back.
        lib.conn
            .execute_batch(
                "DROP TRIGGER event_no_update;
                 UPDATE event SET payload = replace(payload, 'acetone', 'acetane') WHERE seq = 2;",
            )
            .unwrap();
        let edited: Vec<i64> = raw_events(&lib)
            .into_iter()
            .filter(|(_, payload, payload_hash, _)| sha256_hex(payload.as_bytes()) != *payload_hash)
            .map(|e| e.0)
            .collect();
        assert_eq!(edited, [2]);
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(
            report
                .findings
                .iter()
                .any(|f| f.record == "event:2" && f.problem.contains("payload was edited")),
            "{:?}",
            report.findings
        );
    }

    #[test]
    fn signed_in_events_say_so_and_the_kind_is_held_by_the_chain() {
        let mut lib = busy_library();
        let asserted = lib.events(None).unwrap();
        assert!(asserted.iter().all(|e| e.identity == ASSERTED));
        lib.act_signed_in().unwrap();
        let c = add(&mut lib, &ir(3, "toluene", "alice"));
        let last = lib
            .events(Some(&format!("spectrum:{c}")))
            .unwrap()
            .pop()
            .unwrap();
        assert_eq!(last.identity, SIGNED_IN);
        // An asserted event hashes as before the kind existed; a signed-in one does not.
        assert_eq!(
            asserted[0].hash,
            event_hash(
                asserted[0].seq,
                &asserted[0].at,
                &asserted[0].actor,
                &asserted[0].action,
                &asserted[0].record,
                &asserted[0].payload_hash,
                &asserted[0].prev_hash
            )
        );
        assert_ne!(
            last.hash,
            event_hash(
                last.seq,
                &last.at,
                &last.actor,
                &last.action,
                &last.record,
                &last.payload_hash,
                &last.prev_hash
            )
        );
        assert!(lib.check(&|_, _| {}).unwrap().findings.is_empty());
        // Passing an asserted event off as signed in breaks the chain at that event.
        lib.conn
            .execute_batch(
                "DROP TRIGGER event_no_update;
                 UPDATE event SET identity = 'signed-in' WHERE seq = 2;",
            )
            .unwrap();
        let findings = lib.check(&|_, _| {}).unwrap().findings;
        assert!(
            findings
                .iter()
                .any(|f| f.record == "event:2" && f.problem.contains("do not match its hash")),
            "{findings:?}"
        );
    }

    #[test]
    fn events_can_be_read_per_record_and_since_a_point() {
        let lib = busy_library();
        let of_first: Vec<String> = lib
            .events(Some("spectrum:1"))
            .unwrap()
            .into_iter()
            .map(|e| e.action)
            .collect();
        assert_eq!(of_first, ["add", "review"]);
        let since: Vec<i64> = lib
            .events_since(2)
            .unwrap()
            .into_iter()
            .map(|e| e.seq)
            .collect();
        assert_eq!(since, [3, 4]);
    }
}
