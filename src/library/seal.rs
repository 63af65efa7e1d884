//! Seals: every event on a record (`spectrum:N`, `account:N`, `token:N`, `key:HEX`) carries, in
//! its payload's `rows`, a digest of each table row the record stands for as the event's
//! transaction left it. `check` computes the same digests from the tables and compares them
//! with the newest event of each record, so an edit of any sealed column, a changed row id, an
//! added or a deleted row is found, whatever the column. Events written before seals existed
//! carry none; `check` counts those records as not covered instead of failing them.
//!
//! A row's digest is SHA-256 over a canonical serialisation: a JSON object of its non-NULL
//! columns, keys sorted (a column added later by a migration, NULL in older rows, leaves their
//! digests unchanged). State that events already replay field by field and that a writer must
//! change after its event (a spectrum's `status` and `withdrawn_reason`: the reinstatement
//! trigger wants the event first) is left out; so are the raw points (sealed by `raw_sha256`,
//! which `check` re-hashes) and the prepared vector, peaks and coverage (derived, prepared
//! again by `check`).

use std::collections::BTreeMap;

use rusqlite::types::ValueRef;
use rusqlite::{Connection, params};
use serde_json::{Map, Value};

use crate::error::Result;
use crate::spectrum::sha256_hex;

/// The payload key that holds an event's seal.
pub const ROWS: &str = "rows";

/// One sealed row: its name (`compound:3`, `revision:7/2`) and the query that reads it, whose
/// first column is that name and the others are the sealed columns.
struct Part {
    sql: &'static str,
}

const SPECTRUM_PARTS: [Part; 5] = [
    Part {
        sql: "SELECT 'spectrum:' || id, id, compound_id, technique, current_revision, file_name,
                     file_sha256, raw_sha256, x_unit, y_unit, submitted_by, imported_by, created_at
              FROM spectrum WHERE id = ?1",
    },
    Part {
        sql: "SELECT 'compound:' || c.id, c.id, c.key, c.name, c.formula, c.cas, c.created_at,
                     c.merged_into
              FROM compound c JOIN spectrum s ON s.compound_id = c.id WHERE s.id = ?1",
    },
    Part {
        sql: "SELECT 'revision:' || spectrum_id || '/' || number, spectrum_id, number, metadata,
                     created_at, created_by, reason, compound_id
              FROM revision WHERE spectrum_id = ?1",
    },
    Part {
        sql: "SELECT 'review:' || id, id, spectrum_id, revision, reviewer, at, decision, meaning,
                     note, imported_from
              FROM review WHERE spectrum_id = ?1",
    },
    Part {
        sql: "SELECT 'prepared:' || spectrum_id, spectrum_id, y_unit, warnings
              FROM prepared WHERE spectrum_id = ?1",
    },
];

/// A compound row by its id, with the same columns as a spectrum's compound above, so both
/// give one row the same digest.
const COMPOUND_PART: Part = Part {
    sql: "SELECT 'compound:' || c.id, c.id, c.key, c.name, c.formula, c.cas, c.created_at,
                 c.merged_into
          FROM compound c WHERE c.id = ?1",
};

/// The payload key of an event that seals several records (a compound merge): each record's
/// row names, whose digests are in [`ROWS`].
pub const SEALED: &str = "sealed";

const ACCOUNT_PARTS: [Part; 1] = [Part {
    sql: "SELECT 'account:' || id, id, name, key, role, password, created_at, disabled_at,
                 disabled_reason, locked_until
          FROM account WHERE id = ?1",
}];

const TOKEN_PARTS: [Part; 1] = [Part {
    sql: "SELECT 'token:' || id, id, account_id, label, sha256, created_at, expires_at, revoked_at
          FROM token WHERE id = ?1",
}];

const KEY_PARTS: [Part; 1] = [Part {
    sql: "SELECT 'trusted_key:' || id, id, name, public_key, trusted_by, trusted_at, reason
          FROM trusted_key WHERE public_key = ?1",
}];

/// Whether events on `record` are sealed.
pub fn is_sealed(record: &str) -> bool {
    parts(record).is_some()
}

fn parts(record: &str) -> Option<(&'static [Part], rusqlite::types::Value)> {
    use rusqlite::types::Value as V;
    let (kind, key) = record.split_once(':')?;
    let id = || key.parse::<i64>().ok().map(V::Integer);
    Some(match kind {
        "spectrum" => (&SPECTRUM_PARTS[..], id()?),
        "account" => (&ACCOUNT_PARTS[..], id()?),
        "token" => (&TOKEN_PARTS[..], id()?),
        "key" => (&KEY_PARTS[..], V::Text(key.to_string())),
        _ => return None,
    })
}

/// The digests of the rows `record` stands for, by row name; `None` for a record that is not
/// sealed (`library`, `recipe:ir`).
pub fn seal(conn: &Connection, record: &str) -> Result<Option<BTreeMap<String, String>>> {
    let Some((parts, key)) = parts(record) else {
        return Ok(None);
    };
    let mut out = BTreeMap::new();
    digest_rows(conn, parts, &key, &mut out)?;
    Ok(Some(out))
}

/// The digest of compound `id`'s row, by its row name (`compound:N`); empty when there is no
/// such compound.
pub fn compound_seal(conn: &Connection, id: i64) -> Result<BTreeMap<String, String>> {
    let mut out = BTreeMap::new();
    digest_rows(
        conn,
        std::slice::from_ref(&COMPOUND_PART),
        &rusqlite::types::Value::Integer(id),
        &mut out,
    )?;
    Ok(out)
}

fn digest_rows(
    conn: &Connection,
    parts: &[Part],
    key: &rusqlite::types::Value,
    out: &mut BTreeMap<String, String>,
) -> Result<()> {
    for part in parts {
        let mut stmt = conn.prepare_cached(part.sql)?;
        let names: Vec<String> = stmt.column_names().skip(1).map(|s| s.to_string()).collect();
        let mut rows = stmt.query(params![key])?;
        while let Some(row) = rows.next()? {
            let name: String = row.get(0)?;
            let mut object = Map::new();
            for (i, column) in names.iter().enumerate() {
                let value = match row.get_ref(i + 1)? {
                    ValueRef::Null => continue,
                    ValueRef::Integer(n) => Value::from(n),
                    ValueRef::Real(x) => Value::from(x),
                    ValueRef::Text(t) => Value::from(String::from_utf8_lossy(t).into_owned()),
                    ValueRef::Blob(b) => Value::from(format!("blob:{}", sha256_hex(b))),
                };
                object.insert(column.clone(), value);
            }
            // serde_json's map keeps its keys sorted, so the text is canonical.
            let digest = sha256_hex(Value::Object(object).to_string().as_bytes());
            out.insert(name, digest);
        }
    }
    Ok(())
}

/// `payload` with the seal of `record` added under [`ROWS`] (unchanged for a record that is not
/// sealed, or a payload that is not a JSON object).
pub fn sealed_payload(conn: &Connection, record: &str, payload: &Value) -> Result<Value> {
    let mut payload = payload.clone();
    if let (Some(rows), Some(object)) = (seal(conn, record)?, payload.as_object_mut()) {
        object.insert(ROWS.into(), serde_json::to_value(rows)?);
    }
    Ok(payload)
}

/// `payload` with the seals of several records and of compound rows: [`ROWS`] holds the
/// digests of all their rows, [`SEALED`] each record's row names, and each compound of
/// `compounds` is sealed as `compound:N` (under its own name in [`SEALED`] too). For an event
/// that changes the rows of many records at once, such as a compound merge; `check` then
/// compares each of `records` with this event when it is the newest that seals it.
pub fn sealed_payload_of(
    conn: &Connection,
    records: &[String],
    compounds: &[i64],
    payload: &Value,
) -> Result<Value> {
    let mut rows = BTreeMap::new();
    let mut names: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for record in records {
        if let Some(sealed) = seal(conn, record)? {
            names.insert(record.clone(), sealed.keys().cloned().collect());
            rows.extend(sealed);
        }
    }
    for &id in compounds {
        let sealed = compound_seal(conn, id)?;
        names.insert(format!("compound:{id}"), sealed.keys().cloned().collect());
        rows.extend(sealed);
    }
    let mut payload = payload.clone();
    if let Some(object) = payload.as_object_mut() {
        object.insert(ROWS.into(), serde_json::to_value(rows)?);
        object.insert(SEALED.into(), serde_json::to_value(names)?);
    }
    Ok(payload)
}

/// The seals an event carries, by record: its own record's for an ordinary event (`None`
/// when it carries none, as events written before seals), or each sealed record of
/// [`SEALED`] with its rows picked out of [`ROWS`].
pub fn event_seals(
    record: &str,
    payload: &Value,
) -> Vec<(String, Option<BTreeMap<String, String>>)> {
    let rows: Option<BTreeMap<String, String>> = payload
        .get(ROWS)
        .and_then(|r| serde_json::from_value(r.clone()).ok());
    let Some(sealed) = payload.get(SEALED).and_then(Value::as_object) else {
        return if is_sealed(record) {
            vec![(record.to_string(), rows)]
        } else {
            Vec::new()
        };
    };
    let rows = rows.unwrap_or_default();
    sealed
        .iter()
        .filter(|(r, _)| is_sealed(r))
        .map(|(r, names)| {
            let picked = names
                .as_array()
                .into_iter()
                .flatten()
                .filter_map(Value::as_str)
                .map(|n| (n.to_string(), rows.get(n).cloned().unwrap_or_default()))
                .collect();
            (r.clone(), Some(picked))
        })
        .collect()
}

/// The rows whose digests differ between a seal and the tables now: (row, what happened).
pub fn differences(
    sealed: &BTreeMap<String, String>,
    now: &BTreeMap<String, String>,
) -> Vec<(String, &'static str)> {
    let mut out = Vec::new();
    for (row, digest) in sealed {
        match now.get(row) {
            None => out.push((row.clone(), "missing")),
            Some(d) if d != digest => out.push((row.clone(), "edited")),
            Some(_) => {}
        }
    }
    for row in now.keys() {
        if !sealed.contains_key(row) {
            out.push((row.clone(), "added"));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::Library;
    use crate::library::testing::{add, ir};

    #[test]
    fn a_row_digest_is_sha256_of_its_sorted_non_null_columns() {
        let conn = Connection::open_in_memory().unwrap();
        conn.execute_batch(
            "CREATE TABLE trusted_key (id INTEGER PRIMARY KEY, name TEXT, public_key TEXT,
                 trusted_by TEXT, trusted_at TEXT, reason TEXT);
             INSERT INTO trusted_key VALUES (4, 'lab', 'ab', 'q', '2026-01-01', NULL);",
        )
        .unwrap();
        let rows = seal(&conn, "key:ab").unwrap().unwrap();
        // Computed independently with Python: hashlib.sha256(json.dumps({"id": 4, "name":
        // "lab", "public_key": "ab", "trusted_at": "2026-01-01", "trusted_by": "q"},
        // sort_keys=True, separators=(",", ":")).encode()).hexdigest()
        let text =
            r#"{"id":4,"name":"lab","public_key":"ab","trusted_at":"2026-01-01","trusted_by":"q"}"#;
        assert_eq!(rows["trusted_key:4"], sha256_hex(text.as_bytes()));
        assert_eq!(rows.len(), 1);
        assert_eq!(seal(&conn, "library").unwrap(), None);
    }

    #[test]
    fn an_add_event_seals_the_spectrum_its_compound_revision_and_prepared_rows() {
        let mut lib = Library::in_memory("t").unwrap();
        let id = add(&mut lib, &ir(1, "acetone", "alice"));
        let event = lib
            .events(Some(&format!("spectrum:{id}")))
            .unwrap()
            .pop()
            .unwrap();
        let names: Vec<&String> = event.payload[ROWS].as_object().unwrap().keys().collect();
        assert_eq!(
            names,
            [
                "compound:1",
                &format!("prepared:{id}"),
                &format!("revision:{id}/1"),
                &format!("spectrum:{id}")
            ]
        );
        let now = seal(&lib.conn, &format!("spectrum:{id}")).unwrap().unwrap();
        let sealed: BTreeMap<String, String> =
            serde_json::from_value(event.payload[ROWS].clone()).unwrap();
        assert!(differences(&sealed, &now).is_empty());
        lib.conn
            .execute("UPDATE compound SET cas = '67-64-1'", [])
            .unwrap();
        let now = seal(&lib.conn, &format!("spectrum:{id}")).unwrap().unwrap();
        assert_eq!(
            differences(&sealed, &now),
            [("compound:1".to_string(), "edited")]
        );
    }
}
