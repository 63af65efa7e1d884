//! `backup`: a consistent copy of a library made while it is in use, with SQLite's online
//! backup API (<https://www.sqlite.org/backup.html>). The whole database is copied in one
//! step, inside one read transaction: under WAL that is a snapshot of one committed state,
//! taken without stopping writers (a server or CLI writing meanwhile neither waits nor lands
//! half in the copy).
//!
//! The copy holds `library.sqlite` and `whorl.toml`, the library's truth and its settings.
//! The text index and the vector caches are derived and are not copied: the first command on
//! the copy rebuilds them from the database.

use std::path::{Path, PathBuf};
use std::time::Duration;

use rusqlite::Connection;
use rusqlite::backup::StepResult;
use serde::Serialize;

use super::{DATABASE_FILE, Library};
use crate::config::CONFIG_FILE;
use crate::error::{Error, Result};

/// What a backup wrote.
#[derive(Debug, Clone, Serialize)]
pub struct BackupReport {
    /// The folder written.
    pub dest: PathBuf,
    /// The files copied, relative to it.
    pub files: Vec<String>,
    /// The database's size in bytes.
    pub bytes: u64,
    /// Events in the copy's audit trail.
    pub events: i64,
    /// The copy's chain head (`seq:hash`), for comparing with `whorl log` or a witness.
    pub event_head: Option<String>,
}

fn io(what: &str, path: &Path, e: std::io::Error) -> Error {
    Error::io(format!("{what} {}", path.display()), e)
}

/// Flushes a file or folder to disk.
fn sync(path: &Path) -> Result<()> {
    std::fs::File::open(path)
        .and_then(|f| f.sync_all())
        .map_err(|e| io("syncing", path, e))
}

impl Library {
    /// Copies the library into `dest`, a folder that does not exist yet or is empty, outside
    /// the library. The database is written to a temporary file, flushed and renamed into
    /// place, so `dest` never holds a half-written `library.sqlite`.
    pub fn backup(&self, dest: &Path) -> Result<BackupReport> {
        let root = self.root().ok_or_else(|| {
            Error::invalid(
                "a library held in memory has no folder to back up",
                "open a library folder",
            )
        })?;
        if dest.exists() {
            let empty = std::fs::read_dir(dest)
                .map_err(|e| io("reading", dest, e))?
                .next()
                .is_none();
            if !dest.is_dir() || !empty {
                return Err(Error::invalid(
                    format!("{} exists and is not an empty folder", dest.display()),
                    "give a new folder for each backup, e.g. backups/2024-05-01",
                ));
            }
        }
        std::fs::create_dir_all(dest).map_err(|e| io("creating", dest, e))?;
        if let (Ok(d), Ok(r)) = (dest.canonicalize(), root.canonicalize())
            && d.starts_with(&r)
        {
            let _ = std::fs::remove_dir(dest);
            return Err(Error::invalid(
                format!("{} is inside the library folder", dest.display()),
                "keep backups outside the library, ideally on another disk",
            ));
        }
        let partial = dest.join(format!("{DATABASE_FILE}.partial-{}", std::process::id()));
        let copied = (|| -> Result<()> {
            let mut target = Connection::open(&partial)?;
            let backup = rusqlite::backup::Backup::new(&self.conn, &mut target)?;
            // -1: every page in one step, so the copy is one snapshot of the source. A step
            // that finds the source or target locked is tried again (up to about 10 s).
            for _ in 0..200 {
                match backup.step(-1)? {
                    StepResult::Done => return Ok(()),
                    StepResult::More | StepResult::Busy | StepResult::Locked => {
                        std::thread::sleep(Duration::from_millis(50))
                    }
                    _ => std::thread::sleep(Duration::from_millis(50)),
                }
            }
            Err(Error::Changing {
                what: "the backup".into(),
            })
        })();
        if let Err(e) = copied {
            let _ = std::fs::remove_file(&partial);
            return Err(e);
        }
        sync(&partial)?;
        let db = dest.join(DATABASE_FILE);
        std::fs::rename(&partial, &db).map_err(|e| io("renaming into", &db, e))?;
        let mut files = vec![DATABASE_FILE.to_string()];
        let config = root.join(CONFIG_FILE);
        if config.is_file() {
            let to = dest.join(CONFIG_FILE);
            std::fs::copy(&config, &to).map_err(|e| io("copying", &config, e))?;
            sync(&to)?;
            files.push(CONFIG_FILE.to_string());
        }
        sync(dest)?;
        let copy = Connection::open(&db)?;
        let events: i64 = copy.query_row("SELECT count(*) FROM event", [], |r| r.get(0))?;
        let event_head: Option<String> = copy
            .query_row(
                "SELECT value FROM setting WHERE key = 'event_head'",
                [],
                |r| r.get(0),
            )
            .ok();
        let bytes = std::fs::metadata(&db)
            .map_err(|e| io("reading", &db, e))?
            .len();
        Ok(BackupReport {
            dest: dest.to_path_buf(),
            files,
            bytes,
            events,
            event_head,
        })
    }
}
