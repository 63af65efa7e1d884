//! The first scan: every allowed row's key, in parallel chunks, each worker keeping its own
//! top-M selection and sharing its smallest kept key with the others.

use std::sync::atomic::{AtomicU32, AtomicUsize, Ordering};

use rayon::prelude::*;

use super::CHUNK;
use super::dense::{Counts, dense_key};
use super::query::{Bins, Query};
use super::shared::Shared;
use super::sparse::{RowSums, Sums, accumulate, sparse_key};
use crate::cache::{Kind, TopK, VectorCache, i8_dots, quantise};
use crate::search::Request;

/// Every first-scan key of a group of unknowns, chunk by chunk: in chunk `c`, unknown `j`'s
/// keys of rows `r0..r1` are at `c * CHUNK * nq + j * (r1 - r0)`. Rows outside the mask have
/// minus infinity.
pub(super) struct Keys {
    pub(super) keys: Vec<f32>,
    pub(super) rows: usize,
    pub(super) nq: usize,
}

impl Keys {
    /// Rows whose key for unknown `j` reaches `threshold`.
    pub(super) fn rows_reaching(&self, j: usize, threshold: f64) -> Vec<usize> {
        let mut rows = Vec::new();
        for r0 in (0..self.rows).step_by(CHUNK) {
            let len = CHUNK.min(self.rows - r0);
            let at = r0 * self.nq + j * len;
            for (k, &key) in self.keys[at..at + len].iter().enumerate() {
                if f64::from(key) >= threshold {
                    rows.push(r0 + k);
                }
            }
        }
        rows
    }
}

/// What every chunk of the first scan reads: the cache, the unknowns in their quantised
/// forms, and the request's weights.
pub(super) struct Scan<'a> {
    pub(super) cache: &'a VectorCache,
    pub(super) queries: &'a [Query<'a>],
    /// Dense: each unknown quantised (values, scale), full and coarse.
    pub(super) full: Vec<(Vec<i8>, f32)>,
    pub(super) coarse: Vec<(Vec<i8>, f32)>,
    /// The coarse unknowns one after another, for the kernel.
    pub(super) coarse_matrix: Vec<i8>,
    pub(super) mask: &'a [u64],
    pub(super) bins: &'a Bins,
    pub(super) w: f64,
    pub(super) tolerance: f64,
    /// Sparse: what the sums are for.
    pub(super) sums: Sums,
}

/// One worker's state: its selection per unknown, and (EI-MS) where its postings cursors
/// stopped, per unknown.
pub(super) struct Worker {
    pub(super) heaps: Vec<TopK>,
    pub(super) cursors: Vec<Vec<(usize, usize)>>,
    /// Row and unknown pairs whose full i8 row was read.
    pub(super) fine: usize,
}

impl Scan<'_> {
    pub(super) fn on(&self, r: usize) -> bool {
        self.mask[r / 64] >> (r % 64) & 1 == 1
    }

    /// Keys of the rows `r0..r0 + len` for every unknown into `keys` (unknown-major), pushed
    /// into the worker's selections; `outside` is the largest smallest-kept key any worker
    /// had published, per unknown, when the chunk began.
    pub(super) fn sparse_chunk(
        &self,
        r0: usize,
        keys: &mut [f32],
        outside: &[f32],
        worker: &mut Worker,
    ) {
        let len = keys.len() / self.queries.len();
        let mut sums = vec![RowSums::ZERO; len];
        for (j, q) in self.queries.iter().enumerate() {
            let cursors = &mut worker.cursors[j];
            accumulate(self.cache, q, r0, &mut sums, self.sums, cursors);
            let heap = &mut worker.heaps[j];
            for r in (r0..r0 + len).filter(|&r| self.on(r)) {
                let floor = heap.floor().max(outside[j]);
                let (w, tol, mode) = (self.w, self.tolerance, self.sums);
                let key = sparse_key(self.cache, q, r, &sums[r - r0], w, tol, mode, floor);
                keys[j * len + r - r0] = key;
                heap.push(key, r);
            }
        }
    }

    /// As [`Scan::sparse_chunk`], for dense rows: every row's coarse dot products first
    /// (1/b of the bytes); a row's full i8 row is read only when its coarse bound, then its
    /// peak-overlap bound, still reach the smallest kept key.
    pub(super) fn dense_chunk(
        &self,
        r0: usize,
        keys: &mut [f32],
        outside: &[f32],
        worker: &mut Worker,
    ) {
        let (cache, nq) = (self.cache, self.queries.len());
        let len = keys.len() / nq;
        let (s, cs) = (cache.stride(), cache.coarse_stride());
        let mut dots = vec![0i32; len * nq];
        let crows = &cache.coarse_matrix()[r0 * cs..(r0 + len) * cs];
        i8_dots(crows, cs, &self.coarse_matrix, &mut dots);
        let fine = cache.i8_matrix();
        let (scales, l1s, px) = (cache.scales(), cache.l1(), cache.peak_x());
        let (cscales, cl1s, rests) = cache.coarse_terms();
        let (covers, values) = (cache.covers(), cache.f32_matrix());
        // Unknowns covering the whole grid against a row covering it: the dot product is
        // the measure and every peak counts, with nothing to look up per unknown.
        let dim = cache.dim;
        let whole = (0, dim);
        let all_whole = self.queries.iter().all(|q| q.cover.bins == whole);
        for r in (r0..r0 + len).filter(|&r| self.on(r)) {
            let (csx, cl1x, rest) = (cscales[r], cl1s[r], rests[r]);
            let row = &fine[r * s..(r + 1) * s];
            let row_x = &px[cache.peak_range(r)];
            let c = &covers[4 * r..4 * r + 4];
            let cover = (c[0] as usize, c[1] as usize, c[2], c[3]);
            let mut memo = None;
            for (j, heap) in worker.heaps.iter_mut().enumerate() {
                let q = &self.queries[j];
                let cdot = dots[(r - r0) * nq + j];
                let (qv, qs) = (&self.full[j].0, self.full[j].1);
                let (shared, counts) = if all_whole && (cover.0, cover.1) == whole {
                    (Shared::Same, Counts::All)
                } else {
                    let values = &values[r * s..(r + 1) * s];
                    let shared = q.cover.shared_memo(cover, values, &mut memo);
                    (shared, shared_counts(q, (cover.0, cover.1), row_x))
                };
                let (key, read) = dense_key(
                    q,
                    (self.coarse[j].1, csx, cl1x, rest, cdot),
                    (qs, scales[r], l1s[r], row, qv),
                    self.bins,
                    row_x,
                    (shared, counts),
                    self.w,
                    heap.floor().max(outside[j]),
                );
                worker.fine += usize::from(read);
                keys[j * len + r - r0] = key;
                heap.push(key, r);
            }
        }
    }
}

/// The peaks the Jaccard bound of a row covering `bins` counts (see [`Counts`]).
#[inline]
fn shared_counts(q: &Query<'_>, bins: (usize, usize), row_x: &[f32]) -> Counts {
    if q.cover.whole(bins) {
        return Counts::All;
    }
    let s = q.cover.shared_bins(bins);
    match q.cover.row_peaks_in(&s, row_x) {
        Some(nr) => Counts::Inside(q.cover.unknown_peaks_in(&s), nr),
        None => Counts::Unsure,
    }
}

/// The first scan: for every unknown, the `m` rows with the largest bounds, every key, and
/// the number of row and unknown pairs whose full i8 row was read.
pub(super) fn first_scan(
    cache: &VectorCache,
    queries: &[Query<'_>],
    mask: &[u64],
    m: usize,
    w: f64,
    bins: &Bins,
    request: &Request,
) -> (Vec<TopK>, Keys, usize) {
    let (n, nq) = (cache.rows(), queries.len());
    let quantised = |rows: &mut dyn Iterator<Item = &Vec<f32>>| -> Vec<(Vec<i8>, f32)> {
        rows.map(|v| {
            let (v, s, _) = quantise(v);
            (v, s)
        })
        .collect()
    };
    let coarse = quantised(&mut queries.iter().map(|q| &q.coarse));
    let scan = Scan {
        cache,
        queries,
        full: quantised(&mut queries.iter().map(|q| &q.dense)),
        coarse_matrix: coarse.iter().flat_map(|(v, _)| v.iter().copied()).collect(),
        coarse,
        mask,
        bins,
        w,
        tolerance: request.params.peak_tolerance,
        sums: match (cache.kind, request.params.composite.reverse) {
            (Kind::Entropy, _) => Sums::Entropy,
            (_, true) => Sums::Reverse,
            (_, false) => Sums::Forward,
        },
    };
    let mut keys = vec![f32::NEG_INFINITY; n * nq];
    // Every worker's smallest kept key, once its selection is full, is a lower bound on the
    // m-th largest key overall (its m keys all reach it); the largest of them, shared
    // between workers chunk by chunk, tells every worker which keys need not be tight.
    // Keys are positive, so their bit patterns order as they do.
    let shared: Vec<AtomicU32> = (0..nq).map(|_| AtomicU32::new(0)).collect();
    let fine = AtomicUsize::new(0);
    let new_worker = || Worker {
        heaps: vec![TopK::new(m); nq],
        cursors: vec![Vec::new(); nq],
        fine: 0,
    };
    let heaps = keys
        .par_chunks_mut(CHUNK * nq)
        .enumerate()
        .fold(new_worker, |mut worker, (c, keys)| {
            let r0 = c * CHUNK;
            let words = &mask[r0 / 64..(r0 + keys.len() / nq).div_ceil(64)];
            if words.iter().all(|&w| w == 0) {
                return worker;
            }
            let outside: Vec<f32> = shared
                .iter()
                .map(|a| f32::from_bits(a.load(Ordering::Relaxed)))
                .collect();
            if !cache.kind.dense() {
                scan.sparse_chunk(r0, keys, &outside, &mut worker);
            } else {
                scan.dense_chunk(r0, keys, &outside, &mut worker);
            }
            for (heap, at) in worker.heaps.iter().zip(&shared) {
                let f = heap.floor();
                if f > 0.0 {
                    at.fetch_max(f.to_bits(), Ordering::Relaxed);
                }
            }
            worker
        })
        .map(|worker| {
            fine.fetch_add(worker.fine, Ordering::Relaxed);
            worker.heaps
        })
        .reduce(
            || vec![TopK::new(m); nq],
            |a, b| a.into_iter().zip(b).map(|(x, y)| x.merge(y)).collect(),
        );
    (heaps, Keys { keys, rows: n, nq }, fine.into_inner())
}
