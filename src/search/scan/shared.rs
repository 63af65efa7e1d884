//! The measure over the bins a query and a row both cover, from their dot product.
//!
//! A cached row x is its spectrum over its own active bins C (the unmasked bins it covers):
//! centred over C and L2-normalised there (correlation), or L2-normalised (cosine), zero
//! elsewhere. The query q is made the same way over its own bins Q. Scores compare the two
//! over S = Q ∩ C. With the sums over S of each side (n active bins, q1 = Σ q, q2 = Σ q²,
//! x1, x2 likewise),
//!
//! ```text
//! Pearson_S(q, x) = (q.x - q1 x1 / n) / (sqrt(q2 - q1² / n) sqrt(x2 - x1² / n))
//! cosine_S(q, x)  = q.x / (sqrt(q2) sqrt(x2))
//! ```
//!
//! because q and x are zero outside Q and C, so their dot product is a sum over S (the
//! definitions of r and of the cosine, expanded). Both are affine (or scale) invariant, so
//! the cached forms give the measure of the prepared vectors. The measure is increasing in
//! q.x, so an upper bound on the dot product (the scan's coarse and i8 bounds) gives an
//! upper bound on the measure. When Q = C the denominators are 1 and the numerator's second
//! term 0: the dot product is the measure, as for every row of a library whose spectra
//! cover the grid.
//!
//! The query's sums over any S come from its prefix sums (O(1)); the row's over its own
//! bins are stored in the cache, and over a part of them are read from its f32 row (only
//! when the query covers less than the row).

use std::ops::Range;

use crate::cache::Kind;
use crate::technique::Grid;

/// Denominators below this are not divided by: the bound is then 1. Each factor of the
/// denominator is at most 1, so at this size the f32 rounding of the cached rows (relative
/// 6e-8 per value) moves the measure by less than 1e-5, which the slack covers.
const SMALLEST_DENOMINATOR: f64 = 0.05;
/// Added to a dot product before it is scaled, and to the scaled measure, so that f32
/// rounding never makes a bound too low.
const SLACK: f64 = 1e-5;
const SCALED_MARGIN: f64 = 1e-4;

/// How a row's dot product with the query becomes their measure over the shared bins.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Shared {
    /// Query and row cover the same bins: the dot product is the measure.
    Same,
    /// measure = (dot - c) / d.
    Scaled { c: f64, d: f64 },
    /// Fewer than two shared active bins (correlation) or none (cosine): the measure is 0.
    Zero,
    /// A denominator too small to divide by safely: the measure is bounded by 1.
    Unbounded,
}

impl Shared {
    /// An upper bound on the measure from an upper bound on the dot product.
    #[inline]
    pub(super) fn bound(self, dot: f64) -> f64 {
        match self {
            Shared::Same => dot,
            Shared::Scaled { c, d } => (dot - c + SLACK) / d + SCALED_MARGIN,
            Shared::Zero => 0.0,
            Shared::Unbounded => 1.0,
        }
    }
}

/// The query's side: its covered bins, prefix sums of its row and of the active bins, and
/// what the peak counts need.
#[derive(Debug, Clone, Default)]
pub(super) struct QueryCover {
    /// The query's covered bins `a..b`.
    pub(super) bins: (usize, usize),
    /// Grid length.
    pub(super) len: usize,
    centred: bool,
    /// Prefix sums of the query row, its squares, and the active bins (length len + 1).
    p1: Vec<f64>,
    p2: Vec<f64>,
    pn: Vec<u32>,
    /// Grid start and step, to put peaks in bins.
    start: f64,
    step: f64,
    /// The grid bins of the unknown's peaks (`None`: off the grid).
    peak_bins: Vec<Option<usize>>,
}

impl QueryCover {
    /// The query's side from its dense row (zero outside its bins), the grid's active bins,
    /// its covered bins and its peak positions.
    pub(super) fn new(
        row: &[f32],
        active: &[bool],
        bins: Range<usize>,
        grid: &Grid,
        kind: Kind,
        peaks: &[f64],
    ) -> QueryCover {
        let len = grid.len();
        let (mut p1, mut p2, mut pn) = (vec![0.0; len + 1], vec![0.0; len + 1], vec![0; len + 1]);
        for i in 0..len {
            let a = f64::from(row.get(i).copied().unwrap_or(0.0));
            p1[i + 1] = p1[i] + a;
            p2[i + 1] = p2[i] + a * a;
            pn[i + 1] = pn[i] + u32::from(active.get(i).copied().unwrap_or(false));
        }
        QueryCover {
            bins: (bins.start, bins.end),
            len,
            centred: kind == Kind::Centred,
            p1,
            p2,
            pn,
            start: grid.start,
            step: grid.step,
            peak_bins: peaks.iter().map(|&x| grid.index_of(x)).collect(),
        }
    }

    /// The bins the query and a row covering `a..b` share.
    #[inline]
    pub(super) fn shared_bins(&self, (a, b): (usize, usize)) -> Range<usize> {
        let lo = self.bins.0.max(a);
        lo..self.bins.1.min(b).max(lo)
    }

    /// True when the shared bins with a row covering `a..b` are the whole grid (peaks are
    /// then compared without restriction).
    #[inline]
    pub(super) fn whole(&self, cover: (usize, usize)) -> bool {
        self.shared_bins(cover) == (0..self.len)
    }

    /// How the dot product with a row becomes the measure. `cover` is the row's entry in
    /// the cache (bins a..b, sum and sum of squares of its f32 values); `row` its f32 values,
    /// read only when the query covers less than the row.
    pub(super) fn shared(&self, cover: (usize, usize, f64, f64), row: &[f32]) -> Shared {
        self.shared_memo(cover, row, &mut None)
    }

    /// [`QueryCover::shared`], reusing the row's sums over the shared bins from `memo` when
    /// the last query asked for the same bins of the same row (a batch of unknowns measured
    /// over one range reads each row once).
    pub(super) fn shared_memo(
        &self,
        cover: (usize, usize, f64, f64),
        row: &[f32],
        memo: &mut Option<(Range<usize>, (f64, f64))>,
    ) -> Shared {
        let (a, b, x1, x2) = cover;
        if (a, b) == self.bins {
            return Shared::Same;
        }
        let s = self.shared_bins((a, b));
        let n = f64::from(self.pn[s.end] - self.pn[s.start]);
        let least = if self.centred { 2.0 } else { 1.0 };
        if n < least {
            return Shared::Zero;
        }
        let q1 = self.p1[s.end] - self.p1[s.start];
        let q2 = self.p2[s.end] - self.p2[s.start];
        let (x1, x2) = if s == (a..b) {
            (x1, x2)
        } else if let Some((_, sums)) = memo.as_ref().filter(|(m, _)| *m == s) {
            *sums
        } else {
            let sum = |r: Range<usize>| {
                row[r].iter().fold((0f64, 0f64), |(s, q), &v| {
                    let v = f64::from(v);
                    (s + v, q + v * v)
                })
            };
            // Over the shared bins, or the row's sums less the bins it covers beyond them,
            // whichever reads fewer values.
            let sums = if 2 * s.len() <= b - a {
                sum(s.clone())
            } else {
                let (l1, l2) = sum(a..s.start);
                let (h1, h2) = sum(s.end..b);
                (x1 - l1 - h1, x2 - l2 - h2)
            };
            *memo = Some((s.clone(), sums));
            sums
        };
        let (c, dq, dx) = if self.centred {
            (q1 * x1 / n, q2 - q1 * q1 / n, x2 - x1 * x1 / n)
        } else {
            (0.0, q2, x2)
        };
        let d = dq.max(0.0).sqrt() * dx.max(0.0).sqrt();
        if d < SMALLEST_DENOMINATOR {
            Shared::Unbounded
        } else {
            Shared::Scaled { c, d }
        }
    }

    /// The unknown's peaks within the bins `s` (as `score::score` counts them).
    pub(super) fn unknown_peaks_in(&self, s: &Range<usize>) -> usize {
        self.peak_bins
            .iter()
            .filter(|b| b.is_some_and(|b| s.contains(&b)))
            .count()
    }

    /// Whether a row peak at `x` (a cached position, rounded to f32) lies within the bins
    /// `s` as `score::score` decides it for the f64 position (its nearest grid point does);
    /// `None` when `x` lies so near the middle between two grid points, one inside and one
    /// outside, that the rounding could have moved it across.
    #[inline]
    fn row_peak_inside(&self, x: f64, s: &Range<usize>) -> Option<bool> {
        let t = (x - self.start) / self.step;
        let inside =
            |v: f64| v >= 0.0 && v < self.len as f64 && v >= s.start as f64 && v < s.end as f64;
        let below = t.floor();
        if ((t - below) - 0.5).abs() < 1e-3 && inside(below) != inside(below + 1.0) {
            return None;
        }
        Some(inside(t.round()))
    }

    /// How many row peaks (cached positions) lie within the bins `s`, or `None` when one
    /// cannot be told (see [`QueryCover::row_peak_inside`]).
    pub(super) fn row_peaks_in(&self, s: &Range<usize>, xs: &[f32]) -> Option<usize> {
        let mut count = 0;
        for &x in xs {
            count += usize::from(self.row_peak_inside(f64::from(x), s)?);
        }
        Some(count)
    }

    /// The row peak positions within the bins `s`, or `None` as for
    /// [`QueryCover::row_peaks_in`].
    pub(super) fn row_xs_in(&self, s: &Range<usize>, xs: &[f64]) -> Option<Vec<f64>> {
        let mut out = Vec::with_capacity(xs.len());
        for &x in xs {
            if self.row_peak_inside(x, s)? {
                out.push(x);
            }
        }
        Some(out)
    }

    /// The unknown's peak positions within the bins `s`.
    pub(super) fn unknown_xs_in(&self, s: &Range<usize>, xs: &[f64]) -> Vec<f64> {
        xs.iter()
            .zip(&self.peak_bins)
            .filter(|(_, b)| b.is_some_and(|b| s.contains(&b)))
            .map(|(&x, _)| x)
            .collect()
    }
}
