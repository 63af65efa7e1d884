//! Bulk reads for derived data: the prepared vectors of one technique in one read
//! transaction, so that a vector cache built from them matches one state hash exactly.

use crate::cache::{Snapshot, VectorRow};
use crate::error::Result;
use crate::library::Library;
use crate::library::records::{coverage_from, f32_from_bytes};
use crate::library::state_hash;
use crate::technique::Technique;

impl Library {
    /// The state hash, generation, content sum and highest spectrum id, read together.
    pub fn snapshot(&self) -> Result<Snapshot> {
        let tx = self.conn.unchecked_transaction()?;
        let snapshot = self.snapshot_in(&tx)?;
        tx.finish()?;
        Ok(snapshot)
    }

    /// [`Library::snapshot`] inside a read transaction already open.
    pub(super) fn snapshot_in(&self, tx: &rusqlite::Connection) -> Result<Snapshot> {
        let sum: String = tx.query_row(
            "SELECT value FROM setting WHERE key = 'content_sum'",
            [],
            |r| r.get(0),
        )?;
        let generation: String = tx.query_row(
            "SELECT value FROM setting WHERE key = 'generation'",
            [],
            |r| r.get(0),
        )?;
        let last_id: i64 = tx.query_row("SELECT coalesce(max(id), 0) FROM spectrum", [], |r| {
            r.get(0)
        })?;
        let sum = crate::library::ContentSum::from_hex(&sum).unwrap_or_default();
        Ok(Snapshot {
            state_hash: state_hash(
                &serde_json::to_string(&self.recipes.values().collect::<Vec<_>>())?,
                sum,
            ),
            generation: generation.parse().unwrap_or(0),
            sum: sum.0,
            last_id,
        })
    }

    /// Streams every searchable (not withdrawn) spectrum of a technique in ascending id order
    /// to `row`, after telling `start` how many there are, all inside one read transaction:
    /// the count, the rows and the returned [`Snapshot`] describe the same state even while
    /// another process writes.
    pub fn scan_vectors(
        &self,
        technique: Technique,
        start: &mut dyn FnMut(usize) -> Result<()>,
        row: &mut dyn FnMut(VectorRow) -> Result<()>,
    ) -> Result<Snapshot> {
        let tx = self.conn.unchecked_transaction()?;
        let snapshot = self.snapshot_in(&tx)?;
        let n: i64 = tx.query_row(
            "SELECT count(*) FROM spectrum WHERE technique = ?1 AND status != 'withdrawn'",
            [technique.name()],
            |r| r.get(0),
        )?;
        start(n as usize)?;
        // `spectrum` is walked in id order (NOT INDEXED, outer loop of the join), so the
        // ORDER BY needs no temporary B-tree: through the (technique, status) index SQLite
        // would sort every row, vectors included, before handing over the first.
        let mut stmt = tx.prepare(
            "SELECT s.id, s.status, p.vector, p.peaks, p.coverage FROM spectrum s NOT INDEXED
             CROSS JOIN prepared p ON p.spectrum_id = s.id
             WHERE s.technique = ?1 AND s.status != 'withdrawn' ORDER BY s.id",
        )?;
        let mut rows = stmt.query([technique.name()])?;
        while let Some(r) = rows.next()? {
            let status: String = r.get(1)?;
            let vector = r.get_ref(2)?.as_blob().map_err(rusqlite::Error::from)?;
            let peaks = r.get_ref(3)?.as_str().map_err(rusqlite::Error::from)?;
            row(VectorRow {
                spectrum_id: r.get(0)?,
                status: status.parse()?,
                vector: f32_from_bytes(vector),
                peaks: serde_json::from_str(peaks)?,
                coverage: coverage_from(
                    r.get_ref(4)?
                        .as_str_or_null()
                        .map_err(rusqlite::Error::from)?,
                )?,
            })?;
        }
        drop(rows);
        drop(stmt);
        tx.finish()?;
        Ok(snapshot)
    }

    /// How many searchable spectra of a technique there are, and how many peaks they have.
    pub fn vector_counts(&self, technique: Technique) -> Result<(usize, usize)> {
        let (n, peaks): (i64, i64) = self.conn.query_row(
            "SELECT count(*), coalesce(sum(json_array_length(p.peaks)), 0) FROM spectrum s
             JOIN prepared p ON p.spectrum_id = s.id
             WHERE s.technique = ?1 AND s.status != 'withdrawn'",
            [technique.name()],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )?;
        Ok((n as usize, peaks as usize))
    }

    /// The prepared vectors of the first `n` searchable spectra of a technique, by id: a
    /// sample a cache build looks at before it lays out its file.
    pub fn sample_vectors(&self, technique: Technique, n: usize) -> Result<Vec<Vec<f32>>> {
        let mut stmt = self.conn.prepare(
            "SELECT p.vector FROM spectrum s JOIN prepared p ON p.spectrum_id = s.id
             WHERE s.technique = ?1 AND s.status != 'withdrawn' ORDER BY s.id LIMIT ?2",
        )?;
        let rows = stmt.query_map(rusqlite::params![technique.name(), n as i64], |r| {
            r.get::<_, Vec<u8>>(0)
        })?;
        let mut out = Vec::new();
        for blob in rows {
            out.push(f32_from_bytes(&blob?));
        }
        Ok(out)
    }
}
