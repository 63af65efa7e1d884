//! One unknown made ready for the scan: its dense row, coarse row and peak bitmap, or its
//! m/z table, and the bins that map peak positions to the bitmap.

use super::NEAR_BINS;
use super::shared::QueryCover;
use crate::cache::{Kind, VectorCache, coarse_row, covered_row, entropy_row, weights};
use crate::prepare::Prepared;
use crate::technique::Grid;

/// One unknown made ready for the scan.
pub(super) struct Query<'a> {
    pub(super) unknown: &'a Prepared,
    pub(super) dense: Vec<f32>,
    pub(super) l1: f32,
    // Dense: the coarse row, its L1 norm, and the L2 norm of what it leaves out.
    pub(super) coarse: Vec<f32>,
    pub(super) coarse_l1: f32,
    pub(super) rest: f32,
    // Sparse: by nominal m/z, the unknown's weight, 1 when it has a peak there, and 1 when
    // that peak's height is above 0.
    pub(super) table: Vec<[f32; 3]>,
    // Sparse: the nominal m/z where the unknown has a peak, ascending.
    pub(super) mzs: Vec<usize>,
    pub(super) positive: usize,
    pub(super) xs: Vec<f64>,
    // Dense: bit b set when some unknown peak lies within the (widened) tolerance of a
    // position in bin b.
    pub(super) near: Vec<u64>,
    // Dense: the bins the unknown covers and what the measure over shared bins needs.
    pub(super) cover: QueryCover,
}

/// Peak positions to bitmap bins: `NEAR_BINS` equal bins over the grid's range, positions
/// outside clamped to the end bins. The map is monotone (a subtraction, a product with a
/// positive factor, a floor and a clamp each are, in floating point too; the floor is a
/// truncation of a value clamped at 0), so a position
/// within `[u - t, u + t]` falls in a bin between those of `u - t` and `u + t`.
#[derive(Debug, Clone, Copy)]
pub(super) struct Bins {
    pub(super) lo: f64,
    pub(super) inv: f64,
}

impl Bins {
    pub(super) fn new(grid: &Grid) -> Bins {
        let (lo, hi) = (grid.start.min(grid.stop), grid.start.max(grid.stop));
        let span = hi - lo;
        Bins {
            lo,
            inv: if span > 0.0 {
                NEAR_BINS as f64 / span
            } else {
                0.0
            },
        }
    }

    #[inline]
    pub(super) fn bin(self, x: f64) -> usize {
        // Truncation is the floor for values above 0; `as` saturates; NaN goes to bin 0.
        let v = (x - self.lo) * self.inv;
        if v > 0.0 {
            v.min((NEAR_BINS - 1) as f64) as u32 as usize
        } else {
            0
        }
    }
}

/// The tolerance the cache's peak bounds use: wider than the request's, so that positions
/// rounded to f32 in the cache never match fewer peaks than the exact f64 ones.
pub(super) fn widened(tolerance: f64) -> f64 {
    tolerance + 1e-3 + tolerance * 1e-6
}

impl<'a> Query<'a> {
    /// A query with the unknown's peak positions and nothing else filled in yet.
    pub(super) fn blank(unknown: &'a Prepared) -> Query<'a> {
        Query {
            near: vec![],
            unknown,
            dense: vec![],
            l1: 0.0,
            coarse: vec![],
            coarse_l1: 0.0,
            rest: 0.0,
            table: vec![],
            mzs: vec![],
            positive: 0,
            xs: unknown.peaks.iter().map(|p| p.x).collect(),
            cover: QueryCover::default(),
        }
    }
}

pub(super) fn make_query<'a>(
    unknown: &'a Prepared,
    cache: &VectorCache,
    grid: &Grid,
    active: &[bool],
    bins: &Bins,
    tolerance: f64,
) -> Query<'a> {
    let mut q = Query::blank(unknown);
    if !cache.kind.dense() {
        // A table up to the unknown's largest m/z only, so it stays in the L1 cache; a row's
        // m/z beyond it has weight 0 and no unknown peak.
        let len = unknown
            .peaks
            .iter()
            .map(|p| p.x as usize + 1)
            .max()
            .unwrap_or(0);
        q.table = vec![[0.0; 3]; len];
        let w = if cache.kind == Kind::Entropy {
            entropy_row(&unknown.peaks)
        } else {
            weights(&unknown.peaks, &cache.composite)
        };
        for (p, w) in unknown.peaks.iter().zip(w) {
            let bin = p.x as usize;
            q.table[bin] = [w, 1.0, if p.height > 0.0 { 1.0 } else { 0.0 }];
        }
        q.positive = unknown.peaks.iter().filter(|p| p.height > 0.0).count();
        q.mzs = (0..q.table.len())
            .filter(|&b| q.table[b][1] == 1.0)
            .collect();
    } else {
        // The unknown over its own active bins, as the cache holds each row over its own.
        let covered = unknown.covered_bins(grid);
        let mut row = covered_row(&unknown.vector, cache.kind, active, covered.clone());
        q.cover = QueryCover::new(&row, active, covered, grid, cache.kind, &q.xs);
        row.resize(cache.stride(), 0.0);
        q.l1 = row.iter().map(|a| a.abs()).sum();
        (q.coarse, q.rest) = coarse_row(&row, cache.coarse_stride(), cache.block());
        q.coarse_l1 = q.coarse.iter().map(|a| a.abs()).sum();
        q.dense = row;
        q.near = vec![0u64; NEAR_BINS / 64];
        let t = widened(tolerance);
        for p in &unknown.peaks {
            for b in bins.bin(p.x - t)..=bins.bin(p.x + t) {
                q.near[b / 64] |= 1 << (b % 64);
            }
        }
    }
    q
}
