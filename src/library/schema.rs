//! The embedded migrations and the database's own version number.

use rusqlite::Connection;

use crate::error::Result;

/// The migrations, in order; migration `i` takes the database from version `i` to `i + 1`.
const MIGRATIONS: [&str; 7] = [
    include_str!("../../schema/0001_init.sql"),
    include_str!("../../schema/0002_curation.sql"),
    include_str!("../../schema/0003_coverage.sql"),
    include_str!("../../schema/0004_trust.sql"),
    include_str!("../../schema/0005_accounts.sql"),
    include_str!("../../schema/0006_reinstate.sql"),
    include_str!("../../schema/0007_compound_merge.sql"),
];

/// The schema version this build writes.
pub const SCHEMA_VERSION: i64 = MIGRATIONS.len() as i64;

/// The oldest schema version this build can open (and migrate forward).
pub const OLDEST_READABLE: i64 = 1;

/// The database's `PRAGMA user_version`.
pub fn version(conn: &Connection) -> Result<i64> {
    Ok(conn.query_row("PRAGMA user_version", [], |r| r.get(0))?)
}

/// Applies the migrations the database has not seen yet, in one transaction.
pub fn migrate(conn: &mut Connection) -> Result<()> {
    let from = version(conn)?;
    if from >= SCHEMA_VERSION {
        return Ok(());
    }
    let tx = conn.transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
    for sql in &MIGRATIONS[from as usize..] {
        tx.execute_batch(sql)?;
    }
    tx.pragma_update(None, "user_version", SCHEMA_VERSION)?;
    tx.commit()?;
    Ok(())
}

/// Sets the connection options every library connection uses.
pub fn configure(conn: &Connection, on_disk: bool) -> Result<()> {
    if on_disk {
        // WAL lets readers work while a writer commits; FULL makes every commit durable,
        // which an audit trail needs more than a few milliseconds per transaction.
        conn.pragma_update(None, "journal_mode", "WAL")?;
        conn.pragma_update(None, "synchronous", "FULL")?;
        // 32 MiB of page cache (the default is 2 MiB): fewer page reads while an import
        // grows the tables and indexes.
        conn.pragma_update(None, "cache_size", -32768)?;
        // Reads through a memory map of up to 1 GiB (default off): a search loads its best
        // candidates' prepared spectra without a read call per page. The vector caches are
        // mapped the same way.
        conn.pragma_update(None, "mmap_size", 1i64 << 30)?;
    }
    conn.pragma_update(None, "foreign_keys", "ON")?;
    conn.busy_timeout(busy_timeout())?;
    Ok(())
}

/// How long a command waits for another process's write transaction before giving up:
/// `WHORL_BUSY_TIMEOUT_MS`, else 10 s.
pub fn busy_timeout() -> std::time::Duration {
    let ms = std::env::var("WHORL_BUSY_TIMEOUT_MS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(10_000);
    std::time::Duration::from_millis(ms)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A database at version 3 (as libraries were before 0004) holding one added spectrum,
    /// migrated forward: who imported it is taken from its event, and the new guards hold.
    #[test]
    fn a_version_3_library_migrates_and_keeps_who_imported_it() {
        let mut conn = Connection::open_in_memory().unwrap();
        for sql in &MIGRATIONS[..3] {
            conn.execute_batch(sql).unwrap();
        }
        conn.pragma_update(None, "user_version", 3).unwrap();
        conn.execute_batch(
            "INSERT INTO recipe VALUES ('ir', '{}');
             INSERT INTO compound (id, key, name, created_at) VALUES (1, 'name:acetone', 'acetone', 't');
             INSERT INTO spectrum (id, compound_id, technique, status, file_name, file_sha256, raw_sha256, raw,
                                   x_unit, y_unit, submitted_by, created_at)
                 VALUES (1, 1, 'ir', 'pending', 'a.csv', 'f', 'r', x'00', 'cm-1', 'absorbance', 'a.analyst', 't');
             INSERT INTO event VALUES (1, 't', 'admin', 'init', 'library', '{}', 'h', 'g', 'h1');
             INSERT INTO event VALUES (2, 't', 'd.importer', 'add', 'spectrum:1', '{}', 'h', 'h1', 'h2');",
        )
        .unwrap();
        migrate(&mut conn).unwrap();
        assert_eq!(version(&conn).unwrap(), SCHEMA_VERSION);
        let imported_by: String = conn
            .query_row("SELECT imported_by FROM spectrum WHERE id = 1", [], |r| {
                r.get(0)
            })
            .unwrap();
        assert_eq!(imported_by, "d.importer");
        assert!(
            conn.execute("UPDATE spectrum SET submitted_by = 'x'", [])
                .is_err()
        );
        // The policy the migration 0002 set cannot change without its event.
        assert!(
            conn.execute(
                "UPDATE setting SET value = 'true' WHERE key = 'allow_self_review'",
                []
            )
            .is_err()
        );
    }
}
