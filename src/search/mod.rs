//! Ranking library spectra against an unknown.

mod replay;

pub use replay::{Replay, load_saved, replay};

use std::collections::HashSet;

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

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
    /// When the hit list warns.
    pub thresholds: Thresholds,
}

/// When a hit list warns that it is weak or undecided. The defaults are [`WEAK_SCORE`] and
/// [`CLOSE_MARGIN`]; a library's `whorl.toml` may set its own.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Thresholds {
    /// Below this combined score the best hit is reported as a weak match.
    pub weak_score: f64,
    /// Top hits of different compounds closer than this are reported as too close to call.
    pub close_margin: f64,
}

impl Default for Thresholds {
    fn default() -> Thresholds {
        Thresholds {
            weak_score: WEAK_SCORE,
            close_margin: CLOSE_MARGIN,
        }
    }
}

impl Request {
    /// A request with the technique's default parameters.
    pub fn new(technique: Technique) -> Request {
        Request {
            technique,
            top: 10,
            filter: None,
            statuses: vec![Status::Verified],
            params: ScoreParams::default_for(technique),
            thresholds: Thresholds::default(),
        }
    }
}

/// One ranked library entry.
#[derive(Debug, Clone, Serialize, Deserialize)]
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
#[derive(Debug, Clone, Serialize, Deserialize)]
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

/// The candidates of one unknown that made the top, best first, with their exact scores.
#[derive(Debug, Clone)]
pub struct Ranking {
    /// `(combined score, spectrum id, scores)`, best first, ties by spectrum id.
    pub scored: Vec<(f64, i64, Scores)>,
    /// How many library spectra were compared.
    pub compared: usize,
}

/// Ranks the library's spectra of the unknown's technique. Ties are broken by spectrum id,
/// so the same inputs always give the same list. Goes through the technique's vector cache
/// (`crate::cache`), which gives the same hits as [`search_exact`] without scoring every
/// candidate.
pub fn search(library: &Library, unknown: &Prepared, request: &Request) -> Result<HitList> {
    let ranking = match crate::cache::rank(library, std::slice::from_ref(unknown), request)? {
        Some(mut r) => r.pop().expect("one ranking per unknown"),
        None => exact_ranking(library, unknown, request)?,
    };
    hit_list(library, request, ranking)
}

/// Searches several unknowns of one technique together: one pass over the vector cache for
/// all of them. One hit list per unknown, in order.
pub fn search_many(
    library: &Library,
    unknowns: &[Prepared],
    request: &Request,
) -> Result<Vec<HitList>> {
    let rankings = match crate::cache::rank(library, unknowns, request)? {
        Some(r) => r,
        None => unknowns
            .iter()
            .map(|u| exact_ranking(library, u, request))
            .collect::<Result<_>>()?,
    };
    rankings
        .into_iter()
        .map(|r| hit_list(library, request, r))
        .collect()
}

/// [`search`] by scoring every candidate with the full measures: the reference the fast path
/// is tested against.
pub fn search_exact(library: &Library, unknown: &Prepared, request: &Request) -> Result<HitList> {
    hit_list(library, request, exact_ranking(library, unknown, request)?)
}

fn exact_ranking(library: &Library, unknown: &Prepared, request: &Request) -> Result<Ranking> {
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
    Ok(Ranking {
        scored: scored
            .into_iter()
            .map(|(c, i, s)| (c, candidates[i].spectrum_id, s))
            .collect(),
        compared,
    })
}

fn hit_list(library: &Library, request: &Request, ranking: Ranking) -> Result<HitList> {
    let Ranking { scored, compared } = ranking;
    let ids: Vec<i64> = scored.iter().map(|s| s.1).collect();
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
        Some(best) if best.score < request.thresholds.weak_score => warnings.push(format!(
            "best score {:.3} is below {}: a weak match, not an identification",
            best.score, request.thresholds.weak_score
        )),
        Some(_) => {}
    }
    if request.filter.is_some() && library.text_index_behind() {
        warnings.push(
            "the metadata index is behind the database (another process is writing); the --where filter may miss the newest spectra".to_string(),
        );
    }
    if !request.statuses.contains(&Status::Pending) {
        let pending = library.count(request.technique, Status::Pending)?;
        if pending > 0 {
            warnings.push(format!(
                "{pending} pending (not yet reviewed) {} spectra were not searched; --include-pending adds them",
                request.technique
            ));
        }
    }
    if let (Some(m), Some(first), Some(second)) = (margin, hits.first(), hits.get(1))
        && m < request.thresholds.close_margin
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

/// The library a search ran against.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct LibraryStamp {
    /// Library folder.
    pub path: String,
    /// Library fingerprint at the time of the search.
    pub fingerprint: String,
    /// The last audit-trail event at the time of the search.
    pub last_event: i64,
}

/// The unknown a search ran for.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct UnknownStamp {
    /// The file as given.
    pub file: String,
    /// SHA-256 of the file bytes.
    pub sha256: String,
    /// Technique.
    pub technique: Technique,
    /// The x unit declared for the file, if not the technique's usual one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub x_unit: Option<crate::spectrum::XUnit>,
    /// The y unit used (declared or detected).
    pub y_unit: crate::spectrum::YUnit,
    /// NMR solvent, if declared.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub solvent: Option<String>,
    /// Peaks picked in the unknown.
    pub peaks: usize,
}

/// The parameters that decided the ranking.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Parameters {
    /// Hits asked for.
    pub top: usize,
    /// Metadata filter.
    #[serde(rename = "where", default, skip_serializing_if = "Option::is_none")]
    pub filter: Option<String>,
    /// Statuses searched.
    pub statuses: Vec<Status>,
    /// Score parameters.
    pub score: ScoreParams,
    /// The preparation recipe of the technique.
    pub recipe: crate::prepare::Recipe,
    /// When the hit list warns.
    pub thresholds: Thresholds,
}

/// A complete, self-describing search result.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Report {
    /// whorl version.
    pub tool_version: String,
    /// When the search ran (UTC).
    pub searched_at: String,
    /// The library.
    pub library: LibraryStamp,
    /// The unknown.
    pub unknown: UnknownStamp,
    /// Parameters.
    pub parameters: Parameters,
    /// Library spectra compared.
    pub candidates: usize,
    /// Hits, best first.
    pub hits: Vec<Hit>,
    /// Hit 1 minus hit 2.
    pub margin: Option<f64>,
    /// Warnings about the unknown's preparation and about the hit list.
    pub warnings: Vec<String>,
    /// The caution that goes with every hit list.
    pub caution: String,
}

/// Prepares an unknown file with the library's recipe and searches it, returning the full report.
pub fn run_search(
    library: &Library,
    file: &std::path::Path,
    x_unit: Option<crate::spectrum::XUnit>,
    y_unit: Option<crate::spectrum::YUnit>,
    solvent: Option<crate::prepare::Solvent>,
    request: &Request,
) -> Result<Report> {
    search_file(library, file, x_unit, y_unit, solvent, request).map(|(report, _)| report)
}

/// [`run_search`], also returning the unknown as prepared, which a plotted report lays over
/// the references.
pub fn search_file(
    library: &Library,
    file: &std::path::Path,
    x_unit: Option<crate::spectrum::XUnit>,
    y_unit: Option<crate::spectrum::YUnit>,
    solvent: Option<crate::prepare::Solvent>,
    request: &Request,
) -> Result<(Report, Prepared)> {
    let recipe = library.recipe(request.technique)?.clone();
    let (raw, unknown) = crate::library::read_and_prepare(file, &recipe, x_unit, y_unit, solvent)?;
    let list = search(library, &unknown, request)?;
    let report = make_report(library, file, raw, &unknown, list, x_unit, solvent, request)?;
    Ok((report, unknown))
}

/// Prepares several unknown files and searches them together ([`search_many`]): one report
/// per file, in order. Files are read and prepared in parallel.
pub fn search_files(
    library: &Library,
    files: &[std::path::PathBuf],
    x_unit: Option<crate::spectrum::XUnit>,
    y_unit: Option<crate::spectrum::YUnit>,
    solvent: Option<crate::prepare::Solvent>,
    request: &Request,
) -> Result<Vec<Report>> {
    let recipe = library.recipe(request.technique)?.clone();
    let read: Vec<(crate::spectrum::RawSpectrum, Prepared)> = files
        .par_iter()
        .map(|f| crate::library::read_and_prepare(f, &recipe, x_unit, y_unit, solvent))
        .collect::<Result<_>>()?;
    let unknowns: Vec<Prepared> = read.iter().map(|(_, p)| p.clone()).collect();
    let lists = search_many(library, &unknowns, request)?;
    files
        .iter()
        .zip(read)
        .zip(lists)
        .map(|((file, (raw, unknown)), list)| {
            make_report(library, file, raw, &unknown, list, x_unit, solvent, request)
        })
        .collect()
}

#[allow(clippy::too_many_arguments)]
fn make_report(
    library: &Library,
    file: &std::path::Path,
    raw: crate::spectrum::RawSpectrum,
    unknown: &Prepared,
    list: HitList,
    x_unit: Option<crate::spectrum::XUnit>,
    solvent: Option<crate::prepare::Solvent>,
    request: &Request,
) -> Result<Report> {
    let recipe = library.recipe(request.technique)?.clone();
    let mut warnings: Vec<String> = unknown
        .warnings
        .iter()
        .map(|w| format!("unknown: {w}"))
        .collect();
    warnings.extend(list.warnings);
    let report = Report {
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        searched_at: crate::library::now(),
        library: LibraryStamp {
            path: library
                .root()
                .map(|p| p.display().to_string())
                .unwrap_or_else(|| ":memory:".into()),
            fingerprint: library.fingerprint()?,
            last_event: library.last_event()?,
        },
        unknown: UnknownStamp {
            file: file.display().to_string(),
            sha256: raw.file_sha256,
            technique: request.technique,
            x_unit,
            y_unit: unknown.y_unit,
            solvent: solvent.map(|s| s.name().to_string()),
            peaks: unknown.peaks.len(),
        },
        parameters: Parameters {
            top: request.top,
            filter: request.filter.clone(),
            statuses: request.statuses.clone(),
            score: request.params.clone(),
            recipe,
            thresholds: request.thresholds,
        },
        candidates: list.candidates,
        hits: list.hits,
        margin: list.margin,
        warnings,
        caution: crate::CAUTION.to_string(),
    };
    Ok(report)
}
