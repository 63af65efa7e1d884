//! Bounds on the combined score of a dense (IR, Raman, 1H NMR) row: from its coarse row,
//! its peak positions, and only then its full i8 row.

use super::query::{Bins, Query};
use super::shared::Shared;
use crate::cache::i8_dot;

/// An upper bound on the peaks one-to-one matching can pair between the unknown and a row
/// whose peaks lie at `row_x`: every paired row peak lies within the tolerance of an
/// unknown peak, so its bin is marked in `near`; and no more than either side has.
#[inline]
pub(super) fn matched_bound(q: &Query<'_>, bins: &Bins, row_x: &[f32]) -> usize {
    let near = row_x
        .iter()
        .map(|&x| bins.bin(f64::from(x)))
        .filter(|&b| q.near[b / 64] >> (b % 64) & 1 == 1)
        .count();
    near.min(q.xs.len())
}

/// A bound on the dot product of a query and a row from the i8 dot product `idot` of their
/// quantised forms (`qscale`, `sx`: the scales; `ql1`: the query's L1 norm; `l1x`: the
/// dequantised row's), `|q.x - q'.x'| <= |q|_1 s_x / 2 + s_q |x'|_1 / 2`, plus a margin for
/// f32 rounding.
#[inline]
pub(super) fn i8_bound(ql1: f32, qscale: f32, sx: f32, l1x: f32, idot: i32) -> f32 {
    let est = qscale * sx * idot as f32;
    est + 0.5 * ql1 * sx + 0.5 * qscale * l1x + 1e-5
}

/// The first scan's bound on the spectral score of a dense row from the coarse rows: the
/// coarse dot product's bound plus |q'| |x'| (see `file::coarse_row`; `rest` is the row's
/// |x'|), made a bound on the measure over the shared bins by `shared`.
#[inline]
#[allow(clippy::too_many_arguments)]
pub(super) fn coarse_bound(
    q: &Query<'_>,
    qscale: f32,
    sx: f32,
    l1x: f32,
    rest: f32,
    idot: i32,
    shared: Shared,
) -> f64 {
    let dot = f64::from(i8_bound(q.coarse_l1, qscale, sx, l1x, idot) + q.rest * rest);
    shared.bound(dot).clamp(0.0, 1.0)
}

/// The peaks a Jaccard bound counts: every peak of both sides, or those inside the shared
/// bins (`nu`, `nr`), or `Unsure` when the row's f32 positions cannot tell which are.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Counts {
    All,
    Inside(usize, usize),
    Unsure,
}

/// The bound on the peak Jaccard of a dense row whose peaks lie at `row_x`: m / (nu + nr -
/// m) grows with the matched count m, so a bound on m bounds it. Over the shared bins, the
/// matching of the peaks inside pairs no more than the row peaks near any unknown peak, nor
/// more than either side has inside.
#[inline]
pub(super) fn jaccard_bound_dense(
    q: &Query<'_>,
    bins: &Bins,
    row_x: &[f32],
    counts: Counts,
) -> f64 {
    let (nu, nr) = match counts {
        Counts::All => (q.xs.len(), row_x.len()),
        Counts::Inside(nu, nr) => (nu, nr),
        Counts::Unsure => return 1.0,
    };
    let m = matched_bound(q, bins, row_x).min(nu).min(nr);
    if nu + nr == 0 {
        0.0
    } else {
        m as f64 / (nu + nr - m) as f64
    }
}

/// A combined-score bound from bounds on the spectral score and the peak Jaccard.
#[inline]
pub(super) fn combined(w: f64, spectral: f64, jaccard: f64) -> f32 {
    (w * spectral + (1.0 - w) * jaccard + 1e-6) as f32
}

/// The first-scan key of a dense row, tightened step by step only while it still reaches
/// the worker's smallest kept key (`floor`): first the coarse bound with peak overlap 1, then
/// with the peak-overlap bound, then the full i8 row's bound (read from `fine`, the row's
/// i8 values, only then). Each step is an upper bound on the combined score over the bins
/// query and row share (`shared`, `counts`).
#[inline]
#[allow(clippy::too_many_arguments)]
pub(super) fn dense_key(
    q: &Query<'_>,
    coarse: (f32, f32, f32, f32, i32),
    fine: (f32, f32, f32, &[i8], &[i8]),
    bins: &Bins,
    row_x: &[f32],
    (shared, counts): (Shared, Counts),
    w: f64,
    floor: f32,
) -> (f32, bool) {
    let (qcs, csx, cl1x, rest, cdot) = coarse;
    let spectral = coarse_bound(q, qcs, csx, cl1x, rest, cdot, shared);
    let loose = combined(w, spectral, 1.0);
    if loose < floor {
        return (loose, false);
    }
    let jaccard = jaccard_bound_dense(q, bins, row_x, counts);
    let key = combined(w, spectral, jaccard);
    if key < floor {
        return (key, false);
    }
    let (qs, sx, l1x, row, query) = fine;
    let idot = i8_dot(row, query);
    let spectral = shared
        .bound(f64::from(i8_bound(q.l1, qs, sx, l1x, idot)))
        .clamp(0.0, 1.0)
        .min(spectral);
    (combined(w, spectral, jaccard), true)
}
