//! Vector caches: one derived, memory-mapped file per technique holding every searchable
//! prepared spectrum as one contiguous matrix, and the scan that ranks an unknown against it.
//!
//! A cache is derived data. It is tagged with the library fingerprint and generation it was
//! built from, rebuilt whenever either differs from the database, written to a temporary file
//! and renamed into place (a crash never leaves half a cache), and deleting the `cache/`
//! folder loses nothing.

mod file;
mod kernels;
mod scan;
pub mod synthetic;

pub use file::{CACHE_DIR, FORMAT_VERSION, Kind, VectorCache};
pub use scan::{Trace, rank, rank_traced};

use std::cell::RefCell;
use std::collections::HashMap;
use std::sync::Arc;

use crate::error::Result;
use crate::library::Library;
use crate::score::{CompositeParams, Measure};
use crate::technique::Technique;

/// Told how far a cache build has come: technique, rows written, rows in all.
pub type BuildProgress = dyn Fn(Technique, usize, usize) + Send + Sync;

/// The caches a library has opened in this process, so that several searches of one command
/// map each file once. Each use still checks the tag against the database. Also what to tell
/// about a build under way (`Library::on_cache_build`).
#[derive(Default)]
pub struct Caches(
    RefCell<HashMap<(Technique, Kind), Arc<VectorCache>>>,
    pub(crate) RefCell<Option<Box<BuildProgress>>>,
);

impl Caches {
    /// Tells the progress callback, if any, how far a build has come.
    pub(crate) fn progress(&self, technique: Technique, done: usize, total: usize) {
        if let Some(f) = self.1.borrow().as_ref() {
            f(technique, done, total);
        }
    }
}

impl std::fmt::Debug for Caches {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Caches")
    }
}

/// How a cache was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Origin {
    /// Mapped from an up-to-date file (or reused in this process).
    Fresh,
    /// Built from the database because it was missing, stale or unreadable.
    Rebuilt,
}

/// The kind of cache a technique's default measure uses.
pub fn kind_for(technique: Technique, measure: Measure) -> Option<Kind> {
    match (technique, measure) {
        (Technique::MsEi, Measure::Composite) => Some(Kind::Sparse),
        (Technique::MsEi, _) => None,
        // 13C ranks by its own shift match; it is searched without a cache.
        (Technique::Nmr13c, _) => None,
        (_, Measure::Correlation) => Some(Kind::Centred),
        (_, Measure::Cosine) => Some(Kind::Unit),
        _ => None,
    }
}

/// The up-to-date cache of one technique and kind: reused, mapped from its file, or rebuilt.
pub fn get(
    library: &Library,
    technique: Technique,
    kind: Kind,
) -> Result<(Arc<VectorCache>, Origin)> {
    let snapshot = library.snapshot()?;
    let memo = library.vector_caches();
    if let Some(c) = memo.0.borrow().get(&(technique, kind))
        && c.is_current(&snapshot)
    {
        return Ok((c.clone(), Origin::Fresh));
    }
    let path = library
        .root()
        .map(|r| r.join(CACHE_DIR).join(file::file_name(technique, kind)));
    if let Some(p) = &path
        && let Ok(c) = VectorCache::open(p, technique, kind)
        && c.is_current(&snapshot)
    {
        let c = Arc::new(c);
        memo.0.borrow_mut().insert((technique, kind), c.clone());
        return Ok((c, Origin::Fresh));
    }
    let c = Arc::new(build(library, technique, kind)?);
    memo.0.borrow_mut().insert((technique, kind), c.clone());
    Ok((c, Origin::Rebuilt))
}

/// Builds the cache of one technique and kind from the database: into `cache/` when the
/// library has a folder that can be written, else in memory.
pub fn build(library: &Library, technique: Technique, kind: Kind) -> Result<VectorCache> {
    let grid = library.recipe(technique)?.grid.clone();
    let params = CompositeParams::default();
    match library.root() {
        Some(root) => {
            let dir = root.join(CACHE_DIR);
            match file::build_file(library, &dir, technique, kind, &grid, &params) {
                Ok(c) => Ok(c),
                // A read-only library folder still searches: the cache lives in memory.
                Err(crate::Error::Io { .. }) => {
                    file::build_anon(library, technique, kind, &grid, &params)
                }
                Err(e) => Err(e),
            }
        }
        None => file::build_anon(library, technique, kind, &grid, &params),
    }
}

/// Rebuilds the cache of every technique that has searchable spectra (what `whorl check`
/// does), returning the techniques rebuilt.
pub fn rebuild_all(library: &Library) -> Result<Vec<Technique>> {
    let mut done = Vec::new();
    for t in Technique::ALL {
        let Some(kind) = kind_for(t, Measure::default_for(t)) else {
            continue;
        };
        let searchable = library.count(t, crate::library::Status::Verified)?
            + library.count(t, crate::library::Status::Pending)?;
        let path = library
            .root()
            .map(|r| r.join(CACHE_DIR).join(file::file_name(t, kind)));
        if searchable == 0 && !path.as_ref().is_some_and(|p| p.exists()) {
            continue;
        }
        let c = Arc::new(build(library, t, kind)?);
        library.vector_caches().0.borrow_mut().insert((t, kind), c);
        done.push(t);
    }
    Ok(done)
}
