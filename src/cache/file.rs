//! A vector cache mapped read-only: the sections as slices, and the checks made when a file
//! is opened.

use std::path::{Path, PathBuf};

use memmap2::Mmap;

use super::Snapshot;
use super::layout::*;
use crate::error::{Error, Result};
use crate::score::CompositeParams;
use crate::technique::Technique;

/// A vector cache, mapped read-only.
pub struct VectorCache {
    map: Mmap,
    layout: Layout,
    /// The technique.
    pub technique: Technique,
    /// What the rows hold.
    pub kind: Kind,
    /// Grid length.
    pub dim: usize,
    /// The state hash and generation the cache was built from.
    pub built_from: Snapshot,
    /// The composite weighting the sparse weights were computed with.
    pub composite: CompositeParams,
    /// True when every peak position is a whole number (nominal m/z).
    pub integer_x: bool,
    /// Where the file lies (`None` when built in memory).
    pub path: Option<PathBuf>,
    /// The file's size and modification time when it was opened (`None` when built here).
    stamp: Option<(u64, std::time::SystemTime)>,
}

/// A file's size and modification time: a cache file replaced by another build has another.
fn stamp_of(meta: &std::fs::Metadata) -> Option<(u64, std::time::SystemTime)> {
    Some((meta.len(), meta.modified().ok()?))
}

impl VectorCache {
    /// Rows (searchable spectra).
    pub fn rows(&self) -> usize {
        self.layout.rows
    }

    /// Padded row length of the dense matrices.
    pub fn stride(&self) -> usize {
        self.layout.stride
    }

    /// Spectrum ids, ascending.
    pub fn ids(&self) -> &[i64] {
        section(&self.map, self.layout.offsets[IDS], self.layout.rows)
    }

    /// Status codes (0 pending, 1 verified).
    pub fn status(&self) -> &[u8] {
        section(&self.map, self.layout.offsets[STATUS], self.layout.rows)
    }

    /// Dense: each i8 row's scale (value = scale x i8).
    pub fn scales(&self) -> &[f32] {
        section(&self.map, self.layout.offsets[SCALE], self.layout.rows)
    }

    /// Dense: each dequantised i8 row's L1 norm.
    pub fn l1(&self) -> &[f32] {
        section(&self.map, self.layout.offsets[L1], self.layout.rows)
    }

    /// The f32 matrix, row-major, `rows x stride`.
    pub fn f32_matrix(&self) -> &[f32] {
        section(
            &self.map,
            self.layout.offsets[F32],
            self.layout.rows * self.layout.stride,
        )
    }

    /// The i8 matrix, row-major, `rows x stride`.
    pub fn i8_matrix(&self) -> &[i8] {
        section(
            &self.map,
            self.layout.offsets[I8],
            self.layout.rows * self.layout.stride,
        )
    }

    /// Padded length of the coarse rows.
    pub fn coarse_stride(&self) -> usize {
        self.layout.coarse_stride
    }

    /// Grid values averaged into one value of a coarse row.
    pub fn block(&self) -> usize {
        self.layout.block
    }

    /// The coarse i8 matrix, row-major, `rows x coarse_stride`.
    pub fn coarse_matrix(&self) -> &[i8] {
        section(
            &self.map,
            self.layout.offsets[CI8],
            self.layout.rows * self.layout.coarse_stride,
        )
    }

    /// Per row: the coarse row's scale, the L1 norm of its dequantised values, and the L2
    /// norm of what it leaves out (see [`coarse_row`]).
    pub fn coarse_terms(&self) -> (&[f32], &[f32], &[f32]) {
        let n = self.layout.rows;
        (
            section(&self.map, self.layout.offsets[CSCALE], n),
            section(&self.map, self.layout.offsets[CL1], n),
            section(&self.map, self.layout.offsets[CREST], n),
        )
    }

    /// Dense: one row's covered bins `a..b` and the sum and the sum of squares (in f64) of
    /// its f32 values, which are zero outside them.
    pub fn cover(&self, row: usize) -> (usize, usize, f64, f64) {
        let c = &self.covers()[4 * row..4 * row + 4];
        (c[0] as usize, c[1] as usize, c[2], c[3])
    }

    /// Dense: every row's [`VectorCache::cover`], four values a row.
    pub fn covers(&self) -> &[f64] {
        section(&self.map, self.layout.offsets[COVER], 4 * self.layout.rows)
    }

    /// Dense: true when some row covers less than the whole grid.
    pub fn any_partial(&self) -> bool {
        (0..self.layout.rows).any(|r| {
            let (a, b, _, _) = self.cover(r);
            a != 0 || b != self.dim
        })
    }

    /// Sparse: the inverted index entry of one nominal m/z, the rows (ascending) with a peak
    /// there and that peak's posting weight (see [`posting_weight`]).
    pub fn postings(&self, mz: usize) -> (&[u32], &[f32]) {
        if mz >= MZ_BINS {
            return (&[], &[]);
        }
        let off: &[u64] = section(&self.map, self.layout.offsets[POST_OFF], MZ_BINS + 1);
        let range = off[mz] as usize..off[mz + 1] as usize;
        let w: &[f32] = section(&self.map, self.layout.offsets[POST_W], self.sparse_nnz());
        let rows: &[u32] = section(&self.map, self.layout.offsets[POST_ROW], self.sparse_nnz());
        (&rows[range.clone()], &w[range])
    }

    /// Where one row's peaks lie in the peak sections.
    pub fn peak_range(&self, row: usize) -> std::ops::Range<usize> {
        let off: &[u64] = section(&self.map, self.layout.offsets[POFF], self.layout.rows + 1);
        off[row] as usize..off[row + 1] as usize
    }

    /// Every row's peak positions, row after row.
    pub fn peak_x(&self) -> &[f32] {
        section(&self.map, self.layout.offsets[PX], self.layout.nnz)
    }

    /// Sparse: every row's peak heights.
    pub fn peak_h(&self) -> &[f32] {
        section(&self.map, self.layout.offsets[PH], self.sparse_nnz())
    }

    /// Sparse: every row's peaks' nominal m/z.
    pub fn peak_bin(&self) -> &[u16] {
        section(&self.map, self.layout.offsets[PBIN], self.sparse_nnz())
    }

    /// Sparse: every row's Stein & Scott weights, L2-normalised per row.
    pub fn peak_w(&self) -> &[f32] {
        section(&self.map, self.layout.offsets[PW], self.sparse_nnz())
    }

    fn sparse_nnz(&self) -> usize {
        if self.kind.dense() {
            0
        } else {
            self.layout.nnz
        }
    }

    /// Size of the cache in bytes.
    pub fn bytes(&self) -> usize {
        self.layout.len
    }

    /// True when this cache was opened from the file now at `path` (the file was not
    /// replaced since), so that opening it again would give the same cache.
    pub fn is_file_at(&self, path: &Path) -> bool {
        self.stamp.is_some()
            && std::fs::metadata(path)
                .ok()
                .is_some_and(|m| stamp_of(&m) == self.stamp)
    }

    /// True when the cache was built from this state of the library (same state hash and
    /// generation).
    pub fn is_current(&self, snapshot: &Snapshot) -> bool {
        self.built_from.state_hash == snapshot.state_hash
            && self.built_from.generation == snapshot.generation
    }

    /// A cache over a map a [`super::Builder`] has filled.
    #[allow(clippy::too_many_arguments)]
    pub(super) fn from_parts(
        map: Mmap,
        layout: Layout,
        technique: Technique,
        kind: Kind,
        dim: usize,
        built_from: Snapshot,
        composite: CompositeParams,
        integer_x: bool,
    ) -> VectorCache {
        VectorCache {
            map,
            layout,
            technique,
            kind,
            dim,
            built_from,
            composite,
            integer_x,
            path: None,
            stamp: None,
        }
    }

    /// Maps a cache file and checks its header; any mismatch is an error (the caller rebuilds).
    pub fn open(path: &Path, technique: Technique, kind: Kind) -> Result<VectorCache> {
        let f = std::fs::File::open(path)
            .map_err(|e| Error::io(format!("opening {}", path.display()), e))?;
        // SAFETY: cache files are only ever replaced by rename, never written in place, so
        // the mapped bytes do not change under us.
        let map = unsafe { Mmap::map(&f) }
            .map_err(|e| Error::io(format!("mapping {}", path.display()), e))?;
        let mut c = parse(map, technique, kind).map_err(|reason| Error::Library {
            path: path.to_path_buf(),
            reason,
            hint: "the vector cache is derived data: delete the cache folder, or run `whorl check`, to rebuild it".into(),
        })?;
        c.path = Some(path.to_path_buf());
        c.stamp = f.metadata().ok().as_ref().and_then(stamp_of);
        Ok(c)
    }
}

/// Why the cache file at `path` cannot be used although it is a cache of this whorl's format
/// (a checksum that fails, a size or a section that disagrees with its header): `None` when
/// there is no file, when it opens, or when it is merely of another format version (an
/// upgrade, not damage). A stale cache is not damaged: the library rebuilds it as usual.
pub fn damage(path: &Path, technique: Technique, kind: Kind) -> Option<String> {
    if !path.exists() {
        return None;
    }
    match VectorCache::open(path, technique, kind) {
        Ok(_) => None,
        Err(Error::Library { reason, .. }) if reason.starts_with("cache format") => None,
        Err(Error::Library { reason, .. }) => Some(reason),
        Err(e) => Some(e.to_string()),
    }
}

fn parse(map: Mmap, technique: Technique, kind: Kind) -> std::result::Result<VectorCache, String> {
    if cfg!(target_endian = "big") {
        return Err("vector caches are little-endian".into());
    }
    if map.len() < HEADER || &map[0..8] != MAGIC {
        return Err("not a whorl vector cache".into());
    }
    let h = &map[..HEADER];
    if u32_at(h, 8) != FORMAT_VERSION {
        return Err(format!(
            "cache format {} (this whorl writes {FORMAT_VERSION})",
            u32_at(h, 8)
        ));
    }
    if checksum(&h[..HEADER_SUM_AT]) != u64_at(h, HEADER_SUM_AT) {
        return Err("the cache header fails its checksum (the file is damaged)".into());
    }
    if u32_at(h, 12) != kind.code() {
        return Err("cache of another kind".into());
    }
    let name = String::from_utf8_lossy(&h[16..48]);
    if name.trim_end_matches('\0') != technique.name() {
        return Err("cache of another technique".into());
    }
    let dim = u64_at(h, 48) as usize;
    let rows = u64_at(h, 64) as usize;
    let nnz = u64_at(h, 72) as usize;
    let block = u32_at(h, BLOCK_AT) as usize;
    if !BLOCKS.contains(&block) {
        return Err("cache of an unknown coarse block size".into());
    }
    let layout = Layout::new(kind, dim, rows, nnz, block);
    if u64_at(h, 56) as usize != layout.stride || map.len() != layout.len {
        return Err("cache size does not match its header".into());
    }
    for (i, &o) in layout.offsets.iter().enumerate() {
        if u64_at(h, 168 + 8 * i) as usize != o {
            return Err("cache sections do not match its header".into());
        }
    }
    // Every byte after the header is covered by one section's checksum: a damaged file is
    // refused before any of it is read as rows, ids or statuses.
    let sums = section_sums(&map, &layout);
    for (i, s) in sums.iter().enumerate() {
        if *s != u64_at(h, SUMS_AT + 8 * i) {
            return Err(format!(
                "cache section {} fails its checksum (the file is damaged)",
                SECTION_NAMES[i]
            ));
        }
    }
    let generation = u64_at(h, 80) as i64;
    let state_hash = String::from_utf8_lossy(&h[104..168]).to_string();
    let composite = CompositeParams {
        intensity_exponent: f64::from_bits(u64_at(h, 88)),
        mass_exponent: f64::from_bits(u64_at(h, 96)),
        reverse: false,
    };
    let integer_x = h[FLAGS_AT] == 1;
    let sum: [u8; 32] = h[CONTENT_SUM_AT..CONTENT_SUM_AT + 32]
        .try_into()
        .expect("32 bytes");
    let last_id = u64_at(h, LAST_ID_AT) as i64;
    let c = VectorCache {
        map,
        layout,
        technique,
        kind,
        dim,
        built_from: Snapshot {
            state_hash,
            generation,
            sum,
            last_id,
        },
        composite,
        integer_x,
        path: None,
        stamp: None,
    };
    // The peak offsets must be ascending and end at nnz, or a row would read past its peaks.
    let off: &[u64] = section(&c.map, layout.offsets[POFF], rows + 1);
    if off[0] != 0 || off[rows] as usize != nnz || off.windows(2).any(|w| w[0] > w[1]) {
        return Err("cache peak offsets are damaged".into());
    }
    if kind.dense() {
        // Covered bins are read as ranges of a row: they must lie inside it.
        let cover: &[f64] = section(&c.map, layout.offsets[COVER], 4 * rows);
        let inside = |a: f64, b: f64| {
            a >= 0.0 && a <= b && b <= dim as f64 && a.fract() == 0.0 && b.fract() == 0.0
        };
        if cover.chunks(4).any(|c| !inside(c[0], c[1])) {
            return Err("cache coverage is damaged".into());
        }
    }
    if !kind.dense() {
        let post: &[u64] = section(&c.map, layout.offsets[POST_OFF], MZ_BINS + 1);
        if post[0] != 0 || post[MZ_BINS] as usize != nnz || post.windows(2).any(|w| w[0] > w[1]) {
            return Err("cache postings are damaged".into());
        }
    }
    Ok(c)
}

#[cfg(test)]
mod tests {
    //! Cache files as a reader meets them: whole, cut short, shifted, or edited. A file that
    //! does not parse is an error (the library then rebuilds it), never a cache that reads
    //! past its sections.

    use super::*;
    use crate::cache::{Builder, VectorRow};
    use crate::prepare::{Coverage, Peak};
    use crate::technique::Grid;

    fn peak(x: f64, height: f64) -> Peak {
        Peak {
            x,
            height,
            width: 1.0,
            area: 0.0,
        }
    }

    fn snapshot() -> Snapshot {
        Snapshot {
            state_hash: "f".repeat(64),
            generation: 7,
            sum: [3; 32],
            last_id: 41,
        }
    }

    /// A small IR cache file of three rows and an EI-MS one of three peak lists, in `dir`.
    fn build(dir: &Path, kind: Kind) -> (PathBuf, Technique) {
        let (technique, grid) = match kind {
            Kind::Sparse | Kind::Entropy => (Technique::MsEi, Technique::MsEi.default_grid()),
            _ => (
                Technique::Ir,
                Grid {
                    start: 3800.0,
                    stop: 4000.0,
                    step: 2.0,
                    masks: vec![],
                },
            ),
        };
        let rows: Vec<VectorRow> = (0..3)
            .map(|i| VectorRow {
                spectrum_id: 10 + i,
                status: if i == 1 {
                    crate::spectrum::Status::Verified
                } else {
                    crate::spectrum::Status::Pending
                },
                vector: (0..grid.len())
                    .map(|k| ((k as f32 + i as f32) * 0.1).sin().abs())
                    .collect(),
                peaks: vec![peak(41.0 + i as f64, 100.0), peak(58.0, 20.0 + i as f64)],
                // The last IR row was measured from 3850 cm-1 only.
                coverage: (i == 2 && kind != Kind::Sparse).then_some(Coverage {
                    lo: 3850.0,
                    hi: 4000.0,
                }),
            })
            .collect();
        let nnz = rows.iter().map(|r| r.peaks.len()).sum();
        let sample: Vec<Vec<f32>> = rows.iter().map(|r| r.vector.clone()).collect();
        let params = CompositeParams::default();
        let mut b = Builder::new(
            technique,
            kind,
            &grid,
            &params,
            (3, nnz),
            &sample,
            Some(dir),
        )
        .unwrap();
        for r in rows {
            b.push(r).unwrap();
        }
        let c = b.finish(&snapshot()).unwrap();
        (c.path.clone().unwrap(), technique)
    }

    /// Recomputes the checksums of an edited file, as a writer that meant the edit would: the
    /// checks behind the checksums must refuse what the checksums would have let through.
    fn reseal(b: &mut [u8], kind: Kind) {
        let h = &b[..HEADER];
        let layout = Layout::new(
            kind,
            u64_at(h, 48) as usize,
            u64_at(h, 64) as usize,
            u64_at(h, 72) as usize,
            u32_at(h, BLOCK_AT) as usize,
        );
        if b.len() == layout.len {
            let sums = section_sums(b, &layout);
            for (i, s) in sums.iter().enumerate() {
                b[SUMS_AT + 8 * i..SUMS_AT + 8 * i + 8].copy_from_slice(&s.to_le_bytes());
            }
        }
        let own = checksum(&b[..HEADER_SUM_AT]);
        b[HEADER_SUM_AT..HEADER].copy_from_slice(&own.to_le_bytes());
    }

    fn reason(path: &Path, technique: Technique, kind: Kind) -> String {
        match VectorCache::open(path, technique, kind) {
            Ok(_) => "opened".into(),
            Err(Error::Library { reason, .. }) => reason,
            Err(e) => format!("other error: {e}"),
        }
    }

    #[test]
    fn a_built_file_opens_with_what_was_pushed() {
        let dir = tempfile::tempdir().unwrap();
        for kind in [Kind::Centred, Kind::Sparse, Kind::Entropy] {
            let (path, technique) = build(dir.path(), kind);
            let c = VectorCache::open(&path, technique, kind).unwrap();
            assert_eq!(c.ids(), &[10, 11, 12]);
            assert_eq!(c.status(), &[0, 1, 0]);
            assert_eq!(c.built_from, snapshot());
            assert_eq!(c.peak_range(2), 4..6);
            assert_eq!(c.peak_x()[4], 43.0);
            assert!(c.is_current(&snapshot()));
            if !kind.dense() {
                // m/z 58 is in every row: its postings list them in order.
                assert_eq!(c.postings(58).0, &[0, 1, 2]);
                assert!(c.integer_x);
            } else {
                // Each dense row is L2-normalised (Pearson r of a row with itself is 1).
                let s = c.stride();
                let norm: f32 = c.f32_matrix()[..s].iter().map(|a| a * a).sum();
                assert!((norm - 1.0).abs() < 1e-5, "{norm}");
                // The last row covers 3850-4000 cm-1: bins 25..101, zero outside, centred
                // over them (its sum is 0 and its sum of squares 1, as the cache records).
                let (a, b, sum, squares) = c.cover(2);
                assert_eq!((a, b), (25, 101));
                assert_eq!(c.cover(0).0..c.cover(0).1, 0..101);
                let row = &c.f32_matrix()[2 * s..3 * s];
                assert!(row[..25].iter().chain(&row[101..]).all(|&v| v == 0.0));
                assert!(sum.abs() < 1e-5 && (squares - 1.0).abs() < 1e-5);
                let f64_sum: f64 = row.iter().map(|&v| f64::from(v)).sum();
                assert_eq!(f64_sum, sum);
                assert!(c.any_partial());
            }
        }
    }

    #[test]
    fn a_truncated_or_extended_file_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        for kind in [Kind::Centred, Kind::Sparse, Kind::Entropy] {
            let (path, technique) = build(dir.path(), kind);
            let bytes = std::fs::read(&path).unwrap();
            for len in [0, 8, HEADER - 1, HEADER, bytes.len() / 2, bytes.len() - 1] {
                std::fs::write(&path, &bytes[..len]).unwrap();
                let why = reason(&path, technique, kind);
                assert!(
                    why == "not a whorl vector cache" || why.contains("size does not match"),
                    "{kind:?} cut to {len}: {why}"
                );
            }
            let mut longer = bytes.clone();
            longer.extend_from_slice(&[0; 64]);
            std::fs::write(&path, &longer).unwrap();
            assert_eq!(
                reason(&path, technique, kind),
                "cache size does not match its header"
            );
        }
    }

    #[test]
    fn a_header_that_disagrees_with_its_sections_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let (path, technique) = build(dir.path(), Kind::Centred);
        let good = std::fs::read(&path).unwrap();
        let edit = |at: usize, value: &[u8]| {
            let mut b = good.clone();
            b[at..at + value.len()].copy_from_slice(value);
            // Left as it is, the edit fails the checksums.
            std::fs::write(&path, &b).unwrap();
            let why = reason(&path, technique, Kind::Centred);
            assert!(why.contains("fails its checksum"), "{why}");
            reseal(&mut b, Kind::Centred);
            std::fs::write(&path, &b).unwrap();
            reason(&path, technique, Kind::Centred)
        };
        // A section offset moved by 8 bytes: no longer 64-byte aligned, nor where the
        // layout puts it.
        let f32_offset = u64_at(&good, 168 + 8 * F32);
        assert_eq!(
            edit(168 + 8 * F32, &(f32_offset + 8).to_le_bytes()),
            "cache sections do not match its header"
        );
        // More rows than the file holds.
        assert_eq!(
            edit(64, &4u64.to_le_bytes()),
            "cache size does not match its header"
        );
        let mut b = good.clone();
        b[0..8].copy_from_slice(b"WHORLVX\0");
        std::fs::write(&path, &b).unwrap();
        assert_eq!(
            reason(&path, technique, Kind::Centred),
            "not a whorl vector cache"
        );
        b = good.clone();
        b[8..12].copy_from_slice(&(FORMAT_VERSION + 1).to_le_bytes());
        std::fs::write(&path, &b).unwrap();
        assert!(reason(&path, technique, Kind::Centred).starts_with("cache format"));
        assert_eq!(
            edit(BLOCK_AT, &3u32.to_le_bytes()),
            "cache of an unknown coarse block size"
        );
        // A row's covered bins reaching past its end (grid of 101 bins).
        let cover = u64_at(&good, 168 + 8 * COVER) as usize;
        assert_eq!(
            edit(cover + 8, &102f64.to_le_bytes()),
            "cache coverage is damaged"
        );
        std::fs::write(&path, &good).unwrap();
        assert_eq!(
            reason(&path, technique, Kind::Unit),
            "cache of another kind"
        );
        assert_eq!(
            reason(&path, Technique::Raman, Kind::Centred),
            "cache of another technique"
        );
        assert_eq!(reason(&path, technique, Kind::Centred), "opened");
    }

    #[test]
    fn damaged_peak_offsets_and_postings_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let (path, technique) = build(dir.path(), Kind::Sparse);
        let good = std::fs::read(&path).unwrap();
        // The row peak offsets: a descending pair would make a row read backwards.
        let poff = u64_at(&good, 168 + 8 * POFF) as usize;
        let mut b = good.clone();
        b[poff + 8..poff + 16].copy_from_slice(&5u64.to_le_bytes());
        std::fs::write(&path, &b).unwrap();
        assert_eq!(
            reason(&path, technique, Kind::Sparse),
            "cache section peak_off fails its checksum (the file is damaged)"
        );
        reseal(&mut b, Kind::Sparse);
        std::fs::write(&path, &b).unwrap();
        assert_eq!(
            reason(&path, technique, Kind::Sparse),
            "cache peak offsets are damaged"
        );
        // The postings offsets must end at the number of peaks.
        let post = u64_at(&good, 168 + 8 * POST_OFF) as usize;
        let mut b = good.clone();
        let last = post + 8 * MZ_BINS;
        b[last..last + 8].copy_from_slice(&99u64.to_le_bytes());
        reseal(&mut b, Kind::Sparse);
        std::fs::write(&path, &b).unwrap();
        assert_eq!(
            reason(&path, technique, Kind::Sparse),
            "cache postings are damaged"
        );
    }

    #[test]
    fn every_single_byte_change_is_refused() {
        // Each byte of a small file changed in turn: the header's own checksum or one
        // section's covers it, padding included.
        let dir = tempfile::tempdir().unwrap();
        for kind in [Kind::Centred, Kind::Entropy] {
            let (path, technique) = build(dir.path(), kind);
            let good = std::fs::read(&path).unwrap();
            let step = if kind.dense() { 1 } else { 97 };
            for at in (0..good.len()).step_by(step) {
                let mut b = good.clone();
                b[at] ^= 0x20;
                std::fs::write(&path, &b).unwrap();
                let why = reason(&path, technique, kind);
                assert_ne!(why, "opened", "{kind:?}: byte {at} changed");
            }
            std::fs::write(&path, &good).unwrap();
            assert_eq!(reason(&path, technique, kind), "opened");
        }
    }

    #[test]
    fn a_builder_refuses_rows_it_was_not_told_of() {
        let dir = tempfile::tempdir().unwrap();
        let grid = Technique::MsEi.default_grid();
        let params = CompositeParams::default();
        let row = |id| VectorRow {
            spectrum_id: id,
            status: crate::spectrum::Status::Verified,
            vector: vec![],
            peaks: vec![peak(43.0, 1.0)],
            coverage: None,
        };
        // Told of one row: a second is the library changing under the build.
        let new = || {
            Builder::new(
                Technique::MsEi,
                Kind::Sparse,
                &grid,
                &params,
                (1, 1),
                &[],
                Some(dir.path()),
            )
            .unwrap()
        };
        let mut b = new();
        b.push(row(1)).unwrap();
        assert!(b.push(row(2)).unwrap_err().is_busy());
        drop(b);
        // Told of one row and given none: nothing is renamed into place.
        let b = new();
        assert!(b.finish(&snapshot()).is_err());
        assert!(
            !dir.path()
                .join(file_name(Technique::MsEi, Kind::Sparse))
                .exists()
        );
        // No temporary file is left behind either.
        let left: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert!(left.is_empty(), "{left:?}");
    }
}
