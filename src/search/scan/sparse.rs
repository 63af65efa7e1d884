//! Bounds on the combined score of a sparse (EI-MS) row, summed through the cache's inverted
//! index by nominal m/z.

use super::MARGIN;
use super::query::Query;
use crate::cache::VectorCache;
use crate::score::{LN_4, common_term};

/// What a sparse row's sums are summed for: the composite, forward or in reverse search, or
/// the entropy similarity (whose weights are entropy-weighted probabilities).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Sums {
    /// Composite, forward search.
    Forward,
    /// Composite, reverse search.
    Reverse,
    /// Entropy similarity.
    Entropy,
}

/// The combined-score bound of the first scan for a sparse (EI-MS) row, from its sums over
/// the m/z it shares with the unknown (see [`accumulate`]). With reverse search, a row whose
/// loose bound (ratio term 1) stays below `floor` keeps that bound without the ratio term
/// being computed. The entropy similarity is its sum itself: exact but for the f32 rounding
/// of the probabilities, which `MARGIN` covers.
#[inline]
#[allow(clippy::too_many_arguments)]
pub(super) fn sparse_key(
    cache: &VectorCache,
    q: &Query<'_>,
    row: usize,
    sums: &RowSums,
    w: f64,
    tolerance: f64,
    mode: Sums,
    floor: f32,
) -> f32 {
    let range = cache.peak_range(row);
    let jaccard = jaccard_bound(q, range.len(), sums.shared as usize, tolerance);
    if mode == Sums::Entropy {
        let entropy = if sums.accounted {
            (sums.ur / LN_4 + MARGIN).min(1.0)
        } else {
            1.0
        };
        return (w * entropy + (1.0 - w) * jaccard) as f32;
    }
    if mode == Sums::Reverse {
        let key = |composite: f64| (w * composite + (1.0 - w) * jaccard) as f32;
        if !sums.accounted {
            return key(1.0);
        }
        let dot = sums.reverse_dot();
        if sums.common < 2 {
            return key((dot + MARGIN).min(1.0));
        }
        let loose = key(((dot + 1.0) / 2.0 + MARGIN).min(1.0));
        if loose < floor {
            return loose;
        }
        let ratio = reverse_ratio(cache, q, range);
        return key(((dot + ratio) / 2.0 + MARGIN).min(1.0));
    }
    // A count of at most 65536 ones: exact in f32.
    let common = sums.shared as usize;
    let fd = (f64::from(sums.dot) * f64::from(sums.dot) + MARGIN).min(1.0);
    let (nu, nc) = (q.positive as f64, common as f64);
    let composite = if nu + nc > 0.0 {
        ((nu * fd + nc) / (nu + nc)).min(1.0)
    } else {
        fd
    };
    (w * composite + (1.0 - w) * jaccard) as f32
}

/// A bound on the peak Jaccard of the unknown and a row of `row_peaks` peaks that share
/// `shared` m/z: within a tolerance below 1 m/z only peaks at the same nominal m/z can pair.
pub(super) fn jaccard_bound(q: &Query<'_>, row_peaks: usize, shared: usize, tolerance: f64) -> f64 {
    if tolerance >= 1.0 {
        return 1.0;
    }
    let den = q.xs.len() + row_peaks - shared.min(q.xs.len() + row_peaks);
    if den == 0 {
        0.0
    } else {
        (shared as f64 / den as f64).min(1.0)
    }
}

/// One row's sums over the m/z it shares with the unknown, from the cached weights.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct RowSums {
    /// Forward: sum W_U W_L over the shared m/z (normalised weights, f32 as the cache).
    pub(super) dot: f32,
    /// m/z where both have a peak, of any height (for the Jaccard bound).
    pub(super) shared: u32,
    /// Reverse: sum W_U W_L over the common m/z. Entropy: the sum of
    /// `score::common_term` over the common m/z.
    pub(super) ur: f64,
    /// Reverse: sum W_U^2 over the common m/z.
    pub(super) uu: f64,
    /// Reverse: m/z where both heights are above 0 (N_common of the composite).
    pub(super) common: u32,
    /// Reverse: false when a positive height's weight may have been lost to f32 rounding.
    pub(super) accounted: bool,
}

impl RowSums {
    pub(super) const ZERO: RowSums = RowSums {
        dot: 0.0,
        shared: 0,
        ur: 0.0,
        uu: 0.0,
        common: 0,
        accounted: true,
    };

    /// F_D of reverse search: (sum W_U W_L)^2 / (sum W_U^2 over the common m/z * sum W_L^2),
    /// the row's sum W_L^2 being 1.
    pub(super) fn reverse_dot(&self) -> f64 {
        if self.uu > 0.0 {
            (self.ur * self.ur / self.uu).min(1.0)
        } else {
            0.0
        }
    }

    /// Adds one shared m/z: the unknown's entry `t` there (weight, 1, 1 when its height is
    /// above 0) and the row's posting weight `p` (see `file::posting_weight`).
    ///
    /// Reverse search keeps only the unknown's ions at the row's m/z, so its dot-product
    /// term is taken over the common m/z, exactly as `score::stein_scott` does. Each weight
    /// is its f64 value rounded to f32 (relative error 6e-8), which moves F_D by at most 8 of
    /// those, far inside `MARGIN`. A posting marked untrusted (a cached height or weight of 0
    /// may be a positive one lost to f32) leaves the row not accounted for (bound 1).
    #[inline]
    pub(super) fn add(&mut self, t: &[f32; 3], p: f32, mode: Sums) {
        self.shared += 1;
        if mode == Sums::Forward {
            self.dot += t[0] * p.abs();
            return;
        }
        if t[2] == 0.0 {
            return; // the unknown's peak has height 0: not common in the composite
        }
        let (wu, wl) = (f64::from(t[0]), f64::from(p));
        if p.is_sign_negative() || wu <= 0.0 || wu.is_nan() {
            self.accounted = false;
            return;
        }
        if mode == Sums::Entropy {
            self.ur += common_term(wu, wl);
        } else {
            self.ur += wu * wl;
            self.uu += wu * wu;
        }
        self.common += 1;
    }
}

/// The sums of every row in `r0..r0 + sums.len()` from the inverted index: for each m/z of
/// the unknown, the rows with a peak there, read from its ascending postings. The m/z are
/// taken in ascending order, and each row's postings in its peak order, so a row's sums add
/// the same terms in the same order as a walk over its peaks would.
///
/// `cursors` holds, per m/z of the unknown, where the previous call stopped: the row it
/// stopped before and the posting there. A worker mostly takes consecutive chunks, and then
/// starts where it stopped instead of searching (a binary search over a long posting list
/// misses the CPU cache at nearly every step).
pub(super) fn accumulate(
    cache: &VectorCache,
    q: &Query<'_>,
    r0: usize,
    sums: &mut [RowSums],
    mode: Sums,
    cursors: &mut Vec<(usize, usize)>,
) {
    sums.fill(RowSums::ZERO);
    let r1 = r0 + sums.len();
    cursors.resize(q.mzs.len(), (usize::MAX, 0));
    for (&mz, cursor) in q.mzs.iter().zip(cursors.iter_mut()) {
        let t = &q.table[mz];
        let (rows, ws) = cache.postings(mz);
        let mut k = if cursor.0 == r0 {
            cursor.1
        } else {
            rows.partition_point(|&r| (r as usize) < r0)
        };
        // Postings are ascending, so from the start found every row is at least r0; a
        // damaged file (not checked row by row at open, that would read every posting) can
        // only make rows be skipped, never an index go out of range.
        while let Some(&r) = rows.get(k)
            && (r as usize) < r1
        {
            if let Some(s) = sums.get_mut((r as usize).wrapping_sub(r0)) {
                s.add(t, ws[k], mode);
            }
            k += 1;
        }
        *cursor = (r1, k);
    }
}

/// The ratio term of reverse search over one row with at least two common m/z (all of them
/// accounted for, see [`RowSums::add`]): the mean over adjacent common m/z of
/// (W_L,i W_U,i-1 / (W_L,i-1 W_U,i))^(+-1), as `score::stein_scott` takes it; the weights'
/// normalisation cancels, and their rounding moves each ratio by at most 4 x 6e-8.
pub(super) fn reverse_ratio(
    cache: &VectorCache,
    q: &Query<'_>,
    range: std::ops::Range<usize>,
) -> f64 {
    let bins = &cache.peak_bin()[range.clone()];
    let ws = &cache.peak_w()[range];
    let (mut sum, mut pairs) = (0f64, 0usize);
    let mut previous: Option<(f64, f64)> = None;
    for (&b, &x) in bins.iter().zip(ws) {
        let Some(t) = q.table.get(usize::from(b)) else {
            continue;
        };
        if t[1] == 0.0 || t[2] == 0.0 {
            continue;
        }
        let (wu, wl) = (f64::from(t[0]), f64::from(x));
        if let Some((pu, pl)) = previous {
            let r = (wl * pu) / (pl * wu);
            sum += if r <= 1.0 { r } else { 1.0 / r };
            pairs += 1;
        }
        previous = Some((wu, wl));
    }
    if pairs == 0 { 0.0 } else { sum / pairs as f64 }
}
