//! Ranking library spectra against an unknown.

use std::collections::HashSet;

use rayon::prelude::*;
use serde::Serialize;

use crate::error::Result;
use crate::library::{Library, Status};
use crate::prepare::Prepared;
use crate::score::{ScoreParams, Scores, score};
use crate::technique::Technique;

/// What to search for and how.
#[derive(Debug, Clone)]
pub struct Request {
    /// The technique of the unknown.
    pub technique: Technique,
    /// How many hits to return.
    pub top: usize,
    /// A metadata text query restricting the candidates.
    pub filter: Option<String>,
    /// Which review statuses are searched.
    pub statuses: Vec<Status>,
    /// Scoring parameters.
    pub params: ScoreParams,
}

impl Request {
    /// A request with the technique's default parameters.
    pub fn new(technique: Technique) -> Request {
        Request {
            technique,
            top: 10,
            filter: None,
            statuses: vec![Status::Pending, Status::Verified],
            params: ScoreParams::default_for(technique),
        }
    }
}

/// One ranked library entry.
#[derive(Debug, Clone, Serialize)]
pub struct Hit {
    /// 1 for the best.
    pub rank: usize,
    /// The combined score, 0..1.
    pub score: f64,
    /// The parts of the score.
    pub components: Scores,
    /// Library spectrum id.
    pub spectrum_id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Compound name.
    pub name: String,
    /// Formula.
    pub formula: Option<String>,
    /// CAS RN.
    pub cas: Option<String>,
    /// Technique.
    pub technique: Technique,
    /// Review status.
    pub status: Status,
}

/// A ranked hit list with what the analyst needs to judge it.
#[derive(Debug, Clone, Serialize)]
pub struct HitList {
    /// Hits, best first.
    pub hits: Vec<Hit>,
    /// How many library spectra were compared.
    pub candidates: usize,
    /// Score of hit 1 minus score of hit 2 (None with fewer than two hits).
    pub margin: Option<f64>,
    /// Plain-language warnings about how far to trust the list.
    pub warnings: Vec<String>,
}

/// Below this combined score the best hit is reported as a weak match. Provisional: chosen
/// from the demo library's spread of scores for wrong compounds, until an evaluation over
/// degraded unknowns sets it.
pub const WEAK_SCORE: f64 = 0.6;
/// Top hits closer than this cannot be told apart by score alone. Provisional, as above.
pub const CLOSE_MARGIN: f64 = 0.02;

/// Ranks the library's spectra of the unknown's technique. Ties are broken by spectrum id,
/// so the same inputs always give the same list.
pub fn search(library: &Library, unknown: &Prepared, request: &Request) -> Result<HitList> {
    let allowed: Option<HashSet<i64>> = match &request.filter {
        Some(q) => Some(library.text().matching_ids(q)?),
        None => None,
    };
    let candidates = library.candidates(request.technique, &request.statuses)?;
    let grid = &library.recipe(request.technique)?.grid;
    let mut scored: Vec<(f64, usize, Scores)> = candidates
        .par_iter()
        .enumerate()
        .filter(|(_, c)| allowed.as_ref().is_none_or(|a| a.contains(&c.spectrum_id)))
        .map(|(i, c)| {
            let s = score(unknown, &c.prepared, grid, &request.params);
            (s.combined, i, s)
        })
        .collect();
    let compared = scored.len();
    scored.sort_by(|a, b| {
        b.0.total_cmp(&a.0).then(
            candidates[a.1]
                .spectrum_id
                .cmp(&candidates[b.1].spectrum_id),
        )
    });
    scored.truncate(request.top);

    let ids: Vec<i64> = scored.iter().map(|s| candidates[s.1].spectrum_id).collect();
    let records = library.records(&ids)?;
    let hits: Vec<Hit> = scored
        .into_iter()
        .zip(records)
        .enumerate()
        .map(|(rank, ((combined, _, components), rec))| Hit {
            rank: rank + 1,
            score: combined,
            components,
            spectrum_id: rec.id,
            compound_id: rec.compound_id,
            name: rec.metadata.name,
            formula: rec.metadata.formula,
            cas: rec.metadata.cas,
            technique: rec.technique,
            status: rec.status,
        })
        .collect();

    let margin = (hits.len() >= 2).then(|| hits[0].score - hits[1].score);
    let mut warnings = Vec::new();
    match hits.first() {
        None => warnings.push(
            "no library spectrum to compare with: check the technique and the --where query"
                .to_string(),
        ),
        Some(best) if best.score < WEAK_SCORE => warnings.push(format!(
            "best score {:.3} is below {WEAK_SCORE}: a weak match, not an identification",
            best.score
        )),
        Some(_) => {}
    }
    if let (Some(m), Some(first), Some(second)) = (margin, hits.first(), hits.get(1))
        && m < CLOSE_MARGIN
        && first.compound_id != second.compound_id
    {
        warnings.push(format!(
            "hits 1 and 2 ({} and {}) differ by only {m:.3}: too close to tell apart by this spectrum alone",
            first.name, second.name
        ));
    }
    Ok(HitList {
        hits,
        candidates: compared,
        margin,
        warnings,
    })
}
