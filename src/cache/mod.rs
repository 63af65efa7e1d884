//! Vector caches: one derived, memory-mapped file per technique and kind holding every
//! searchable prepared spectrum as one contiguous matrix, the row transforms that fill it,
//! and the kernels that read it.
//!
//! A cache is derived data. It is tagged with the library state hash and generation it was
//! built from ([`Snapshot`]), rebuilt whenever either differs from the database, written to
//! a temporary file and renamed into place (a crash never leaves half a cache), and deleting
//! the `cache/` folder loses nothing. Its header keeps a checksum of every section and of
//! itself ([`checksum`]), verified when the file is opened, so a damaged file is refused
//! (and rebuilt by the library) before any of its rows is read. This module knows no library and no query: the library
//! feeds a [`Builder`] the rows it streams, and the search reads a [`VectorCache`].

mod build;
mod file;
mod kernels;
mod layout;
mod rows;

pub use build::{Builder, remove_abandoned};
pub use file::{VectorCache, damage};
pub use kernels::{TopK, dot_f32, i8_dot, i8_dots};
pub use layout::{
    BLOCK_SAMPLE, BLOCKS, CACHE_DIR, FORMAT_VERSION, Kind, checksum, coarse_stride, file_name,
};
pub use rows::{
    active_bins, choose_block, coarse_row, covered_row, dense_row, entropy_row, posting_weight,
    quantise, weights,
};

use crate::prepare::{Coverage, Peak};
use crate::score::Measure;
use crate::spectrum::Status;
use crate::technique::Technique;

/// The state of the searchable content a cache was built from: the library state hash and
/// generation, and what a library needs to tell whether spectra stored since are all that
/// changed (the content sum under the state hash and the highest spectrum id of any
/// technique), read together with the rows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Snapshot {
    /// The library state hash.
    pub state_hash: String,
    /// The generation counter.
    pub generation: i64,
    /// The content sum the state hash was made from (see `library::state_hash`).
    pub sum: [u8; 32],
    /// The highest spectrum id in the library, of any technique and status (0 when empty).
    pub last_id: i64,
}

/// One searchable spectrum as the library hands it to a [`Builder`].
pub struct VectorRow {
    /// Spectrum id (rows come in ascending id order).
    pub spectrum_id: i64,
    /// Review status (never withdrawn).
    pub status: Status,
    /// The prepared vector.
    pub vector: Vec<f32>,
    /// The picked peaks.
    pub peaks: Vec<Peak>,
    /// The part of the grid the spectrum covers (`None`: all of it).
    pub coverage: Option<Coverage>,
}

/// The kind of cache a technique's measure uses, if any.
pub fn kind_for(technique: Technique, measure: Measure) -> Option<Kind> {
    match (technique, measure) {
        (Technique::MsEi, Measure::Composite) => Some(Kind::Sparse),
        (Technique::MsEi, Measure::Entropy) => Some(Kind::Entropy),
        (Technique::MsEi, _) => None,
        // 13C ranks by its own shift match; it is searched without a cache.
        (Technique::Nmr13c, _) => None,
        (_, Measure::Correlation) => Some(Kind::Centred),
        (_, Measure::Cosine) => Some(Kind::Unit),
        _ => None,
    }
}
