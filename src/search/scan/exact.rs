//! Rescoring: the kept rows' f32 bounds from the cache, then exact scores from the stored
//! prepared spectra, in bound order, until no row left can reach the top K.

use std::collections::HashMap;

use rayon::prelude::*;

use super::MARGIN;
use super::query::{Query, widened};
use crate::cache::{Kind, VectorCache, dot_f32};
use crate::error::Result;
use crate::library::Library;
use crate::prepare::Prepared;
use crate::score::{Scores, entropy_similarity, peak_overlap, score, stein_scott};
use crate::search::Request;
use crate::technique::Grid;

/// The second-stage bound of one row: f32 measure from the cache plus a rounding margin, and
/// the peak Jaccard with a slightly wider tolerance (a larger tolerance never matches fewer).
pub(super) fn rescore_bound(
    cache: &VectorCache,
    q: &Query<'_>,
    row: usize,
    w: f64,
    request: &Request,
) -> f64 {
    let range = cache.peak_range(row);
    let tol = request.params.peak_tolerance;
    let xs: Vec<f64> = cache.peak_x()[range.clone()]
        .iter()
        .map(|&x| f64::from(x))
        .collect();
    let spectral = if !cache.kind.dense() {
        let r: Vec<(f64, f64)> = xs
            .iter()
            .zip(&cache.peak_h()[range])
            .map(|(&x, &h)| (x, f64::from(h)))
            .collect();
        let u: Vec<(f64, f64)> = q.unknown.peaks.iter().map(|p| (p.x, p.height)).collect();
        if cache.kind == Kind::Entropy {
            entropy_similarity(&u, &r) + MARGIN
        } else {
            stein_scott(&u, &r, &request.params.composite).composite + MARGIN
        }
    } else {
        let s = cache.stride();
        let values = &cache.f32_matrix()[row * s..(row + 1) * s];
        let dot = f64::from(dot_f32(&q.dense, values));
        // Over the bins query and row share (the dot product itself when they cover the
        // same bins); see `shared`.
        q.cover.shared(cache.cover(row), values).bound(dot + MARGIN)
    };
    let spectral = spectral.clamp(0.0, 1.0);
    let jaccard = if !cache.kind.dense() || q.cover.whole(bins_of(cache, row)) {
        peak_overlap(&q.xs, &xs, widened(tol)).jaccard
    } else {
        // The peaks inside the shared bins, as `score::score` compares them.
        let s = q.cover.shared_bins(bins_of(cache, row));
        match q.cover.row_xs_in(&s, &xs) {
            Some(rx) => peak_overlap(&q.cover.unknown_xs_in(&s, &q.xs), &rx, widened(tol)).jaccard,
            None => 1.0,
        }
    };
    w * spectral + (1.0 - w) * jaccard + 1e-6
}

/// A dense row's covered bins.
fn bins_of(cache: &VectorCache, row: usize) -> (usize, usize) {
    let (a, b, _, _) = cache.cover(row);
    (a, b)
}

/// Exact hits: `(combined score, spectrum id, scores)`, best first.
pub(super) type Scored = Vec<(f64, i64, Scores)>;

/// Exact scores, loaded and computed once per row.
pub(super) struct Exact<'a> {
    pub(super) library: &'a Library,
    pub(super) unknown: &'a Prepared,
    pub(super) grid: &'a Grid,
    pub(super) request: &'a Request,
    pub(super) done: HashMap<usize, Scores>,
}

impl<'a> Exact<'a> {
    pub(super) fn new(
        library: &'a Library,
        unknown: &'a Prepared,
        grid: &'a Grid,
        request: &'a Request,
    ) -> Exact<'a> {
        Exact {
            library,
            unknown,
            grid,
            request,
            done: HashMap::new(),
        }
    }

    pub(super) fn score(&mut self, cache: &VectorCache, row: usize) -> Result<Scores> {
        if let Some(s) = self.done.get(&row) {
            return Ok(s.clone());
        }
        let reference = self.library.prepared(cache.ids()[row])?;
        let s = score(self.unknown, &reference, self.grid, &self.request.params);
        self.done.insert(row, s.clone());
        Ok(s)
    }
}

/// Rescoring and exact scoring of candidate rows: the top-K, best first (ties by id), and the
/// K-th exact score (minus infinity with fewer than K).
pub(super) fn finish(
    cache: &VectorCache,
    q: &Query<'_>,
    rows: &[usize],
    w: f64,
    request: &Request,
    exact: &mut Exact<'_>,
) -> Result<(Scored, f64)> {
    let mut bounds: Vec<(f64, usize)> = rows
        .par_iter()
        .map(|&r| (rescore_bound(cache, q, r, w, request), r))
        .collect();
    bounds.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
    let k = request.depth();
    let mut top: Vec<(f64, i64, Scores)> = Vec::with_capacity(k + 1);
    let kth = |top: &Vec<(f64, i64, Scores)>| {
        if top.len() < k {
            f64::NEG_INFINITY
        } else {
            top[k - 1].0
        }
    };
    for (bound, row) in bounds {
        if bound < kth(&top) {
            break;
        }
        let s = exact.score(cache, row)?;
        top.push((s.combined, cache.ids()[row], s));
        top.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        top.truncate(k);
    }
    let kth = kth(&top);
    Ok((top, kth))
}
