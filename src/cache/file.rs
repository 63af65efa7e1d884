//! The cache file: a fixed header, then sections aligned to 64 bytes.
//!
//! ```text
//! header   512 bytes: magic, format version, kind, technique, grid length (dim), padded
//!          row length (stride), rows, peaks (nnz), generation, fingerprint, composite
//!          exponents, section offsets, flags, coarse factor
//! ids      i64 x rows       spectrum ids, ascending
//! status   u8  x rows       0 pending, 1 verified
//! scale    f32 x rows       dense: the i8 row's scale (value = scale x i8)
//! l1       f32 x rows       dense: sum of |scale x i8| (for the quantisation error bound)
//! npos     u32 x rows       peaks with a positive height
//! f32      f32 x rows x stride   dense rows, zero-padded
//! i8       i8  x rows x stride   the same rows quantised per row
//! c_scale  f32 x rows       dense: the coarse row's scale
//! c_l1     f32 x rows       dense: L1 norm of the dequantised coarse row
//! c_rest   f32 x rows       dense: L2 norm of what the coarse row leaves out, rounded up
//! c_i8     i8  x rows x coarse_stride   coarse rows quantised per row (see `coarse_row`)
//! post_off u64 x 65537      sparse: where each nominal m/z's postings start
//! post_row u32 x nnz        sparse: rows with a peak at that m/z, ascending
//! post_w   f32 x nnz        sparse: that peak's weight, negated when it cannot be trusted
//!                           (see `posting_weight`)
//! peak_off u64 x (rows + 1) where each row's peaks start
//! peak_x   f32 x nnz        peak positions
//! peak_h   f32 x nnz        sparse: peak heights
//! peak_bin u16 x nnz        sparse: nominal m/z
//! peak_w   f32 x nnz        sparse: Stein & Scott weights, L2-normalised per row
//! ```
//!
//! Dense rows are stored ready for a dot product. For [`Kind::Centred`] a row is the
//! prepared vector with its mean over the unmasked bins subtracted, masked bins set to 0 and
//! then L2-normalised: Pearson's r over the unmasked bins of two spectra equals the dot
//! product of their rows so transformed. For [`Kind::Unit`] a row is the L2-normalised
//! vector, whose dot products are cosines. Values are little-endian.

use std::path::{Path, PathBuf};

use memmap2::{Mmap, MmapMut};

use crate::error::{Error, Result};
use crate::library::{Library, Snapshot, Status, VectorRow};
use crate::score::CompositeParams;
use crate::technique::{Grid, Technique};

/// The cache folder inside a library folder.
pub const CACHE_DIR: &str = "cache";
/// The version of the cache file layout; a file of another version is rebuilt.
pub const FORMAT_VERSION: u32 = 3;
const MAGIC: &[u8; 8] = b"WHORLVC\0";
const HEADER: usize = 512;
const ALIGN: usize = 64;
const SECTIONS: usize = 19;
/// Nominal m/z values an inverted index covers (peak bins are u16).
const MZ_BINS: usize = 1 << 16;
/// The block sizes a cache may average its coarse rows over, coarsest first.
pub(super) const BLOCKS: [usize; 3] = [8, 4, 2];
/// The block size of caches without dense rows (recorded, never used).
const NO_BLOCK: usize = 4;
/// Rows a build samples to choose its block size.
const BLOCK_SAMPLE: usize = 1000;
/// The largest median left-out norm (of unit rows) a block size may leave in the sample.
const BLOCK_REST: f64 = 0.25;
/// Dense rows are padded to a multiple of this many values, so kernels need no tail loop.
pub(super) const LANES: usize = 32;

/// What the rows of a cache hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Kind {
    /// Mean-centred over unmasked bins, masked bins zeroed, L2-normalised: dot = Pearson r.
    Centred,
    /// L2-normalised: dot = cosine.
    Unit,
    /// Peak lists with Stein & Scott weights (EI-MS).
    Sparse,
}

impl Kind {
    fn code(self) -> u32 {
        match self {
            Kind::Centred => 1,
            Kind::Unit => 2,
            Kind::Sparse => 3,
        }
    }

    fn label(self) -> &'static str {
        match self {
            Kind::Centred => "corr",
            Kind::Unit => "cos",
            Kind::Sparse => "peaks",
        }
    }

    fn dense(self) -> bool {
        self != Kind::Sparse
    }
}

/// The file name of a technique's cache of one kind.
pub fn file_name(technique: Technique, kind: Kind) -> String {
    format!("{}.{}.wvc", technique.name(), kind.label())
}

#[derive(Debug, Clone, Copy, Default)]
struct Layout {
    rows: usize,
    stride: usize,
    block: usize,
    coarse_stride: usize,
    nnz: usize,
    offsets: [usize; SECTIONS],
    len: usize,
}

/// The padded length of the coarse rows, over blocks of `block`, of rows of length `stride`.
pub(super) fn coarse_stride(stride: usize, block: usize) -> usize {
    stride.div_ceil(block).div_ceil(LANES) * LANES
}

// Section indices.
const IDS: usize = 0;
const STATUS: usize = 1;
const SCALE: usize = 2;
const L1: usize = 3;
const NPOS: usize = 4;
const F32: usize = 5;
const I8: usize = 6;
const POFF: usize = 7;
const PX: usize = 8;
const PH: usize = 9;
const PBIN: usize = 10;
const PW: usize = 11;
const CSCALE: usize = 12;
const CL1: usize = 13;
const CREST: usize = 14;
const CI8: usize = 15;
const POST_OFF: usize = 16;
const POST_ROW: usize = 17;
const POST_W: usize = 18;

impl Layout {
    fn new(kind: Kind, dim: usize, rows: usize, nnz: usize, block: usize) -> Layout {
        let stride = if kind.dense() {
            dim.div_ceil(LANES) * LANES
        } else {
            0
        };
        let sparse = if kind.dense() { 0 } else { nnz };
        let coarse_stride = coarse_stride(stride, block);
        let sizes = [
            8 * rows,
            rows,
            4 * rows,
            4 * rows,
            4 * rows,
            4 * rows * stride,
            rows * stride,
            8 * (rows + 1),
            4 * nnz,
            4 * sparse,
            2 * sparse,
            4 * sparse,
            4 * rows,
            4 * rows,
            4 * rows,
            rows * coarse_stride,
            if kind.dense() { 0 } else { 8 * (MZ_BINS + 1) },
            4 * sparse,
            4 * sparse,
        ];
        let mut offsets = [0; SECTIONS];
        let mut at = HEADER;
        for (o, s) in offsets.iter_mut().zip(sizes) {
            *o = at;
            at = (at + s).div_ceil(ALIGN) * ALIGN;
        }
        Layout {
            rows,
            stride,
            block,
            coarse_stride,
            nnz,
            offsets,
            len: at,
        }
    }
}

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
    /// The fingerprint and generation the cache was built from.
    pub built_from: Snapshot,
    /// The composite weighting the sparse weights were computed with.
    pub composite: CompositeParams,
    /// True when every peak position is a whole number (nominal m/z).
    pub integer_x: bool,
    /// Where the file lies (`None` when built in memory).
    pub path: Option<PathBuf>,
}

fn section<T>(map: &[u8], offset: usize, n: usize) -> &[T] {
    debug_assert!(offset.is_multiple_of(std::mem::align_of::<T>()));
    debug_assert!(offset + n * std::mem::size_of::<T>() <= map.len());
    // SAFETY: the map is page-aligned and every section offset is a multiple of 64, so the
    // pointer is aligned for T (f32, i8, u8, u16, u32, u64, i64); `open` checked that every
    // section lies inside the map; all bit patterns are valid values of these types; the
    // map is never written while mapped read-only (a rebuild writes a new file and renames it).
    unsafe { std::slice::from_raw_parts(map.as_ptr().add(offset).cast::<T>(), n) }
}

fn section_mut<T>(map: &mut [u8], offset: usize, n: usize) -> &mut [T] {
    assert!(offset + n * std::mem::size_of::<T>() <= map.len());
    // SAFETY: as in `section`; the caller holds the only reference to the map.
    unsafe { std::slice::from_raw_parts_mut(map.as_mut_ptr().add(offset).cast::<T>(), n) }
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

    pub(super) fn scales(&self) -> &[f32] {
        section(&self.map, self.layout.offsets[SCALE], self.layout.rows)
    }

    pub(super) fn l1(&self) -> &[f32] {
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
    pub(super) fn coarse_terms(&self) -> (&[f32], &[f32], &[f32]) {
        let n = self.layout.rows;
        (
            section(&self.map, self.layout.offsets[CSCALE], n),
            section(&self.map, self.layout.offsets[CL1], n),
            section(&self.map, self.layout.offsets[CREST], n),
        )
    }

    /// Sparse: the inverted index entry of one nominal m/z, the rows (ascending) with a peak
    /// there and that peak's posting weight (see [`posting_weight`]).
    pub(super) fn postings(&self, mz: usize) -> (&[u32], &[f32]) {
        if mz >= MZ_BINS {
            return (&[], &[]);
        }
        let off: &[u64] = section(&self.map, self.layout.offsets[POST_OFF], MZ_BINS + 1);
        let range = off[mz] as usize..off[mz + 1] as usize;
        let w: &[f32] = section(&self.map, self.layout.offsets[POST_W], self.sparse_nnz());
        let rows: &[u32] = section(&self.map, self.layout.offsets[POST_ROW], self.sparse_nnz());
        (&rows[range.clone()], &w[range])
    }

    pub(super) fn peak_range(&self, row: usize) -> std::ops::Range<usize> {
        let off: &[u64] = section(&self.map, self.layout.offsets[POFF], self.layout.rows + 1);
        off[row] as usize..off[row + 1] as usize
    }

    pub(super) fn peak_x(&self) -> &[f32] {
        section(&self.map, self.layout.offsets[PX], self.layout.nnz)
    }

    pub(super) fn peak_h(&self) -> &[f32] {
        section(&self.map, self.layout.offsets[PH], self.sparse_nnz())
    }

    pub(super) fn peak_bin(&self) -> &[u16] {
        section(&self.map, self.layout.offsets[PBIN], self.sparse_nnz())
    }

    pub(super) fn peak_w(&self) -> &[f32] {
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

    /// True when the cache was built from this state of the library.
    pub fn is_current(&self, snapshot: &Snapshot) -> bool {
        &self.built_from == snapshot
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
        Ok(c)
    }
}

fn u32_at(b: &[u8], at: usize) -> u32 {
    u32::from_le_bytes(b[at..at + 4].try_into().expect("4 bytes"))
}

fn u64_at(b: &[u8], at: usize) -> u64 {
    u64::from_le_bytes(b[at..at + 8].try_into().expect("8 bytes"))
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
    let block = u32_at(h, 324) as usize;
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
    let generation = u64_at(h, 80) as i64;
    let fingerprint = String::from_utf8_lossy(&h[104..168]).to_string();
    let composite = CompositeParams {
        intensity_exponent: f64::from_bits(u64_at(h, 88)),
        mass_exponent: f64::from_bits(u64_at(h, 96)),
        reverse: false,
    };
    let integer_x = h[320] == 1;
    let c = VectorCache {
        map,
        layout,
        technique,
        kind,
        dim,
        built_from: Snapshot {
            fingerprint,
            generation,
        },
        composite,
        integer_x,
        path: None,
    };
    // The peak offsets must be ascending and end at nnz, or a row would read past its peaks.
    let off: &[u64] = section(&c.map, layout.offsets[POFF], rows + 1);
    if off[0] != 0 || off[rows] as usize != nnz || off.windows(2).any(|w| w[0] > w[1]) {
        return Err("cache peak offsets are damaged".into());
    }
    if !kind.dense() {
        let post: &[u64] = section(&c.map, layout.offsets[POST_OFF], MZ_BINS + 1);
        if post[0] != 0 || post[MZ_BINS] as usize != nnz || post.windows(2).any(|w| w[0] > w[1]) {
            return Err("cache postings are damaged".into());
        }
    }
    Ok(c)
}

/// Fills a zeroed map of `layout.len` bytes with the rows the library streams.
struct Filler<'a> {
    map: &'a mut [u8],
    layout: Layout,
    kind: Kind,
    grid: &'a Grid,
    active: Vec<bool>,
    params: CompositeParams,
    row: usize,
    peak: usize,
    integer_x: bool,
}

impl Filler<'_> {
    fn push(&mut self, r: VectorRow) -> Result<()> {
        let (i, l) = (self.row, self.layout);
        if i >= l.rows {
            return Err(Error::invalid(
                "the library changed while its vector cache was built",
                "search again",
            ));
        }
        section_mut::<i64>(self.map, l.offsets[IDS], l.rows)[i] = r.spectrum_id;
        section_mut::<u8>(self.map, l.offsets[STATUS], l.rows)[i] =
            u8::from(r.status == Status::Verified);
        section_mut::<u32>(self.map, l.offsets[NPOS], l.rows)[i] =
            r.peaks.iter().filter(|p| p.height > 0.0).count() as u32;
        if self.kind.dense() {
            if r.vector.len() != self.grid.len() {
                return Err(Error::invalid(
                    format!(
                        "spectrum {} has {} values on a grid of {}",
                        r.spectrum_id,
                        r.vector.len(),
                        self.grid.len()
                    ),
                    "run `whorl check`: the stored prepared vector does not match the recipe",
                ));
            }
            let row = dense_row(&r.vector, self.kind, &self.active);
            let (q, scale, l1) = quantise(&row);
            let s = l.stride;
            section_mut::<f32>(self.map, l.offsets[F32], l.rows * s)[i * s..i * s + row.len()]
                .copy_from_slice(&row);
            section_mut::<i8>(self.map, l.offsets[I8], l.rows * s)[i * s..i * s + q.len()]
                .copy_from_slice(&q);
            section_mut::<f32>(self.map, l.offsets[SCALE], l.rows)[i] = scale;
            section_mut::<f32>(self.map, l.offsets[L1], l.rows)[i] = l1;
            let (coarse, rest) = coarse_row(&row, l.coarse_stride, l.block);
            let (q, scale, l1) = quantise(&coarse);
            let cs = l.coarse_stride;
            section_mut::<i8>(self.map, l.offsets[CI8], l.rows * cs)[i * cs..(i + 1) * cs]
                .copy_from_slice(&q);
            section_mut::<f32>(self.map, l.offsets[CSCALE], l.rows)[i] = scale;
            section_mut::<f32>(self.map, l.offsets[CL1], l.rows)[i] = l1;
            section_mut::<f32>(self.map, l.offsets[CREST], l.rows)[i] = rest;
        }
        let start = self.peak;
        let end = start + r.peaks.len();
        if end > l.nnz {
            return Err(Error::invalid(
                "the library changed while its vector cache was built",
                "search again",
            ));
        }
        for (k, p) in r.peaks.iter().enumerate() {
            section_mut::<f32>(self.map, l.offsets[PX], l.nnz)[start + k] = p.x as f32;
            self.integer_x &= p.x.fract() == 0.0 && (0.0..65536.0).contains(&p.x);
        }
        if !self.kind.dense() {
            let w = weights(&r.peaks, &self.params);
            for (k, p) in r.peaks.iter().enumerate() {
                section_mut::<f32>(self.map, l.offsets[PH], l.nnz)[start + k] = p.height as f32;
                section_mut::<u16>(self.map, l.offsets[PBIN], l.nnz)[start + k] =
                    p.x.round().clamp(0.0, 65535.0) as u16;
                section_mut::<f32>(self.map, l.offsets[PW], l.nnz)[start + k] = w[k];
            }
        }
        section_mut::<u64>(self.map, l.offsets[POFF], l.rows + 1)[i + 1] = end as u64;
        self.peak = end;
        self.row += 1;
        Ok(())
    }
}

/// The unmasked bins of a grid.
pub(super) fn active_bins(grid: &Grid) -> Vec<bool> {
    (0..grid.len()).map(|i| !grid.masked(grid.x(i))).collect()
}

/// A prepared vector made ready for dot products (see the module docs), in f64 then f32.
pub(super) fn dense_row(v: &[f32], kind: Kind, active: &[bool]) -> Vec<f32> {
    let mut x: Vec<f64> = v.iter().map(|&a| f64::from(a)).collect();
    if kind == Kind::Centred {
        let (mut n, mut s) = (0f64, 0f64);
        for (a, &on) in x.iter().zip(active) {
            if on {
                n += 1.0;
                s += a;
            }
        }
        let mean = if n > 0.0 { s / n } else { 0.0 };
        for (a, &on) in x.iter_mut().zip(active) {
            *a = if on { *a - mean } else { 0.0 };
        }
        if n < 2.0 {
            x.iter_mut().for_each(|a| *a = 0.0);
        }
    }
    let norm = x.iter().map(|a| a * a).sum::<f64>().sqrt();
    x.iter()
        .map(|&a| if norm > 0.0 { (a / norm) as f32 } else { 0.0 })
        .collect()
}

/// The coarse row of a dense row, and an upper bound on the L2 norm of what it leaves out.
///
/// Let P be the orthogonal projection onto vectors constant over each block of `block`
/// consecutive values. Every vector splits as x = Px + x', with Px and x' orthogonal, so for
/// two rows q.x = Pq.Px + q'.x', and by the Cauchy-Schwarz inequality
/// |q'.x'| <= |q'| |x'|. The coarse row holds sqrt(block) times each block mean, so that the
/// dot product of two coarse rows is Pq.Px; `rest` is |x'|. The scan bounds q.x by the
/// coarse dot product plus |q'| |x'|, reading 1/block of the bytes of the full i8 row.
/// Smooth spectra (bands several grid steps wide) leave little out, so the bound is tight
/// where it matters. The norm is computed in f64 and rounded up, so it is never too small.
pub(super) fn coarse_row(row: &[f32], coarse_stride: usize, block: usize) -> (Vec<f32>, f32) {
    let mut coarse = vec![0f32; coarse_stride];
    let mut rest = 0f64;
    let root = (block as f64).sqrt();
    for (c, values) in coarse.iter_mut().zip(row.chunks(block)) {
        // A short last block is padded with zeros, as the cache's rows are.
        let mean = values.iter().map(|&a| f64::from(a)).sum::<f64>() / block as f64;
        rest += values
            .iter()
            .map(|&a| (f64::from(a) - mean).powi(2))
            .sum::<f64>()
            + (block - values.len()) as f64 * mean * mean;
        *c = (mean * root) as f32;
    }
    let rest = rest.sqrt();
    (coarse, (rest * (1.0 + 1e-6) + 1e-7) as f32)
}

/// The block size of a cache's coarse rows, from a sample of its dense rows: the coarsest of
/// [`BLOCKS`] whose median left-out norm stays within [`BLOCK_REST`], else the finest. Only
/// speed depends on it (a looser coarse bound sends more rows to the full i8 row); the hits
/// never do. Smooth spectra (IR and Raman bands several grid steps wide) take blocks of 8,
/// spectra with lines one or two grid steps wide (1H NMR) small ones.
pub(super) fn choose_block(rows: &[Vec<f32>]) -> usize {
    if rows.is_empty() {
        return NO_BLOCK;
    }
    for block in BLOCKS {
        let mut rests: Vec<f32> = rows
            .iter()
            .map(|r| coarse_row(r, r.len().div_ceil(block), block).1)
            .collect();
        rests.sort_by(f32::total_cmp);
        if f64::from(rests[rests.len() / 2]) <= BLOCK_REST {
            return block;
        }
    }
    BLOCKS[BLOCKS.len() - 1]
}

/// Quantises a row to i8 with one scale (value = scale x q): the scale, and the L1 norm of
/// the dequantised row, which bounds the error of a quantised query against it.
pub(super) fn quantise(row: &[f32]) -> (Vec<i8>, f32, f32) {
    let max = row.iter().fold(0f32, |m, &a| m.max(a.abs()));
    if max == 0.0 {
        return (vec![0; row.len()], 0.0, 0.0);
    }
    let scale = max / 127.0;
    let q: Vec<i8> = row
        .iter()
        .map(|&a| {
            // Rounded to nearest, halves away from zero (as `f32::round`, without a libm
            // call on baseline x86-64): `t` truncates, and `v - t` is exact.
            let v = (a / scale).clamp(-127.0, 127.0);
            let t = v as i32;
            let f = v - t as f32;
            (t + i32::from(f >= 0.5) - i32::from(f <= -0.5)) as i8
        })
        .collect();
    let l1 = q.iter().map(|&v| f32::from(v).abs() * scale).sum();
    (q, scale, l1)
}

/// Stein & Scott weights I^m (m/z)^n of a peak list, L2-normalised (see `score::stein_scott`).
pub(super) fn weights(peaks: &[crate::prepare::Peak], params: &CompositeParams) -> Vec<f32> {
    let w: Vec<f64> = peaks
        .iter()
        .map(|p| {
            if p.height > 0.0 {
                p.height.powf(params.intensity_exponent) * p.x.powf(params.mass_exponent)
            } else {
                0.0
            }
        })
        .collect();
    let norm = w.iter().map(|a| a * a).sum::<f64>().sqrt();
    w.iter()
        .map(|&a| if norm > 0.0 { (a / norm) as f32 } else { 0.0 })
        .collect()
}

/// The weight a posting carries: the peak's cached weight, negated (sign bit set, also for
/// 0) when the cached height or weight may be a positive value lost to f32 rounding, so that
/// reverse search can leave the row's bound at 1 (see `scan::reverse_sums`).
pub(super) fn posting_weight(height: f32, weight: f32) -> f32 {
    if height > 0.0 && weight > 0.0 {
        weight
    } else {
        -weight.abs()
    }
}

/// Builds the inverted index of a filled sparse cache: a count per m/z, offsets by prefix
/// sum, then every row's peaks placed in row order, so each m/z's rows come out ascending.
fn fill_postings(map: &mut [u8], l: &Layout) {
    // The postings come after every section they are made from, so the map splits there.
    let at = l.offsets[POST_OFF];
    let (src, dst) = map.split_at_mut(at);
    let off: &[u64] = section(src, l.offsets[POFF], l.rows + 1);
    let bins: &[u16] = section(src, l.offsets[PBIN], l.nnz);
    let heights: &[f32] = section(src, l.offsets[PH], l.nnz);
    let weights: &[f32] = section(src, l.offsets[PW], l.nnz);
    let mut start = vec![0u64; MZ_BINS + 1];
    for &b in bins {
        start[usize::from(b) + 1] += 1;
    }
    for i in 0..MZ_BINS {
        start[i + 1] += start[i];
    }
    section_mut::<u64>(dst, 0, MZ_BINS + 1).copy_from_slice(&start);
    let (rows_at, w_at) = (l.offsets[POST_ROW] - at, l.offsets[POST_W] - at);
    let (rows_part, w_part) = dst.split_at_mut(w_at);
    let rows: &mut [u32] = section_mut(rows_part, rows_at, l.nnz);
    let ws: &mut [f32] = section_mut(w_part, 0, l.nnz);
    for r in 0..l.rows {
        for k in off[r] as usize..off[r + 1] as usize {
            let next = &mut start[usize::from(bins[k])];
            rows[*next as usize] = r as u32;
            ws[*next as usize] = posting_weight(heights[k], weights[k]);
            *next += 1;
        }
    }
}

struct Tag<'a> {
    layout: Layout,
    kind: Kind,
    dim: usize,
    params: CompositeParams,
    integer_x: bool,
    technique: Technique,
    snapshot: &'a Snapshot,
}

fn write_header(map: &mut [u8], c: &Tag<'_>) {
    let (l, technique, snapshot) = (c.layout, c.technique, c.snapshot);
    let h = &mut map[..HEADER];
    h[8..12].copy_from_slice(&FORMAT_VERSION.to_le_bytes());
    h[12..16].copy_from_slice(&c.kind.code().to_le_bytes());
    let name = technique.name().as_bytes();
    h[16..16 + name.len()].copy_from_slice(name);
    h[48..56].copy_from_slice(&(c.dim as u64).to_le_bytes());
    h[56..64].copy_from_slice(&(l.stride as u64).to_le_bytes());
    h[64..72].copy_from_slice(&(l.rows as u64).to_le_bytes());
    h[72..80].copy_from_slice(&(l.nnz as u64).to_le_bytes());
    h[80..88].copy_from_slice(&(snapshot.generation as u64).to_le_bytes());
    h[88..96].copy_from_slice(&c.params.intensity_exponent.to_bits().to_le_bytes());
    h[96..104].copy_from_slice(&c.params.mass_exponent.to_bits().to_le_bytes());
    let fp = snapshot.fingerprint.as_bytes();
    h[104..104 + fp.len().min(64)].copy_from_slice(&fp[..fp.len().min(64)]);
    for (i, &o) in l.offsets.iter().enumerate() {
        h[168 + 8 * i..176 + 8 * i].copy_from_slice(&(o as u64).to_le_bytes());
    }
    h[320] = u8::from(c.integer_x);
    h[324..328].copy_from_slice(&(l.block as u32).to_le_bytes());
    // The magic goes in last, so a map that was not completely filled never parses.
    h[0..8].copy_from_slice(MAGIC);
}

/// Streams the technique's rows into a map obtained from `make(len)`, then writes the header.
fn fill<M: std::ops::DerefMut<Target = [u8]>>(
    library: &Library,
    technique: Technique,
    kind: Kind,
    grid: &Grid,
    params: &CompositeParams,
    make: &mut dyn FnMut(usize) -> Result<M>,
) -> Result<(M, Layout, Snapshot, bool)> {
    let counts = library.vector_counts(technique)?;
    let active = active_bins(grid);
    let block = if kind.dense() {
        let sample: Vec<Vec<f32>> = library
            .sample_vectors(technique, BLOCK_SAMPLE)?
            .iter()
            .filter(|v| v.len() == grid.len())
            .map(|v| dense_row(v, kind, &active))
            .collect();
        choose_block(&sample)
    } else {
        NO_BLOCK
    };
    let layout = Layout::new(kind, grid.len(), counts.0, counts.1, block);
    let mut map = make(layout.len)?;
    let mut filler = Filler {
        map: &mut map,
        layout,
        kind,
        grid,
        active,
        params: *params,
        row: 0,
        peak: 0,
        integer_x: true,
    };
    let progress = library.vector_caches();
    progress.progress(technique, 0, layout.rows);
    let snapshot = library.scan_vectors(
        technique,
        &mut |n| {
            if n == layout.rows {
                Ok(())
            } else {
                Err(Error::invalid(
                    "the library changed while its vector cache was built",
                    "search again",
                ))
            }
        },
        &mut |r| {
            filler.push(r)?;
            if filler.row.is_multiple_of(4096) {
                progress.progress(technique, filler.row, layout.rows);
            }
            Ok(())
        },
    )?;
    progress.progress(technique, layout.rows, layout.rows);
    if filler.row != layout.rows || filler.peak != layout.nnz {
        return Err(Error::invalid(
            "the library changed while its vector cache was built",
            "search again",
        ));
    }
    let integer_x = filler.integer_x;
    if !kind.dense() {
        fill_postings(&mut map, &layout);
    }
    write_header(
        &mut map,
        &Tag {
            layout,
            kind,
            dim: grid.len(),
            params: *params,
            integer_x,
            technique,
            snapshot: &snapshot,
        },
    );
    Ok((map, layout, snapshot, integer_x))
}

/// Builds a cache in anonymous memory (in-memory libraries, read-only folders).
pub(super) fn build_anon(
    library: &Library,
    technique: Technique,
    kind: Kind,
    grid: &Grid,
    params: &CompositeParams,
) -> Result<VectorCache> {
    let (map, layout, snapshot, integer_x) =
        fill(library, technique, kind, grid, params, &mut |len| {
            MmapMut::map_anon(len.max(1)).map_err(|e| Error::io("allocating a vector cache", e))
        })?;
    let map = map
        .make_read_only()
        .map_err(|e| Error::io("sealing a vector cache", e))?;
    Ok(VectorCache {
        map,
        layout,
        technique,
        kind,
        dim: grid.len(),
        built_from: snapshot,
        composite: *params,
        integer_x,
        path: None,
    })
}

/// Builds a cache file in `dir`: written to a temporary file there, synced, then renamed
/// over the old one, so readers see the old cache or the new one, never half of one.
pub(super) fn build_file(
    library: &Library,
    dir: &Path,
    technique: Technique,
    kind: Kind,
    grid: &Grid,
    params: &CompositeParams,
) -> Result<VectorCache> {
    std::fs::create_dir_all(dir)
        .map_err(|e| Error::io(format!("creating {}", dir.display()), e))?;
    let tmp = tempfile::Builder::new()
        .prefix(".building-")
        .tempfile_in(dir)
        .map_err(|e| Error::io(format!("creating a file in {}", dir.display()), e))?;
    let file = tmp
        .as_file()
        .try_clone()
        .map_err(|e| Error::io("cache file", e))?;
    let (map, _, _, _) = fill(library, technique, kind, grid, params, &mut |len| {
        file.set_len(len.max(HEADER) as u64)
            .map_err(|e| Error::io("sizing the vector cache", e))?;
        // SAFETY: the temporary file is ours alone until it is renamed into place.
        unsafe { MmapMut::map_mut(&file) }.map_err(|e| Error::io("mapping the vector cache", e))
    })?;
    map.flush()
        .map_err(|e| Error::io("writing the vector cache", e))?;
    drop(map);
    file.sync_all()
        .map_err(|e| Error::io("syncing the vector cache", e))?;
    let path = dir.join(file_name(technique, kind));
    tmp.persist(&path)
        .map_err(|e| Error::io(format!("renaming into {}", path.display()), e.error))?;
    VectorCache::open(&path, technique, kind)
}
