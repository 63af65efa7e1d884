//! The cache file's layout: a fixed header, then sections aligned to 64 bytes.
//!
//! ```text
//! header   1024 bytes: magic, format version, kind, technique, grid length (dim), padded
//!          row length (stride), rows, peaks (nnz), generation, state hash, composite
//!          exponents, section offsets, flags (byte 400), coarse factor (bytes 404-407),
//!          the XXH3-64 checksum of every section (bytes 512-671, see [`checksum`]), the
//!          snapshot's content sum (bytes 680-711) and highest spectrum id (712-719) and,
//!          last, the checksum of the header itself (bytes 1016-1023, over bytes 0-1015)
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
//! cover    f64 x 4 x rows   dense: the row's covered bins a..b (see `prepare::Coverage`),
//!                           and the sum and the sum of squares of its f32 values
//! peak_off u64 x (rows + 1) where each row's peaks start
//! peak_x   f32 x nnz        peak positions
//! peak_h   f32 x nnz        sparse: peak heights
//! peak_bin u16 x nnz        sparse: nominal m/z
//! peak_w   f32 x nnz        sparse: Stein & Scott weights, L2-normalised per row
//! ```
//!
//! Dense rows are stored ready for a dot product, over the row's own active bins: the
//! unmasked bins its spectrum covers (all unmasked bins for a spectrum covering the grid).
//! For [`Kind::Centred`] a row is the prepared vector with its mean over its active bins
//! subtracted, every other bin set to 0, and then L2-normalised: Pearson's r over the
//! unmasked bins of two spectra covering the same bins equals the dot product of their
//! rows so transformed. For [`Kind::Unit`] a row is the vector with the bins it does not
//! cover set to 0, L2-normalised, whose dot products are cosines. Where two spectra cover
//! different bins, the scan corrects the dot product with the sums over the shared bins
//! (`search::scan`). Values are little-endian.

use crate::score::CompositeParams;
use crate::technique::Technique;

use super::Snapshot;

/// The cache folder inside a library folder.
pub const CACHE_DIR: &str = "cache";
/// The version of the cache file layout; a file of another version is rebuilt.
pub const FORMAT_VERSION: u32 = 6;
pub(super) const MAGIC: &[u8; 8] = b"WHORLVC\0";
pub(super) const HEADER: usize = 1024;
/// Where the header keeps the checksum of each section (u64, in section order).
pub(super) const SUMS_AT: usize = 512;
/// Where the header keeps the checksum of its own bytes before it.
pub(super) const HEADER_SUM_AT: usize = HEADER - 8;
pub(super) const ALIGN: usize = 64;
pub(super) const SECTIONS: usize = 20;
/// Where the header keeps its flags (1: every peak position is a whole number) and the
/// coarse block size (u32), after the section offsets.
pub(super) const FLAGS_AT: usize = 400;
pub(super) const BLOCK_AT: usize = 404;
/// Where the header keeps the content sum of the snapshot (32 bytes) and the library's
/// highest spectrum id at the build (i64), after the section checksums.
pub(super) const CONTENT_SUM_AT: usize = 680;
pub(super) const LAST_ID_AT: usize = 712;
/// Nominal m/z values an inverted index covers (peak bins are u16).
pub(super) const MZ_BINS: usize = 1 << 16;
/// The block sizes a cache may average its coarse rows over, coarsest first.
pub const BLOCKS: [usize; 3] = [8, 4, 2];
/// The block size of caches without dense rows (recorded, never used).
pub(super) const NO_BLOCK: usize = 4;
/// Rows a build samples to choose its block size.
pub const BLOCK_SAMPLE: usize = 1000;
/// The largest median left-out norm (of unit rows) a block size may leave in the sample.
pub(super) const BLOCK_REST: f64 = 0.25;
/// Dense rows are padded to a multiple of this many values, so kernels need no tail loop.
pub const LANES: usize = 32;

/// What the rows of a cache hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Kind {
    /// Mean-centred over unmasked bins, masked bins zeroed, L2-normalised: dot = Pearson r.
    Centred,
    /// L2-normalised: dot = cosine.
    Unit,
    /// Peak lists with Stein & Scott weights (EI-MS, composite).
    Sparse,
    /// Peak lists with entropy-weighted probabilities (EI-MS, entropy similarity): the same
    /// layout as `Sparse`, its weight section holding each row's `score::entropy_weights`.
    Entropy,
}

impl Kind {
    pub(super) fn code(self) -> u32 {
        match self {
            Kind::Centred => 1,
            Kind::Unit => 2,
            Kind::Sparse => 3,
            Kind::Entropy => 4,
        }
    }

    pub(super) fn label(self) -> &'static str {
        match self {
            Kind::Centred => "corr",
            Kind::Unit => "cos",
            Kind::Sparse => "peaks",
            Kind::Entropy => "entropy",
        }
    }

    /// Dense rows on the grid (else peak lists with an inverted index by nominal m/z).
    pub fn dense(self) -> bool {
        !matches!(self, Kind::Sparse | Kind::Entropy)
    }
}

/// The file name of a technique's cache of one kind.
pub fn file_name(technique: Technique, kind: Kind) -> String {
    format!("{}.{}.wvc", technique.name(), kind.label())
}

#[derive(Debug, Clone, Copy, Default)]
pub(super) struct Layout {
    pub(super) rows: usize,
    pub(super) stride: usize,
    pub(super) block: usize,
    pub(super) coarse_stride: usize,
    pub(super) nnz: usize,
    pub(super) offsets: [usize; SECTIONS],
    pub(super) len: usize,
}

/// The padded length of the coarse rows, over blocks of `block`, of rows of length `stride`.
pub fn coarse_stride(stride: usize, block: usize) -> usize {
    stride.div_ceil(block).div_ceil(LANES) * LANES
}

// Section indices.
pub(super) const IDS: usize = 0;
pub(super) const STATUS: usize = 1;
pub(super) const SCALE: usize = 2;
pub(super) const L1: usize = 3;
pub(super) const NPOS: usize = 4;
pub(super) const F32: usize = 5;
pub(super) const I8: usize = 6;
pub(super) const POFF: usize = 7;
pub(super) const PX: usize = 8;
pub(super) const PH: usize = 9;
pub(super) const PBIN: usize = 10;
pub(super) const PW: usize = 11;
pub(super) const CSCALE: usize = 12;
pub(super) const CL1: usize = 13;
pub(super) const CREST: usize = 14;
pub(super) const CI8: usize = 15;
pub(super) const POST_OFF: usize = 16;
pub(super) const POST_ROW: usize = 17;
pub(super) const POST_W: usize = 18;
pub(super) const COVER: usize = 19;

/// The sections' names, for messages, in section order.
pub(super) const SECTION_NAMES: [&str; SECTIONS] = [
    "ids", "status", "scale", "l1", "npos", "f32", "i8", "peak_off", "peak_x", "peak_h",
    "peak_bin", "peak_w", "c_scale", "c_l1", "c_rest", "c_i8", "post_off", "post_row", "post_w",
    "cover",
];

impl Layout {
    pub(super) fn new(kind: Kind, dim: usize, rows: usize, nnz: usize, block: usize) -> Layout {
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
            if kind.dense() { 32 * rows } else { 0 },
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

pub(super) fn section<T>(map: &[u8], offset: usize, n: usize) -> &[T] {
    debug_assert!(offset.is_multiple_of(std::mem::align_of::<T>()));
    debug_assert!(offset + n * std::mem::size_of::<T>() <= map.len());
    // SAFETY: the map is page-aligned and every section offset is a multiple of 64, so the
    // pointer is aligned for T (f32, i8, u8, u16, u32, u64, i64); `open` checked that every
    // section lies inside the map; all bit patterns are valid values of these types; the
    // map is never written while mapped read-only (a rebuild writes a new file and renames it).
    unsafe { std::slice::from_raw_parts(map.as_ptr().add(offset).cast::<T>(), n) }
}

pub(super) fn section_mut<T>(map: &mut [u8], offset: usize, n: usize) -> &mut [T] {
    assert!(offset + n * std::mem::size_of::<T>() <= map.len());
    // SAFETY: as in `section`; the caller holds the only reference to the map.
    unsafe { std::slice::from_raw_parts_mut(map.as_mut_ptr().add(offset).cast::<T>(), n) }
}

pub(super) fn u32_at(b: &[u8], at: usize) -> u32 {
    u32::from_le_bytes(b[at..at + 4].try_into().expect("4 bytes"))
}

pub(super) fn u64_at(b: &[u8], at: usize) -> u64 {
    u64::from_le_bytes(b[at..at + 8].try_into().expect("8 bytes"))
}

pub(super) struct Tag<'a> {
    pub(super) layout: Layout,
    pub(super) kind: Kind,
    pub(super) dim: usize,
    pub(super) params: CompositeParams,
    pub(super) integer_x: bool,
    pub(super) technique: Technique,
    pub(super) snapshot: &'a Snapshot,
}

pub(super) fn write_header(map: &mut [u8], c: &Tag<'_>) {
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
    let fp = snapshot.state_hash.as_bytes();
    h[104..104 + fp.len().min(64)].copy_from_slice(&fp[..fp.len().min(64)]);
    for (i, &o) in l.offsets.iter().enumerate() {
        h[168 + 8 * i..176 + 8 * i].copy_from_slice(&(o as u64).to_le_bytes());
    }
    h[FLAGS_AT] = u8::from(c.integer_x);
    h[BLOCK_AT..BLOCK_AT + 4].copy_from_slice(&(l.block as u32).to_le_bytes());
    h[CONTENT_SUM_AT..CONTENT_SUM_AT + 32].copy_from_slice(&snapshot.sum);
    h[LAST_ID_AT..LAST_ID_AT + 8].copy_from_slice(&(snapshot.last_id as u64).to_le_bytes());
    h[0..8].copy_from_slice(MAGIC);
    // The checksums go in last: the sections', then the header's over everything before it.
    let sums = section_sums(map, &l);
    let h = &mut map[..HEADER];
    for (i, s) in sums.iter().enumerate() {
        h[SUMS_AT + 8 * i..SUMS_AT + 8 * i + 8].copy_from_slice(&s.to_le_bytes());
    }
    let own = checksum(&h[..HEADER_SUM_AT]);
    h[HEADER_SUM_AT..HEADER].copy_from_slice(&own.to_le_bytes());
}

/// The checksum a cache file keeps of each section and of its header: XXH3, 64-bit variant,
/// seed 0 (Yann Collet, "xxHash - Extremely fast non-cryptographic hash algorithm",
/// XXH3 specification, `doc/xxhash_spec.md` of the xxHash repository, 2021), through the
/// `xxhash-rust` crate. It guards against damage (a flipped byte, a torn write), not against
/// someone who means harm: they could recompute it, and the cache is derived data anyway.
pub fn checksum(bytes: &[u8]) -> u64 {
    xxhash_rust::xxh3::xxh3_64(bytes)
}

/// The byte range each section's checksum covers: from its offset to the next section's (the
/// alignment padding included, so every byte of the file after the header is covered), the
/// last one to the end of the file.
pub(super) fn section_span(l: &Layout, i: usize) -> std::ops::Range<usize> {
    let end = if i + 1 < SECTIONS {
        l.offsets[i + 1]
    } else {
        l.len
    };
    l.offsets[i]..end
}

/// Every section's checksum, computed in parallel (the sections of a dense cache differ in
/// size by orders of magnitude, so the largest ones are cut into chunks whose checksums are
/// combined by a checksum of their checksums).
pub(super) fn section_sums(map: &[u8], l: &Layout) -> [u64; SECTIONS] {
    use rayon::prelude::*;
    let sums: Vec<u64> = (0..SECTIONS)
        .into_par_iter()
        .map(|i| chunked_checksum(&map[section_span(l, i)]))
        .collect();
    sums.try_into().expect("one checksum per section")
}

/// Bytes checksummed by one worker at a time.
const CHUNK: usize = 1 << 22;

/// The checksum of a section: XXH3-64 of the section when it is at most one chunk, else
/// XXH3-64 of the little-endian XXH3-64 checksums of its 4 MiB chunks (computed in parallel).
fn chunked_checksum(bytes: &[u8]) -> u64 {
    use rayon::prelude::*;
    if bytes.len() <= CHUNK {
        return checksum(bytes);
    }
    let parts: Vec<u8> = bytes
        .par_chunks(CHUNK)
        .map(|c| checksum(c).to_le_bytes())
        .collect::<Vec<_>>()
        .concat();
    checksum(&parts)
}
