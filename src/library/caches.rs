//! The library drives its derived vector caches: it finds an up-to-date one (reused in this
//! process or mapped from its file), or streams its rows into a [`cache::Builder`] in one
//! read transaction. The cache module itself knows nothing of the library.

use std::cell::RefCell;
use std::collections::HashMap;
use std::path::Path;
use std::sync::Arc;

use super::{Library, Status};
use crate::cache::{self, BLOCK_SAMPLE, Builder, CACHE_DIR, Kind, VectorCache};
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

    /// The up-to-date cache of one technique and kind: reused, mapped from its file, or
    /// rebuilt from the database.
    pub fn vector_cache(&self, technique: Technique, kind: Kind) -> Result<Arc<VectorCache>> {
        let snapshot = self.snapshot()?;
        let memo = &self.caches.memo;
        if let Some(c) = memo.borrow().get(&(technique, kind))
            && c.is_current(&snapshot)
        {
            return Ok(c.clone());
        }
        if let Some(p) = self.cache_path(technique, kind)
            && let Ok(c) = VectorCache::open(&p, technique, kind)
            && c.is_current(&snapshot)
        {
            let c = Arc::new(c);
            memo.borrow_mut().insert((technique, kind), c.clone());
            return Ok(c);
        }
        let c = Arc::new(self.build_vector_cache(technique, kind)?);
        memo.borrow_mut().insert((technique, kind), c.clone());
        Ok(c)
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

/// Builds made before giving up on a library that keeps changing under the build.
const BUILD_ATTEMPTS: u32 = 5;
