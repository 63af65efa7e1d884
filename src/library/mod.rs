//! The library on disk: `library.sqlite` (the truth) and `text-index/` (derived).

mod accounts;
mod backup;
mod browse;
mod bundle;
mod bundle_import;
mod caches;
mod check;
mod compound;
mod curation;
mod events;
mod find;
mod identity;
mod import;
mod keys;
mod manifest;
mod recipe_change;
mod records;
mod review;
mod schema;
mod seal;
mod stage;
mod state;
mod state_hash;
mod store;
pub mod synthetic;
#[cfg(test)]
mod testing;
mod vectors;
mod witness;

pub use crate::cache::{Snapshot, VectorRow};
pub use crate::spectrum::{Metadata, Status};
pub use accounts::{
    Account, Capability, MIN_PASSWORD_CHARS, PASSWORD_PARAMS, Role, TOKEN_PREFIX, Token,
    check_password_rules, hash_password, random_bytes, verify_password,
};
pub use backup::BackupReport;
pub use browse::{Browse, BrowseSort, Browsed, Listed};
pub use bundle::{BUNDLE_FORMAT, BundleInfo, ExportReport, verify_bundle};
pub use bundle_import::{Acceptance, BundleImport, Trust};
pub use caches::{BuildProgress, tail_limit};
pub use check::{CheckRecord, CheckReport, Finding, RECORDED_FINDINGS};
pub use compound::{CompoundRecord, Merge};
pub use curation::{MetadataPatch, RevisionInfo, StatusChange};
pub use events::{ASSERTED, Event, SIGNED_IN};
pub use find::Found;
pub use identity::{MAX_NAME_CHARS, Person, same_person};
pub use import::{BATCH, ImportReport, RowReport, import_rows};
pub use keys::{BundleSignature, KeyPair, PublicKey, SIGNATURE_FILE, TrustedKey};
pub use manifest::{
    ManifestPaths, ManifestRow, extra_key, read_manifest, read_manifest_with, resolve_within,
};
pub use recipe_change::RecipeChange;
pub use records::{Candidate, HitRecord, Review, SpectrumRecord, Stats, Summary};
pub use review::Decision;
pub use schema::{OLDEST_READABLE, SCHEMA_VERSION};
pub use stage::{
    Recipes, Staged, Submission, normalise_metadata, prepare_raw, prepare_stored, read_and_prepare,
    stage, usual_x_unit,
};
pub use state_hash::{ContentSum, record_hash, state_hash};
pub use store::{Outcome, normalised_name};
pub use witness::{WitnessedHead, read_witness};

use std::path::{Path, PathBuf};

use rusqlite::{Connection, OptionalExtension, params};

use crate::error::{Error, Result};
use crate::prepare::Recipe;
use crate::technique::Technique;
use crate::text::TextIndex;

/// The database file inside a library folder.
pub const DATABASE_FILE: &str = "library.sqlite";
/// The text index folder inside a library folder.
pub const TEXT_INDEX_DIR: &str = "text-index";
/// Text-index updates held back during a bulk import are written once this many wait.
const TEXT_DEFER_LIMIT: usize = 20_000;

/// An open library.
pub struct Library {
    root: Option<PathBuf>,
    conn: Connection,
    recipes: Recipes,
    text: TextIndex,
    /// Set when the text index could not be brought up to date (another process holds its
    /// writer lock); it is derived data, so the command goes on and says so.
    text_behind: std::cell::Cell<bool>,
    /// While a bulk import runs, the ids whose text-index update waits for its end, and the
    /// generation of the last commit (see [`Library::defer_text`]).
    text_deferred: std::cell::RefCell<Option<(Vec<i64>, i64)>>,
    /// Vector caches mapped by this process (derived data, see `crate::cache`).
    caches: caches::Caches,
    /// SQLite's `PRAGMA data_version` when [`Library::catch_up`] last read the recipes.
    seen_version: std::cell::Cell<Option<i64>>,
    /// The database file this handle opened, as the file system names it (device and inode on
    /// Unix), so [`Library::catch_up`] notices a library removed or replaced (a backup moved
    /// into place) under a handle that still reads the old, unlinked file.
    opened_file: Option<FileIdentity>,
}

/// Which file a path names: device and inode where the platform tells them, else nothing more
/// than that the path exists.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct FileIdentity(u64, u64);

impl FileIdentity {
    /// The identity of the file at `path`; `None` when nothing is there.
    fn of(path: &Path) -> Option<FileIdentity> {
        let meta = std::fs::metadata(path).ok()?;
        #[cfg(unix)]
        {
            use std::os::unix::fs::MetadataExt;
            Some(FileIdentity(meta.dev(), meta.ino()))
        }
        #[cfg(not(unix))]
        {
            let _ = meta;
            Some(FileIdentity(0, 0))
        }
    }
}

/// The default recipe of every technique.
pub fn default_recipes() -> Recipes {
    Technique::ALL
        .iter()
        .map(|&t| (t, Recipe::default_for(t)))
        .collect()
}

/// Checks recipes before a library is created from them: each under its own technique, each
/// grid valid.
fn check_recipes(recipes: &Recipes) -> Result<()> {
    for (t, r) in recipes {
        if r.technique != *t {
            return Err(Error::invalid(
                format!("a {} recipe was given for {t}", r.technique),
                "give each technique its own recipe",
            ));
        }
        r.grid.validate()?;
    }
    Ok(())
}

/// The current time, UTC, RFC 3339 with milliseconds.
pub fn now() -> String {
    chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Millis, true)
}

impl Library {
    /// Creates a new library in `root` with the default recipes. Refuses a folder that already
    /// holds a library.
    pub fn init(root: &Path, actor: &str) -> Result<Library> {
        Library::init_with(root, actor, default_recipes())
    }

    /// Creates a new library in `root` with the given recipes (one per technique; techniques
    /// missing from `recipes` get their default). Refuses a folder that already holds a library.
    pub fn init_with(root: &Path, actor: &str, recipes: Recipes) -> Result<Library> {
        check_recipes(&recipes)?;
        let db = root.join(DATABASE_FILE);
        if db.exists() {
            return Err(Error::Library {
                path: root.to_path_buf(),
                reason: "already holds a library".into(),
                hint: "use the existing library, or choose another folder with --library".into(),
            });
        }
        std::fs::create_dir_all(root)
            .map_err(|e| Error::io(format!("creating {}", root.display()), e))?;
        let conn = Connection::open(&db)?;
        let opened_file = FileIdentity::of(&db);
        schema::configure(&conn, true)?;
        let text = TextIndex::open_or_create(&root.join(TEXT_INDEX_DIR))?;
        let mut lib = Library {
            root: Some(root.to_path_buf()),
            conn,
            recipes: Recipes::new(),
            text,
            text_behind: Default::default(),
            text_deferred: Default::default(),
            caches: Default::default(),
            seen_version: Default::default(),
            opened_file,
        };
        lib.initialise(actor, recipes)?;
        Ok(lib)
    }

    /// A library held in memory, for tests.
    pub fn in_memory(actor: &str) -> Result<Library> {
        Library::in_memory_with(actor, default_recipes())
    }

    /// A library held in memory with the given recipes, for tests and evaluations.
    pub fn in_memory_with(actor: &str, recipes: Recipes) -> Result<Library> {
        check_recipes(&recipes)?;
        let conn = Connection::open_in_memory()?;
        schema::configure(&conn, false)?;
        let mut lib = Library {
            root: None,
            conn,
            recipes: Recipes::new(),
            text: TextIndex::in_ram()?,
            text_behind: Default::default(),
            text_deferred: Default::default(),
            caches: Default::default(),
            seen_version: Default::default(),
            opened_file: None,
        };
        lib.initialise(actor, recipes)?;
        Ok(lib)
    }

    fn initialise(&mut self, actor: &str, given: Recipes) -> Result<()> {
        schema::migrate(&mut self.conn)?;
        let mut recipes = default_recipes();
        recipes.extend(given);
        let tx = self
            .conn
            .transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
        for (t, r) in &recipes {
            tx.execute(
                "INSERT INTO recipe (technique, recipe) VALUES (?1, ?2)",
                params![t.name(), serde_json::to_string(r)?],
            )?;
        }
        let created = now();
        for (k, v) in [
            ("created_at", created.as_str()),
            ("created_by_version", env!("CARGO_PKG_VERSION")),
            ("generation", "0"),
            ("content_sum", &ContentSum::default().to_hex()),
        ] {
            tx.execute(
                "INSERT INTO setting (key, value) VALUES (?1, ?2)",
                params![k, v],
            )?;
        }
        // The settings that say where the library came from, so that `check` can replay them.
        let payload = serde_json::json!({
            "recipes": recipes.values().collect::<Vec<_>>(),
            "settings": { "created_at": created, "created_by_version": env!("CARGO_PKG_VERSION") },
        });
        events::append_event(&tx, actor, "init", "library", &payload)?;
        tx.commit()?;
        self.recipes = recipes;
        self.text.rebuild([], 0)?;
        Ok(())
    }

    /// Opens an existing library, migrating an older schema forward and rebuilding the text
    /// index if it is behind the database.
    pub fn open(root: &Path) -> Result<Library> {
        Library::open_with(root, true)
    }

    /// [`Library::open`] without rebuilding a text index that is behind: for a server's
    /// reading requests, which would otherwise each rebuild the whole index in the moment
    /// between a write's commit and its index update (or after an index update another writer
    /// kept from its lock). Metadata queries answered meanwhile say the index is behind
    /// ([`Library::text_index_behind`]); the server's next write, or any command, brings it up
    /// to date.
    pub fn open_without_text_refresh(root: &Path) -> Result<Library> {
        Library::open_with(root, false)
    }

    /// Makes a `Library` kept open from one server request to the next see the library as
    /// it is now, as a fresh [`Library::open_without_text_refresh`] would: when another
    /// connection has committed since (SQLite's `PRAGMA data_version` moved) the schema version
    /// is checked again and the recipes are read again, and the text index's reader moves to
    /// the index's newest commit. Nothing is rebuilt; the vector caches are checked against
    /// the database at each use anyway. Refused while a transaction is open. After an error
    /// the handle should be dropped and the library opened afresh.
    pub fn catch_up(&mut self) -> Result<()> {
        let stale = |reason: String| Error::Library {
            path: self.root.clone().unwrap_or_default(),
            reason,
            hint: "open the library again".into(),
        };
        if !self.conn.is_autocommit() {
            return Err(stale("a transaction is still open on this handle".into()));
        }
        if let (Some(root), Some(opened)) = (&self.root, self.opened_file) {
            match FileIdentity::of(&root.join(DATABASE_FILE)) {
                None => return Err(stale(format!("its {DATABASE_FILE} is gone"))),
                Some(now) if now != opened => {
                    return Err(stale(format!(
                        "its {DATABASE_FILE} was replaced since this handle opened it"
                    )));
                }
                Some(_) => {}
            }
        }
        let version: i64 = self
            .conn
            .query_row("PRAGMA data_version", [], |r| r.get(0))?;
        if self.seen_version.get() != Some(version) {
            let schema = schema::version(&self.conn)?;
            if schema != SCHEMA_VERSION {
                return Err(stale(format!(
                    "schema version {schema} since it was opened; this handle reads {SCHEMA_VERSION}"
                )));
            }
            self.recipes = state::load_recipes(&self.conn)?;
            self.seen_version.set(Some(version));
        }
        self.text.catch_up()?;
        self.text_behind.set(false);
        Ok(())
    }

    fn open_with(root: &Path, refresh_text: bool) -> Result<Library> {
        let db = root.join(DATABASE_FILE);
        if !db.is_file() {
            return Err(Error::Library {
                path: root.to_path_buf(),
                reason: format!("no {DATABASE_FILE} here"),
                hint: "create one with `whorl init --library DIR`, or point --library / WHORL_LIBRARY at an existing library".into(),
            });
        }
        let mut conn = Connection::open(&db)?;
        let opened_file = FileIdentity::of(&db);
        schema::configure(&conn, true)?;
        let version = schema::version(&conn)?;
        if !(OLDEST_READABLE..=SCHEMA_VERSION).contains(&version) {
            return Err(Error::Library {
                path: root.to_path_buf(),
                reason: format!(
                    "schema version {version}; this whorl reads {OLDEST_READABLE}..{SCHEMA_VERSION}"
                ),
                hint: if version > SCHEMA_VERSION {
                    "use a newer whorl".into()
                } else {
                    "export it with the whorl that made it".into()
                },
            });
        }
        schema::migrate(&mut conn)?;
        let recipes = state::load_recipes(&conn)?;
        let text = TextIndex::open_or_create(&root.join(TEXT_INDEX_DIR))?;
        let lib = Library {
            root: Some(root.to_path_buf()),
            conn,
            recipes,
            text,
            text_behind: Default::default(),
            text_deferred: Default::default(),
            caches: Default::default(),
            seen_version: Default::default(),
            opened_file,
        };
        if refresh_text && lib.refresh_text_index().is_err() {
            lib.text_behind.set(true);
        }
        // Temporary cache files of builds killed before they finished (derived data).
        crate::cache::remove_abandoned(&root.join(crate::cache::CACHE_DIR));
        // Staging folders of exports killed before they finished, wherever they were.
        bundle::remove_abandoned_exports(root);
        Ok(lib)
    }

    /// The library folder (`None` for an in-memory library).
    pub fn root(&self) -> Option<&Path> {
        self.root.as_deref()
    }

    /// The recipes, one per technique.
    pub fn recipes(&self) -> &Recipes {
        &self.recipes
    }

    /// The recipe of one technique.
    pub fn recipe(&self, technique: Technique) -> Result<&Recipe> {
        self.recipes
            .get(&technique)
            .ok_or_else(|| {
                Error::invalid(
                    format!("this library has no recipe for {technique}"),
                    format!("the library was created before whorl knew this technique; add its recipe with `whorl recipe {technique} --defaults --reason TEXT`"),
                )
            })
    }

    /// The text index.
    pub fn text(&self) -> &TextIndex {
        &self.text
    }

    /// The generation counter: bumped by every write transaction.
    pub fn generation(&self) -> Result<i64> {
        let v: String = self.conn.query_row(
            "SELECT value FROM setting WHERE key = 'generation'",
            [],
            |r| r.get(0),
        )?;
        Ok(v.parse().unwrap_or(0))
    }

    /// The state hash of the searchable content and the recipes.
    pub fn state_hash(&self) -> Result<String> {
        let sum: String = self.conn.query_row(
            "SELECT value FROM setting WHERE key = 'content_sum'",
            [],
            |r| r.get(0),
        )?;
        let sum = ContentSum::from_hex(&sum).unwrap_or_default();
        Ok(state_hash(
            &serde_json::to_string(&self.recipes.values().collect::<Vec<_>>())?,
            sum,
        ))
    }

    /// Rebuilds the text index from the database when it is behind; returns whether it did.
    pub fn refresh_text_index(&self) -> Result<bool> {
        let generation = self.generation()?;
        if self.text.generation()? == Some(generation) {
            return Ok(false);
        }
        let all = self.all_records()?;
        self.text
            .rebuild(all.iter().map(SpectrumRecord::index_doc), generation)?;
        Ok(true)
    }

    /// True when the text index is behind the database: it could not be brought up to date
    /// (another process holding its writer, a full disk), or the database has moved on since
    /// (the generation the index records differs). Metadata queries may then miss or keep
    /// stale spectra until a later command rebuilds it; whoever answers from it says so.
    pub fn text_index_behind(&self) -> bool {
        self.text_behind.get()
            || match (self.text.generation(), self.generation()) {
                (Ok(index), Ok(database)) => index != Some(database),
                _ => true,
            }
    }

    /// Updates the text index after a commit. The database already holds the truth, so a
    /// failure here (another process holding the index's writer lock) only leaves the index
    /// behind; the next command rebuilds it from the recorded generation.
    pub(crate) fn sync_text(&self, ids: &[i64], generation: i64) -> Result<()> {
        let due = match self.text_deferred.borrow_mut().as_mut() {
            Some((pending, last)) => {
                pending.extend_from_slice(ids);
                *last = generation;
                // Written now and then all the same, so a long import holds few records.
                (pending.len() >= TEXT_DEFER_LIMIT).then(|| std::mem::take(pending))
            }
            None => Some(ids.to_vec()),
        };
        match due {
            Some(ids) => self.write_text(&ids, generation),
            None => Ok(()),
        }
    }

    fn write_text(&self, ids: &[i64], generation: i64) -> Result<()> {
        let records = self.records(ids)?;
        if self
            .text
            .upsert(records.iter().map(SpectrumRecord::index_doc), generation)
            .is_err()
        {
            self.text_behind.set(true);
        }
        Ok(())
    }

    /// Holds text-index updates back until [`Library::flush_text`]: a bulk import commits one
    /// transaction per batch, and one index commit (with its segment merges) per batch would
    /// cost more than the batch itself. Until the flush the index is behind the database,
    /// which it records (the generation), so a crash in between only means the next command
    /// rebuilds it.
    pub(crate) fn defer_text(&self) {
        let generation = self.generation().unwrap_or(0);
        self.text_deferred.replace(Some((Vec::new(), generation)));
    }

    /// Writes the text-index updates held back since [`Library::defer_text`], in one commit.
    pub(crate) fn flush_text(&self) -> Result<()> {
        let Some((ids, generation)) = self.text_deferred.take() else {
            return Ok(());
        };
        if ids.is_empty() {
            return Ok(());
        }
        self.write_text(&ids, generation)
    }

    /// A setting's value, if set.
    pub fn setting(&self, key: &str) -> Result<Option<String>> {
        Ok(self
            .conn
            .query_row("SELECT value FROM setting WHERE key = ?1", [key], |r| {
                r.get(0)
            })
            .optional()?)
    }
}

#[cfg(test)]
mod tests {
    use super::synthetic::{Rng, ir_points, staged};
    use super::*;

    #[test]
    fn deferred_text_updates_are_written_once_at_the_flush() {
        let mut lib = Library::in_memory("t").unwrap();
        let recipes = lib.recipes().clone();
        let mut rng = Rng::new(7);
        let mut batch = |first: usize| -> Vec<Staged> {
            (first..first + 3)
                .map(|i| {
                    let name = format!("c{i}");
                    staged(&recipes, Technique::Ir, ir_points(&mut rng), &name, &[]).unwrap()
                })
                .collect()
        };
        let (a, b) = (batch(0), batch(3));
        lib.defer_text();
        lib.store(&a, "t", false).unwrap();
        lib.store(&b, "t", false).unwrap();
        // Two commits, nothing in the index yet, which knows it is behind.
        assert_eq!(lib.text().len(), 0);
        assert_ne!(
            lib.text().generation().unwrap(),
            Some(lib.generation().unwrap())
        );
        lib.flush_text().unwrap();
        assert_eq!(lib.text().len(), 6);
        assert_eq!(
            lib.text().generation().unwrap(),
            Some(lib.generation().unwrap())
        );
        // Without deferral every commit updates the index at once.
        let c = batch(6);
        lib.store(&c, "t", false).unwrap();
        assert_eq!(lib.text().len(), 9);
    }

    /// A handle kept open (as the server keeps readers) must not go on answering from a
    /// database file that was removed, or replaced by a restored backup: the open file
    /// descriptor would still read the old file. Common practice for long-lived readers of a
    /// file that may be replaced by rename.
    #[test]
    fn catch_up_refuses_a_database_removed_or_replaced_under_the_handle() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path().join("lib");
        drop(Library::init(&root, "t").unwrap());
        // A backup taken while nothing holds the library open (the last close checkpoints).
        let db = root.join(DATABASE_FILE);
        let copy = dir.path().join("copy.db");
        std::fs::copy(&db, &copy).unwrap();
        let mut kept = Library::open(&root).unwrap();
        kept.catch_up().unwrap();

        std::fs::rename(&db, dir.path().join("moved.db")).unwrap();
        let gone = kept.catch_up().unwrap_err().to_string();
        assert!(gone.contains("is gone"), "{gone}");

        // A copy moved into place is another file: the handle is stale, a new one reads it.
        std::fs::rename(&copy, &db).unwrap();
        let replaced = kept.catch_up().unwrap_err().to_string();
        assert!(replaced.contains("was replaced"), "{replaced}");
        Library::open(&root).unwrap().catch_up().unwrap();
    }
}
