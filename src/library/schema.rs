//! The embedded migrations and the database's own version number.

use rusqlite::Connection;

use crate::error::Result;

/// The migrations, in order; migration `i` takes the database from version `i` to `i + 1`.
const MIGRATIONS: [&str; 4] = [
    include_str!("../../schema/0001_init.sql"),
    include_str!("../../schema/0002_curation.sql"),
    include_str!("../../schema/0003_coverage.sql"),
    include_str!("../../schema/0005_accounts.sql"),
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
