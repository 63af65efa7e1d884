//! Ranking unknowns against a vector cache, with the same result as scoring every candidate.
//!
//! Three stages, each giving an upper bound on a row's combined score that is at least as
//! tight as the one before:
//!
//! 1. **Scan** (all rows, parallel, each worker with its own top-M selection). Dense
//!    techniques: the i8 dot product of query and row, plus a bound on the quantisation error
//!    (`|q.x - q'.x'| <= |q|_1 s_x / 2 + s_q |x'|_1 / 2`), with peak overlap counted as 1.
//!    EI-MS: the weighted dot product F_D over the row's peaks and the count of shared m/z,
//!    which bound the composite (the ratio term is at most 1) and the peak Jaccard.
//! 2. **Rescore** (the best M, or every row whose bound can still reach the top): the f32
//!    dot product (Pearson r or cosine, see `file`) or the composite from the cached peaks,
//!    and the peak overlap with a slightly wider tolerance, plus a margin for f32 rounding.
//! 3. **Exact** (in bound order): the stored prepared spectra of just those rows are loaded
//!    and scored with `score::score`, until the next bound is below the K-th exact score.
//!
//! Rows outside the first top-M are bounded by the smallest key kept; when that bound could
//! still reach the top-K, every row whose key reaches it is rescored. So the hit list is the
//! exact one, not an approximation.

#[cfg(test)]
mod damage;
mod dense;
mod exact;
mod first;
mod query;
mod shared;
mod sparse;
#[cfg(test)]
mod tests;

use std::collections::HashSet;

use exact::{Exact, finish};
use first::first_scan;
use query::{Bins, Query, make_query};

use crate::cache::{Kind, VectorCache, active_bins, kind_for};
use crate::error::Result;
use crate::library::{Library, Status};
use crate::prepare::Prepared;
use crate::search::{Plan, Ranking, Request};

/// Rows per parallel task (a multiple of 64, so tasks own whole mask words).
const CHUNK: usize = 4096;
/// Rows kept by the first scan for rescoring.
const RESCORE: usize = 256;
/// First-scan keys kept at once (rows x unknowns of one group): 128 MB.
const KEY_BUDGET: usize = 32 << 20;
/// Bins of the peak-position bitmaps that bound the peak overlap of dense rows.
const NEAR_BINS: usize = 4096;
/// Added to f32 estimates so that rounding never makes a bound too low.
const MARGIN: f64 = 1e-4;

/// Ranks unknowns through the technique's vector cache. `None` when the request is one the
/// cache does not serve (another measure, reverse search, withdrawn spectra, non-default
/// composite exponents, or peak positions that are not nominal m/z); the caller then scores
/// every candidate.
pub fn rank(
    library: &Library,
    unknowns: &[Prepared],
    request: &Request,
) -> Result<Option<Vec<Ranking>>> {
    rank_traced(library, unknowns, request, &mut Trace::default())
}

/// Where the time of one [`rank_traced`] call went, stage by stage, and how many rows each
/// stage handled; for benchmarks (`examples/bench_query.rs`). Times in milliseconds.
#[derive(Debug, Default, Clone, serde::Serialize)]
pub struct Trace {
    /// Getting the cache, the metadata mask and the queries ready.
    pub setup_ms: f64,
    /// The first scan over every allowed row (i8 or sparse bounds).
    pub scan_ms: f64,
    /// Rescoring the kept rows in f32 and scoring the best exactly.
    pub rescore_ms: f64,
    /// Unknowns whose kept rows could not prove their top K.
    pub fallbacks: usize,
    /// Finding and rescoring every row whose bound still reached the top K, for those.
    pub fallback_ms: f64,
    /// Rows rescored in f32 (kept rows and fallback rows), over all unknowns.
    pub rescored_rows: usize,
    /// Rows scored exactly from the database, over all unknowns.
    pub exact_rows: usize,
    /// Dense: row and unknown pairs whose coarse bound reached the worker's smallest kept
    /// key, so that the full i8 row was read.
    pub fine_pairs: usize,
}

fn since(t: std::time::Instant) -> f64 {
    t.elapsed().as_secs_f64() * 1e3
}

/// [`rank`], recording where the time went into `trace`.
pub fn rank_traced(
    library: &Library,
    unknowns: &[Prepared],
    request: &Request,
    trace: &mut Trace,
) -> Result<Option<Vec<Ranking>>> {
    rank_plan_traced(library, unknowns, &Plan::new(library, request)?, trace)
}

/// [`rank`] under a plan already made.
pub(super) fn rank_plan(
    library: &Library,
    unknowns: &[Prepared],
    plan: &Plan,
) -> Result<Option<Vec<Ranking>>> {
    rank_plan_traced(library, unknowns, plan, &mut Trace::default())
}

fn rank_plan_traced(
    library: &Library,
    unknowns: &[Prepared],
    plan: &Plan,
    trace: &mut Trace,
) -> Result<Option<Vec<Ranking>>> {
    // `top` may be "all" (usize::MAX, as `identify` asks): never more than the rows.
    let keep = RESCORE.max(plan.request.depth().saturating_mul(4));
    rank_keeping(library, unknowns, plan, trace, keep)
}

/// [`rank_traced`] with the first scan keeping `keep` rows per unknown (the tests keep as
/// few as the hits asked for, to exercise the rescoring of rows the first scan left out).
fn rank_keeping(
    library: &Library,
    unknowns: &[Prepared],
    plan: &Plan,
    trace: &mut Trace,
    keep: usize,
) -> Result<Option<Vec<Ranking>>> {
    let request = &plan.request;
    let t0 = std::time::Instant::now();
    let Some(kind) = kind_for(request.technique, request.params.measure) else {
        return Ok(None);
    };
    if request.statuses.contains(&Status::Withdrawn)
        || request.params.min_mz.is_some()
        || unknowns.iter().any(|u| u.technique != request.technique)
    {
        return Ok(None);
    }
    let grid = &plan.recipe.grid;
    if !kind.dense() {
        let c = &request.params.composite;
        let d = crate::score::CompositeParams::default();
        let composite = kind == Kind::Sparse;
        if (composite
            && (c.intensity_exponent != d.intensity_exponent || c.mass_exponent != d.mass_exponent))
            || unknowns.iter().any(|u| {
                u.peaks
                    .iter()
                    .any(|p| p.x.fract() != 0.0 || !(0.0..65536.0).contains(&p.x))
            })
        {
            return Ok(None);
        }
    } else if unknowns.iter().any(|u| u.vector.len() != grid.len()) {
        return Ok(None);
    }
    // Spectra stored since the cache was built (a server submitting while it searches) are
    // scored exactly beside it: the library hands them over only when they are all that
    // changed, so the hit list stays the one scoring every candidate gives.
    let (cache, tail) = library.vector_cache_and_tail(request.technique, kind)?;
    if !kind.dense() && !cache.integer_x {
        return Ok(None);
    }
    // Results saved before scores compared over the shared bins are replayed over the whole
    // grid, which the rows of spectra covering less than the grid do not hold.
    if kind.dense()
        && !request.params.shared_range
        && (cache.any_partial() || unknowns.iter().any(|u| u.coverage.is_some()))
    {
        return Ok(None);
    }

    let (mask, compared, searched) = row_mask(&cache, &request.statuses, plan.allowed.as_ref());
    let tail_searched = tail
        .iter()
        .filter(|(_, s)| request.statuses.contains(s))
        .count();
    let tail: Vec<(i64, Prepared)> = tail
        .into_iter()
        .filter(|(id, s)| {
            request.statuses.contains(s) && plan.allowed.as_ref().is_none_or(|a| a.contains(id))
        })
        .map(|(id, _)| Ok((id, library.prepared(id)?)))
        .collect::<Result<_>>()?;
    let (compared, searched) = (compared + tail.len(), searched + tail_searched);
    let active = active_bins(grid);
    let bins = Bins::new(grid);
    let tol = request.params.peak_tolerance;
    let queries: Vec<Query<'_>> = unknowns
        .iter()
        .map(|u| make_query(u, &cache, grid, &active, &bins, tol))
        .collect();
    let w = request.params.spectral_weight.clamp(0.0, 1.0);
    let m = keep.min(cache.rows().max(1));
    trace.setup_ms += since(t0);

    // Every row's first-scan key is kept (4 bytes a row and unknown), so unknowns are
    // scanned in groups that keep at most KEY_BUDGET keys.
    let group = (KEY_BUDGET / cache.rows().max(1)).max(1);
    let mut out = Vec::with_capacity(unknowns.len());
    for queries in queries.chunks(group) {
        let t0 = std::time::Instant::now();
        let (heaps, keys, fine) = first_scan(&cache, queries, &mask, m, w, &bins, request);
        trace.fine_pairs += fine;
        trace.scan_ms += since(t0);
        for (j, (q, heap)) in queries.iter().zip(heaps).enumerate() {
            let t0 = std::time::Instant::now();
            let mut exact = Exact::new(library, q.unknown, grid, request);
            let rows = heap.rows();
            trace.rescored_rows += rows.len();
            let (scored, kth) = finish(&cache, q, &rows, w, request, &mut exact)?;
            trace.rescore_ms += since(t0);
            // Rows the first scan left out have keys at most the smallest kept one; when
            // that could still reach the K-th exact score, every row whose key reaches it is
            // rescored (from the keys kept, without a second scan).
            let scored = match (heap.full(), heap.min()) {
                (true, Some(min)) if f64::from(min) >= kth => {
                    let t0 = std::time::Instant::now();
                    let rows = keys.rows_reaching(j, kth);
                    trace.fallbacks += 1;
                    trace.rescored_rows += rows.len();
                    let scored = finish(&cache, q, &rows, w, request, &mut exact)?.0;
                    trace.fallback_ms += since(t0);
                    scored
                }
                _ => scored,
            };
            trace.exact_rows += exact.done.len() + tail.len();
            let scored = with_tail(scored, &tail, q.unknown, grid, request);
            out.push(Ranking {
                scored,
                compared,
                searched,
            });
        }
    }
    Ok(Some(out))
}

/// The exact top K of the cache's rows merged with the spectra stored since it was built,
/// each of those scored exactly as `Exact::score` scores a cache row: best first, ties by id.
fn with_tail(
    mut scored: exact::Scored,
    tail: &[(i64, Prepared)],
    unknown: &Prepared,
    grid: &crate::technique::Grid,
    request: &Request,
) -> exact::Scored {
    use rayon::prelude::*;
    if tail.is_empty() {
        return scored;
    }
    scored.par_extend(tail.par_iter().map(|(id, reference)| {
        let s = crate::score::score(unknown, reference, grid, &request.params);
        (s.combined, *id, s)
    }));
    scored.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
    scored.truncate(request.depth());
    scored
}

/// The rows a request may return: status wanted and, with a metadata query, id in its set.
/// Built from the id set by binary search over the (ascending) ids: no lookup per row.
/// Also the number of rows allowed, and of rows with a wanted status.
fn row_mask(
    cache: &VectorCache,
    statuses: &[Status],
    allowed: Option<&HashSet<i64>>,
) -> (Vec<u64>, usize, usize) {
    let n = cache.rows();
    let want = |s: u8| {
        if s == 1 {
            statuses.contains(&Status::Verified)
        } else {
            statuses.contains(&Status::Pending)
        }
    };
    let status = cache.status();
    let mut mask = vec![0u64; n.div_ceil(64)];
    match allowed {
        Some(set) => {
            let ids = cache.ids();
            for id in set {
                if let Ok(r) = ids.binary_search(id)
                    && want(status[r])
                {
                    mask[r / 64] |= 1 << (r % 64);
                }
            }
        }
        None => {
            // A word of 64 rows at a time, without a branch per row.
            let wanted = [want(0), want(1)];
            for (word, chunk) in mask.iter_mut().zip(status.chunks(64)) {
                *word = chunk.iter().enumerate().fold(0u64, |bits, (i, &s)| {
                    bits | u64::from(wanted[usize::from(s == 1)]) << i
                });
            }
        }
    }
    let count = mask.iter().map(|w| w.count_ones() as usize).sum();
    let searched = match allowed {
        None => count,
        Some(_) => status.iter().filter(|&&s| want(s)).count(),
    };
    (mask, count, searched)
}
