//! Witness files: the head of the audit chain written outside the library, so that a rewrite
//! of the whole chain (every hash recomputed, the head updated) is found.
//!
//! In the manner of the signed tree heads of a certificate-transparency log (Laurie, Langley &
//! Kasper, RFC 6962, "Certificate Transparency", 2013, section 3.5): the log publishes its head
//! from time to time, anyone keeping an old head can check that today's log still extends it.
//! Here `whorl witness write FILE` appends the head (sequence number, hash, time) to a file the
//! administrator keeps elsewhere, and `check --witness FILE` verifies that the chain still holds
//! every recorded head at its place; `check` itself verifies that the chain is whole from there
//! on, so the chain extends every recorded head.

use std::io::Write as _;
use std::path::Path;

use rusqlite::OptionalExtension;

use super::check::Finding;
use super::{Library, now};
use crate::error::{Error, Location, Result};

const TAG: &str = "whorl-witness";

/// One recorded head.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct WitnessedHead {
    /// The line of the witness file.
    pub line: usize,
    /// Sequence number of the newest event then.
    pub seq: i64,
    /// Its hash.
    pub hash: String,
}

impl Library {
    /// Appends the chain's head to `file` (created if missing) and returns it.
    pub fn write_witness(&self, file: &Path) -> Result<(i64, String)> {
        let (seq, hash): (i64, String) = self.conn.query_row(
            "SELECT seq, hash FROM event ORDER BY seq DESC LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )?;
        let mut f = std::fs::OpenOptions::new()
            .create(true)
            .append(true)
            .open(file)
            .map_err(|e| Error::io(format!("opening {}", file.display()), e))?;
        writeln!(f, "{TAG} {seq} {hash} {}", now())
            .and_then(|()| f.sync_all())
            .map_err(|e| Error::io(format!("writing {}", file.display()), e))?;
        Ok((seq, hash))
    }

    /// Appends the chain's head to `file` unless the file's last line already records it
    /// (so a command that wrote nothing adds no line); returns the head when one was written.
    /// For `[audit] witness` in `whorl.toml`: every write appends its new head. A file inside
    /// the library folder is refused, since whoever can rewrite the library could rewrite it.
    pub fn witness_new_head(&self, file: &Path) -> Result<Option<(i64, String)>> {
        let root = self.root().map(Path::canonicalize);
        let inside = match (root, file.parent()) {
            (Some(Ok(root)), Some(parent)) => parent
                .canonicalize()
                .map(|p| p.starts_with(&root))
                .unwrap_or(false),
            _ => false,
        };
        if inside {
            return Err(Error::invalid(
                format!(
                    "the witness file {} is inside the library folder",
                    crate::error::excerpt(&file.display().to_string(), 200)
                ),
                "keep the witness file outside the library, where the library's users cannot rewrite it ([audit] witness in whorl.toml)",
            ));
        }
        let (seq, hash): (i64, String) = self.conn.query_row(
            "SELECT seq, hash FROM event ORDER BY seq DESC LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )?;
        if file.exists()
            && let Some(last) = read_witness(file)?.last()
        {
            if last.seq == seq && last.hash == hash {
                return Ok(None);
            }
            // A chain that no longer holds the last witnessed head is never witnessed again:
            // appending its head would put a rewritten chain on record as if it were sound.
            let held: Option<String> = self
                .conn
                .query_row("SELECT hash FROM event WHERE seq = ?1", [last.seq], |r| {
                    r.get(0)
                })
                .optional()?;
            if held.as_deref() != Some(last.hash.as_str()) {
                return Err(Error::Library {
                    path: self.root().map(Path::to_path_buf).unwrap_or_default(),
                    reason: format!(
                        "the audit chain no longer holds event {} as the witness file {} recorded it (line {}): the trail was rewritten or cut back, and its head is not witnessed",
                        last.seq,
                        crate::error::excerpt(&file.display().to_string(), 200),
                        last.line
                    ),
                    hint: "run `whorl check --witness FILE` and restore the library from a backup that the witness file agrees with".into(),
                });
            }
        }
        self.write_witness(file).map(Some)
    }

    /// Whether the chain holds every head recorded in `file`: one finding per head it does not.
    pub fn verify_witness(&self, file: &Path) -> Result<Vec<Finding>> {
        let heads = read_witness(file)?;
        let mut out = Vec::new();
        for h in &heads {
            let record = format!("witness:{}:{}", file.display(), h.line);
            let held: Option<String> = self
                .conn
                .query_row("SELECT hash FROM event WHERE seq = ?1", [h.seq], |r| {
                    r.get(0)
                })
                .optional()?;
            match held {
                Some(hash) if hash == h.hash => {}
                Some(hash) => out.push(Finding {
                    record,
                    problem: format!(
                        "the witness recorded event {} with hash {}, the chain holds {} there: the audit trail was rewritten",
                        h.seq,
                        &h.hash,
                        hash
                    ),
                }),
                None => out.push(Finding {
                    record,
                    problem: format!(
                        "the witness recorded event {}, which the chain no longer holds: events were removed",
                        h.seq
                    ),
                }),
            }
        }
        Ok(out)
    }
}

/// Reads a witness file: one `whorl-witness SEQ HASH TIME` line per head; blank lines and
/// lines starting with `#` are skipped.
pub fn read_witness(file: &Path) -> Result<Vec<WitnessedHead>> {
    let text = std::fs::read_to_string(file).map_err(|e| {
        Error::input(
            Location::file(file),
            format!("cannot read the witness file: {e}"),
            "give the file `whorl witness write` appends to",
        )
    })?;
    let mut out = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let l = line.trim();
        if l.is_empty() || l.starts_with('#') {
            continue;
        }
        let mut parts = l.split_whitespace();
        let parsed = match (parts.next(), parts.next(), parts.next()) {
            (Some(TAG), Some(seq), Some(hash))
                if hash.len() == 64 && hash.bytes().all(|b| b.is_ascii_hexdigit()) =>
            {
                seq.parse::<i64>().ok().map(|seq| WitnessedHead {
                    line: i + 1,
                    seq,
                    hash: hash.to_string(),
                })
            }
            _ => None,
        };
        out.push(parsed.ok_or_else(|| {
            Error::input(
                Location::line(file, i + 1),
                "not a witness line",
                "each line is 'whorl-witness SEQ HASH TIME', as `whorl witness write` appends it",
            )
        })?);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::events::event_hash;
    use crate::library::testing::{add, ir};

    #[test]
    fn a_rewritten_chain_no_longer_extends_the_witnessed_head() {
        let tmp = tempfile::tempdir().unwrap();
        let file = tmp.path().join("witness");
        let mut lib = Library::in_memory("t").unwrap();
        add(&mut lib, &ir(1, "acetone", "alice"));
        let (seq, _) = lib.write_witness(&file).unwrap();
        add(&mut lib, &ir(2, "butanone", "alice"));
        lib.write_witness(&file).unwrap();
        assert_eq!(read_witness(&file).unwrap().len(), 2);
        assert!(lib.verify_witness(&file).unwrap().is_empty());
        // A consistent rewrite: event `seq` is back-dated, it and every later hash is
        // recomputed and the head updated; the chain itself checks clean.
        lib.conn
            .execute_batch("DROP TRIGGER event_no_update")
            .unwrap();
        let rows: Vec<(i64, String, String, String, String, String)> = lib
            .conn
            .prepare("SELECT seq, at, actor, action, record, payload_hash FROM event WHERE seq >= ?1 ORDER BY seq")
            .unwrap()
            .query_map([seq], |r| {
                Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?, r.get(5)?))
            })
            .unwrap()
            .collect::<rusqlite::Result<_>>()
            .unwrap();
        let mut prev: String = lib
            .conn
            .query_row("SELECT hash FROM event WHERE seq = ?1", [seq - 1], |r| {
                r.get(0)
            })
            .unwrap();
        for (s, at, actor, action, record, payload_hash) in rows {
            let at = if s == seq {
                "2020-01-01T00:00:00.000Z".to_string()
            } else {
                at
            };
            let hash = event_hash(s, &at, &actor, &action, &record, &payload_hash, &prev);
            lib.conn
                .execute(
                    "UPDATE event SET at = ?2, prev_hash = ?3, hash = ?4 WHERE seq = ?1",
                    rusqlite::params![s, at, prev, hash],
                )
                .unwrap();
            lib.conn
                .execute(
                    "UPDATE setting SET value = ?1 WHERE key = 'event_head'",
                    [format!("{s}:{hash}")],
                )
                .unwrap();
            prev = hash;
        }
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
        // The witness finds both heads it recorded gone.
        let found = lib.verify_witness(&file).unwrap();
        assert_eq!(found.len(), 2, "{found:?}");
        assert!(found[0].problem.contains("rewritten"), "{found:?}");
    }

    #[test]
    fn a_damaged_witness_line_is_refused_by_line() {
        let tmp = tempfile::tempdir().unwrap();
        let file = tmp.path().join("witness");
        std::fs::write(&file, "# heads\nwhorl-witness 3 abc\n").unwrap();
        match read_witness(&file) {
            Err(Error::Input { at, .. }) => assert_eq!(at.line, Some(2)),
            other => panic!("{other:?}"),
        }
    }
}
