//! The library drives its derived vector caches: it finds an up-to-date one (reused in this
//! process or mapped from its file), or streams its rows into a [`cache::Builder`] in one
//! read transaction. The cache module itself knows nothing of the library.

use std::cell::RefCell;
use std::collections::HashMap;
use std::path::Path;
use std::sync::Arc;

use super::{ContentSum, Library, Status, record_hash, state_hash};
use crate::cache::{self, BLOCK_SAMPLE, Builder, CACHE_DIR, Kind, Snapshot, VectorCache};
use crate::error::{Error, Result};
use crate::score::{CompositeParams, Measure};
use crate::technique::Technique;

/// Told how far a cache build has come: technique, rows written, rows in all.
pub type BuildProgress = dyn Fn(Technique, usize, usize) + Send + Sync;

/// The caches a library has opened in this process, so that several searches of one command
/// map each file once (each use still checks the tag against the database), and what to
/// tell about a build under way ([`Library::on_cache_build`]).
#[derive(Default)]
pub(crate) struct Caches {
    memo: RefCell<HashMap<(Technique, Kind), Arc<VectorCache>>>,
    progress: RefCell<Option<Box<BuildProgress>>>,
}

impl Caches {
    /// Tells the progress callback, if any, how far a build has come.
    fn progress(&self, technique: Technique, done: usize, total: usize) {
        if let Some(f) = self.progress.borrow().as_ref() {
            f(technique, done, total);
        }
    }
}

impl std::fmt::Debug for Caches {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Caches")
    }
}

impl Library {
    /// Calls `f(technique, rows written, rows in all)` while a vector cache is built (from
    /// 0 to all, every few thousand rows), so a command can show progress; the library
    /// itself never prints.
    pub fn on_cache_build(&self, f: impl Fn(Technique, usize, usize) + Send + Sync + 'static) {
        *self.caches.progress.borrow_mut() = Some(Box::new(f));
    }

    /// The vector caches this library has mapped, handed over to another `Library` of the same
    /// folder with [`Library::adopt_caches`] (a server hands them from request to request):
    /// this library lets go of them, so a handle kept idle between requests keeps no mapping
    /// of a cache file that a rebuild has since replaced.
    pub fn release_caches(&self) -> Vec<Arc<VectorCache>> {
        std::mem::take(&mut *self.caches.memo.borrow_mut())
            .into_values()
            .collect()
    }

    /// Starts from caches another `Library` of the same folder mapped: each is still checked
    /// against the database before use, exactly as one mapped here would be, so a cache
    /// mapped a moment ago is used again instead of opening its file and verifying its
    /// checksums once more.
    pub fn adopt_caches(&self, caches: impl IntoIterator<Item = Arc<VectorCache>>) {
        let mut memo = self.caches.memo.borrow_mut();
        for c in caches {
            memo.insert((c.technique, c.kind), c);
        }
    }

    /// The up-to-date cache of one technique and kind: reused, mapped from its file, or
    /// rebuilt from the database.
    pub fn vector_cache(&self, technique: Technique, kind: Kind) -> Result<Arc<VectorCache>> {
        if let Some((c, _)) = self.usable_cache(technique, kind, false)? {
            return Ok(c);
        }
        let _one = BUILDING.lock().unwrap_or_else(|e| e.into_inner());
        if let Some((c, _)) = self.usable_cache(technique, kind, false)? {
            return Ok(c);
        }
        self.build_into_memo(technique, kind)
    }

    /// A cache of one technique and kind and the spectra of that technique stored since it was
    /// built (id and status, ascending), which a search scores exactly beside the cache. The
    /// tail is empty when the cache is current. A cache older than the library is used with
    /// its tail only when spectra stored after it are all that changed: the content sum now,
    /// less the record hashes of every searchable spectrum of any technique with a higher id
    /// than the library held at the build, makes the cache's state hash again with today's
    /// recipes (the sum is a multiset hash, see `state_hash`), so nothing the cache holds was
    /// withdrawn, reinstated, signed off, revised or prepared again since; and the tail holds at
    /// most [`tail_limit`] spectra. Otherwise the cache is rebuilt, as [`Library::vector_cache`]
    /// does. A server adding spectra while it searches thus rebuilds its cache now and then,
    /// not after every submission.
    pub fn vector_cache_and_tail(
        &self,
        technique: Technique,
        kind: Kind,
    ) -> Result<(Arc<VectorCache>, Tail)> {
        if let Some(found) = self.usable_cache(technique, kind, true)? {
            return Ok(found);
        }
        // One build at a time in this process: threads that find the cache out of date
        // together (a server's concurrent searches) wait for the first one's build and use
        // its file (with the spectra stored meanwhile as their tail), rather than each writing
        // a file of their own.
        let _one = BUILDING.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(found) = self.usable_cache(technique, kind, true)? {
            return Ok(found);
        }
        Ok((self.build_into_memo(technique, kind)?, Vec::new()))
    }

    /// The cache in memory or in its file when it was built from the library as it is now
    /// (with an empty tail), or, with `tail`, when only spectra stored since differ.
    fn usable_cache(
        &self,
        technique: Technique,
        kind: Kind,
        tail: bool,
    ) -> Result<Option<(Arc<VectorCache>, Tail)>> {
        let snapshot = self.snapshot()?;
        let memo = &self.caches.memo;
        let mut older = memo.borrow().get(&(technique, kind)).cloned();
        if let Some(c) = &older
            && c.is_current(&snapshot)
        {
            return Ok(Some((c.clone(), Vec::new())));
        }
        // The file is opened (and its checksums verified) again only when it is not the one
        // already in memory.
        if let Some(p) = self.cache_path(technique, kind)
            && !older.as_ref().is_some_and(|o| o.is_file_at(&p))
            && let Ok(c) = VectorCache::open(&p, technique, kind)
        {
            let c = Arc::new(c);
            if c.is_current(&snapshot) {
                memo.borrow_mut().insert((technique, kind), c.clone());
                return Ok(Some((c, Vec::new())));
            }
            // The newer of the two is the better base for a tail.
            if older
                .as_ref()
                .is_none_or(|o| o.built_from.generation < c.built_from.generation)
            {
                older = Some(c);
            }
        }
        if tail
            && let Some(c) = older
            && let Some(rows) = self.tail_since(&c.built_from, technique, c.rows())?
        {
            memo.borrow_mut().insert((technique, kind), c.clone());
            return Ok(Some((c, rows)));
        }
        Ok(None)
    }

    /// Builds the cache from the database and keeps it for the next searches.
    fn build_into_memo(&self, technique: Technique, kind: Kind) -> Result<Arc<VectorCache>> {
        let c = Arc::new(self.build_vector_cache(technique, kind)?);
        self.caches
            .memo
            .borrow_mut()
            .insert((technique, kind), c.clone());
        Ok(c)
    }

    /// The searchable spectra of `technique` stored after a cache built from `built`, when
    /// they are all that changed (see [`Library::vector_cache_and_tail`]); `None` otherwise.
    fn tail_since(
        &self,
        built: &Snapshot,
        technique: Technique,
        rows: usize,
    ) -> Result<Option<Vec<(i64, Status)>>> {
        let tx = self.conn.unchecked_transaction()?;
        let now = self.snapshot_in(&tx)?;
        let ids: Vec<i64> = {
            let mut stmt = tx.prepare(
                "SELECT id FROM spectrum WHERE id > ?1 AND status != 'withdrawn' ORDER BY id LIMIT ?2",
            )?;
            stmt.query_map(
                rusqlite::params![built.last_id, tail_limit(rows) as i64 + 1],
                |r| r.get(0),
            )?
            .collect::<rusqlite::Result<_>>()?
        };
        if ids.len() > tail_limit(rows) || now.last_id < built.last_id {
            return Ok(None);
        }
        let mut sum = ContentSum(now.sum);
        let mut tail = Vec::new();
        for rec in self.records(&ids)? {
            let meta = serde_json::to_string(&rec.metadata)?;
            sum.remove(&record_hash(
                rec.technique.name(),
                rec.status.name(),
                &rec.raw_sha256,
                &meta,
            ));
            if rec.technique == technique {
                tail.push((rec.id, rec.status));
            }
        }
        tx.finish()?;
        let recipes = serde_json::to_string(&self.recipes.values().collect::<Vec<_>>())?;
        Ok((state_hash(&recipes, sum) == built.state_hash).then_some(tail))
    }

    /// Builds the cache of one technique and kind from the database: into `cache/` when the
    /// library has a folder that can be written, else in memory.
    /// Another process writing while the rows are read makes the build start again, up to
    /// [`BUILD_ATTEMPTS`] times with a growing pause, then an [`Error::Changing`] (a busy
    /// library: exit 6).
    pub fn build_vector_cache(&self, technique: Technique, kind: Kind) -> Result<VectorCache> {
        let mut attempt = 1;
        loop {
            match self.build_vector_cache_once(technique, kind) {
                Err(Error::Changing { .. }) if attempt < BUILD_ATTEMPTS => {
                    std::thread::sleep(std::time::Duration::from_millis(25 << attempt));
                    attempt += 1;
                }
                other => return other,
            }
        }
    }

    fn build_vector_cache_once(&self, technique: Technique, kind: Kind) -> Result<VectorCache> {
        match self.root() {
            Some(root) => match self.fill_cache(technique, kind, Some(&root.join(CACHE_DIR))) {
                Ok(c) => Ok(c),
                // A read-only library folder still searches: the cache lives in memory.
                Err(Error::Io { .. }) => self.fill_cache(technique, kind, None),
                Err(e) => Err(e),
            },
            None => self.fill_cache(technique, kind, None),
        }
    }

    /// Rebuilds the cache of every technique that has searchable spectra (what `whorl check`
    /// does), returning the techniques rebuilt.
    pub fn rebuild_vector_caches(&self) -> Result<Vec<Technique>> {
        let mut done = Vec::new();
        for t in Technique::ALL {
            let Some(kind) = cache::kind_for(t, Measure::default_for(t)) else {
                continue;
            };
            let searchable = self.count(t, Status::Verified)? + self.count(t, Status::Pending)?;
            if searchable == 0 && !self.cache_path(t, kind).is_some_and(|p| p.exists()) {
                continue;
            }
            let c = Arc::new(self.build_vector_cache(t, kind)?);
            self.caches.memo.borrow_mut().insert((t, kind), c);
            done.push(t);
        }
        Ok(done)
    }

    /// The cache files that are damaged (see [`cache::damage`]), each with the reason, after
    /// removing them so that they are rebuilt from the database when next needed. Derived
    /// data is never repaired in place: `check` reports each one and rebuilds what it uses.
    pub fn remove_damaged_vector_caches(&self) -> Result<Vec<(String, String)>> {
        let mut found = Vec::new();
        for t in Technique::ALL {
            for kind in [Kind::Centred, Kind::Unit, Kind::Sparse, Kind::Entropy] {
                let Some(path) = self.cache_path(t, kind) else {
                    continue;
                };
                if let Some(reason) = cache::damage(&path, t, kind) {
                    self.caches.memo.borrow_mut().remove(&(t, kind));
                    std::fs::remove_file(&path)
                        .map_err(|e| Error::io(format!("removing {}", path.display()), e))?;
                    found.push((cache::file_name(t, kind), reason));
                }
            }
        }
        Ok(found)
    }

    /// Where the cache file of a technique and kind lies (`None` for an in-memory library).
    fn cache_path(&self, technique: Technique, kind: Kind) -> Option<std::path::PathBuf> {
        self.root()
            .map(|r| r.join(CACHE_DIR).join(cache::file_name(technique, kind)))
    }

    /// Streams the technique's searchable rows into a builder, in one read transaction, and
    /// seals the cache with the state they were read from.
    fn fill_cache(
        &self,
        technique: Technique,
        kind: Kind,
        dir: Option<&Path>,
    ) -> Result<VectorCache> {
        let grid = self.recipe(technique)?.grid.clone();
        let counts = self.vector_counts(technique)?;
        let sample = if !kind.dense() {
            Vec::new()
        } else {
            self.sample_vectors(technique, BLOCK_SAMPLE)?
        };
        let params = CompositeParams::default();
        let mut builder = Builder::new(technique, kind, &grid, &params, counts, &sample, dir)?;
        let (total, progress) = (builder.rows(), &self.caches);
        progress.progress(technique, 0, total);
        let snapshot = self.scan_vectors(
            technique,
            &mut |n| {
                if n == total {
                    Ok(())
                } else {
                    Err(changed_while_building())
                }
            },
            &mut |r| {
                builder.push(r)?;
                if builder.pushed().is_multiple_of(4096) {
                    progress.progress(technique, builder.pushed(), total);
                }
                Ok(())
            },
        )?;
        progress.progress(technique, total, total);
        builder.finish(&snapshot)
    }
}

fn changed_while_building() -> Error {
    Error::Changing {
        what: "vector cache".into(),
    }
}

/// The spectra of one technique stored since a cache was built: id and status, ascending.
pub type Tail = Vec<(i64, Status)>;

/// One cache build at a time in a process (see `Library::vector_cache_and_tail`).
static BUILDING: std::sync::Mutex<()> = std::sync::Mutex::new(());

/// The most spectra stored since a cache was built that a search scores exactly beside it
/// (1% of the cache's rows, at least 256); beyond that the cache is rebuilt.
pub fn tail_limit(rows: usize) -> usize {
    (rows / 100).max(256)
}

/// Builds made before giving up on a library that keeps changing under the build.
const BUILD_ATTEMPTS: u32 = 5;
