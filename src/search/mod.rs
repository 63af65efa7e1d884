//! Ranking library spectra against an unknown: scores, constraints, confidence, reports.

mod constraints;
mod fusion;
mod retention;
mod scan;

pub use crate::config::{IdentityPolicy, Thresholds};
pub use constraints::{Constraints, RI_KEY, RI_PHASE_KEY, RiWindow};
pub use fusion::{
    DISAGREE_OUTSIDE, FUSION_RULE, FusedCompound, Fusion, IdentifyOptions, IdentifyReport,
    PolicyVerdict, TechniqueEvidence, TechniqueRun, UnknownInput, fuse, identify, judge,
};
pub use retention::{linear_retention_index, parse_alkanes, retention_index};
pub use scan::{Trace, rank, rank_traced};

mod references;
mod replay;

pub use references::references;
pub use replay::{Replay, load_saved, replay};

use std::collections::HashSet;

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::error::Result;
use crate::library::{HitRecord, Library, Status};
use crate::prepare::{Prepared, Solvent};
use crate::score::{Measure, ScoreParams, Scores, score};
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
    /// Formula, mass, IHD, element and retention-index constraints.
    pub constraints: Constraints,
    /// List the candidates that the query or the constraints ruled out, with the reason.
    pub explain: bool,
    /// Which review statuses are searched.
    pub statuses: Vec<Status>,
    /// Scoring parameters.
    pub params: ScoreParams,
    /// Overrides of the derived warning thresholds (a library's `whorl.toml`).
    pub thresholds: Thresholds,
    /// The unknown's NMR solvent, compared with each hit's.
    pub solvent: Option<Solvent>,
}

impl Request {
    /// A request with the technique's default parameters.
    pub fn new(technique: Technique) -> Request {
        Request {
            technique,
            top: 10,
            filter: None,
            constraints: Constraints::default(),
            explain: false,
            statuses: vec![Status::Verified],
            params: ScoreParams::default_for(technique),
            thresholds: Thresholds::default(),
            solvent: None,
        }
    }

    /// Takes the score parameters and thresholds a library's `whorl.toml` sets for this
    /// request's technique; `top` is left to the caller, which knows whether the user gave one.
    pub fn apply_config(&mut self, config: &crate::config::Config) {
        if let Some(w) = config.spectral_weight(self.technique) {
            self.params.spectral_weight = w;
        }
        if let Some(t) = config.peak_tolerance(self.technique) {
            self.params.peak_tolerance = t;
        }
        self.thresholds = config.thresholds;
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
    /// NMR solvent of the reference.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub solvent: Option<String>,
    /// Things to know about this hit (for example a solvent that differs from the unknown's).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub notes: Vec<String>,
}

/// A candidate that scored high enough to be listed but was ruled out.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Excluded {
    /// The combined score it had.
    pub score: f64,
    /// Library spectrum id.
    pub spectrum_id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Compound name.
    pub name: String,
    /// Formula.
    pub formula: Option<String>,
    /// Why it was ruled out.
    pub reason: String,
}

/// A ranked hit list with what the analyst needs to judge it.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct HitList {
    /// Hits, best first.
    pub hits: Vec<Hit>,
    /// How many library spectra were compared.
    pub candidates: usize,
    /// How many candidates the query or the constraints ruled out.
    pub excluded_count: usize,
    /// With `explain`: the ruled-out candidates that scored above the last hit listed, best
    /// first, with the reason.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub excluded: Vec<Excluded>,
    /// Score of hit 1 minus score of hit 2 (None with fewer than two hits).
    pub margin: Option<f64>,
    /// The thresholds the warnings used.
    pub confidence: Confidence,
    /// Plain-language warnings about how far to trust the list.
    pub warnings: Vec<String>,
}

/// How sure a hit list may sound. Below `weak_score` the best hit is reported as a weak
/// match; two top hits of different compounds closer than `close_margin` are reported as too
/// close to tell apart.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Confidence {
    /// Weak-match threshold for the best combined score.
    pub weak_score: f64,
    /// Too-close threshold for the margin between hits 1 and 2.
    pub close_margin: f64,
    /// Whether the thresholds were derived for this scoring (else the fallback values).
    pub derived: bool,
}

/// One row of the derived thresholds: a technique, its ranking measure and search direction.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Threshold {
    /// Technique.
    pub technique: Technique,
    /// Ranking measure.
    pub measure: Measure,
    /// EI-MS reverse search.
    pub reverse: bool,
    /// See [`Confidence::weak_score`].
    pub weak_score: f64,
    /// See [`Confidence::close_margin`].
    pub close_margin: f64,
}

const fn row(
    technique: Technique,
    measure: Measure,
    reverse: bool,
    weak_score: f64,
    close_margin: f64,
) -> Threshold {
    Threshold {
        technique,
        measure,
        reverse,
        weak_score,
        close_margin,
    }
}

/// The confidence thresholds: the weak-score and close-margin thresholds of every technique
/// and measure, derived by the evaluation harness (`examples/evaluate.rs`; its output, with
/// the derivation written out, is `docs/evaluation.md`) from degraded unknowns at the
/// moderate level, with the default preparation and otherwise default parameters:
///
/// - weak score: the 95th percentile of the best combined score of a wrong compound, so a
///   best hit below it scores no better than wrong compounds do in one unknown in twenty;
/// - close margin: 1.96 times the standard deviation with which the score difference of the
///   first two compounds changes between repeat measurements of the same sample, so two top
///   hits closer than it may swap places in a repeat.
///
/// Both are rounded up to two decimals. The unit test `thresholds_match_the_evaluation`
/// checks this table against `docs/evaluation.md`.
pub const THRESHOLDS: [Threshold; 13] = [
    row(Technique::Ir, Measure::Correlation, false, 0.82, 0.03),
    row(Technique::Ir, Measure::Cosine, false, 0.83, 0.03),
    row(Technique::Ir, Measure::Derivative, false, 0.76, 0.03),
    row(Technique::Raman, Measure::Correlation, false, 0.85, 0.03),
    row(Technique::Raman, Measure::Cosine, false, 0.85, 0.04),
    row(Technique::Raman, Measure::Derivative, false, 0.81, 0.04),
    row(Technique::MsEi, Measure::Composite, false, 0.77, 0.02),
    row(Technique::MsEi, Measure::Composite, true, 0.88, 0.02),
    row(Technique::MsEi, Measure::Cosine, false, 0.88, 0.02),
    row(Technique::Nmr1h, Measure::Cosine, false, 0.92, 0.03),
    row(Technique::Nmr1h, Measure::Correlation, false, 0.93, 0.03),
    row(Technique::Nmr13c, Measure::ShiftMatch, false, 0.67, 0.26),
    row(Technique::Nmr13c, Measure::Cosine, false, 0.67, 0.50),
];

/// The thresholds for a technique and its score parameters: the derived row for this
/// technique, measure and search direction (which matters only to the EI-MS composite); for
/// a combination the table lacks, the row of the technique's default scoring, marked as not
/// derived for this scoring.
pub fn confidence(technique: Technique, params: &ScoreParams) -> Confidence {
    // The search direction shapes only the composite score.
    let direction = |p: &ScoreParams| {
        technique == Technique::MsEi && p.measure == Measure::Composite && p.composite.reverse
    };
    let find = |p: &ScoreParams| {
        THRESHOLDS.iter().find(|t| {
            t.technique == technique && t.measure == p.measure && t.reverse == direction(p)
        })
    };
    let (row, derived) = match find(params) {
        Some(r) => (r, true),
        None => (
            find(&ScoreParams::default_for(technique))
                .expect("every technique has a row for its default measure"),
            false,
        ),
    };
    Confidence {
        weak_score: row.weak_score,
        close_margin: row.close_margin,
        derived,
    }
}

/// Notes about one hit for an unknown measured in `unknown_solvent`.
fn hit_notes(
    technique: Technique,
    unknown_solvent: Option<Solvent>,
    rec: &HitRecord,
) -> Vec<String> {
    let mut notes = Vec::new();
    if !technique.is_nmr() {
        return notes;
    }
    let reference = rec.metadata.solvent.as_deref();
    match (unknown_solvent, reference) {
        (Some(u), Some(r)) if !u.name().eq_ignore_ascii_case(r) => notes.push(format!(
            "solvent differs: reference in {r}, unknown in {u}; shifts can move with the solvent"
        )),
        (Some(_), None) => notes.push("reference has no solvent on record".to_string()),
        _ => {}
    }
    notes
}

/// Ranks the library's spectra of the unknown's technique. Ties are broken by spectrum id,
/// so the same inputs always give the same list. A plain search goes through the technique's
/// vector cache (`crate::cache`), which gives the same hits as [`search_exact`] without
/// scoring every candidate in full; constraints and `explain` need every candidate's score
/// and take the exact path.
pub fn search(library: &Library, unknown: &Prepared, request: &Request) -> Result<HitList> {
    let mut lists = search_many(library, std::slice::from_ref(unknown), request)?;
    Ok(lists.pop().expect("one hit list per unknown"))
}

/// Searches several unknowns of one technique together: one pass over the vector cache for
/// all of them. One hit list per unknown, in order.
pub fn search_many(
    library: &Library,
    unknowns: &[Prepared],
    request: &Request,
) -> Result<Vec<HitList>> {
    request.params.validate(request.technique)?;
    request.constraints.validate()?;
    // The cache proves a short top list; a request for every candidate (as `identify` makes)
    // scores them all anyway.
    if request.constraints.is_empty()
        && !request.explain
        && request.top <= 1000
        && let Some(rankings) = scan::rank(library, unknowns, request)?
    {
        return rankings
            .into_iter()
            .map(|r| {
                let excluded_count = r.searched.saturating_sub(r.compared);
                let mut hits = Vec::with_capacity(r.scored.len());
                let ids: Vec<i64> = r.scored.iter().map(|s| s.1).collect();
                for ((combined, _, components), rec) in
                    r.scored.into_iter().zip(library.hit_records(&ids)?)
                {
                    hits.push(make_hit(hits.len() + 1, combined, components, rec, request));
                }
                finish(
                    library,
                    request,
                    hits,
                    r.compared,
                    excluded_count,
                    Vec::new(),
                )
            })
            .collect();
    }
    unknowns
        .iter()
        .map(|u| search_exact(library, u, request))
        .collect()
}

/// The candidates of one unknown that made the top, best first, with their exact scores.
#[derive(Debug, Clone)]
pub struct Ranking {
    /// `(combined score, spectrum id, scores)`, best first, ties by spectrum id.
    pub scored: Vec<(f64, i64, Scores)>,
    /// How many library spectra were compared.
    pub compared: usize,
    /// How many library spectra have the statuses searched (before any metadata query).
    pub searched: usize,
}

fn make_hit(
    rank: usize,
    combined: f64,
    components: Scores,
    rec: HitRecord,
    request: &Request,
) -> Hit {
    Hit {
        rank,
        score: combined,
        components,
        spectrum_id: rec.id,
        compound_id: rec.compound_id,
        notes: hit_notes(request.technique, request.solvent, &rec),
        solvent: rec.metadata.solvent.clone(),
        name: rec.metadata.name,
        formula: rec.metadata.formula,
        cas: rec.metadata.cas,
        technique: rec.technique,
        status: rec.status,
    }
}

/// [`search`] by scoring every candidate with the full measures: the path constraints and
/// `explain` use, and the reference the cached path is tested against.
pub fn search_exact(library: &Library, unknown: &Prepared, request: &Request) -> Result<HitList> {
    request.params.validate(request.technique)?;
    request.constraints.validate()?;
    let allowed: Option<HashSet<i64>> = match &request.filter {
        Some(q) => Some(library.text().matching_ids(q)?),
        None => None,
    };
    let candidates = library.candidates(request.technique, &request.statuses)?;
    let grid = &library.recipe(request.technique)?.grid;
    // Without `explain`, the text query restricts the candidates before scoring; with it,
    // every candidate is scored so that the ones the query rules out can be listed.
    let prefilter = !request.explain;
    let mut scored: Vec<(f64, usize, Scores)> = candidates
        .par_iter()
        .enumerate()
        .filter(|(_, c)| !prefilter || allowed.as_ref().is_none_or(|a| a.contains(&c.spectrum_id)))
        .map(|(i, c)| {
            let s = score(unknown, &c.prepared, grid, &request.params);
            (s.combined, i, s)
        })
        .collect();
    let compared = scored.len();
    let mut excluded_count = if prefilter {
        candidates.len() - compared
    } else {
        0
    };
    scored.sort_by(|a, b| {
        b.0.total_cmp(&a.0).then(
            candidates[a.1]
                .spectrum_id
                .cmp(&candidates[b.1].spectrum_id),
        )
    });

    let mut hits: Vec<Hit> = Vec::new();
    let mut excluded: Vec<Excluded> = Vec::new();
    let check_each = !request.constraints.is_empty() || !prefilter;
    for (combined, i, components) in scored {
        let c = &candidates[i];
        if hits.len() >= request.top && !check_each {
            break;
        }
        let rec = match library.hit_records(&[c.spectrum_id])?.pop() {
            Some(r) => r,
            None => continue,
        };
        let mut reason = None;
        if !prefilter
            && allowed
                .as_ref()
                .is_some_and(|a| !a.contains(&c.spectrum_id))
        {
            reason = Some(format!(
                "does not match --where '{}'",
                request.filter.as_deref().unwrap_or("")
            ));
        }
        if reason.is_none() {
            reason = request.constraints.rule_out(&rec.metadata);
        }
        if let Some(reason) = reason {
            excluded_count += 1;
            if request.explain && hits.len() < request.top {
                excluded.push(Excluded {
                    score: combined,
                    spectrum_id: rec.id,
                    compound_id: rec.compound_id,
                    name: rec.metadata.name,
                    formula: rec.metadata.formula,
                    reason,
                });
            }
            continue;
        }
        if hits.len() >= request.top {
            continue;
        }
        hits.push(make_hit(hits.len() + 1, combined, components, rec, request));
    }
    finish(library, request, hits, compared, excluded_count, excluded)
}

/// The margin, the thresholds and the warnings that go with a hit list.
fn finish(
    library: &Library,
    request: &Request,
    hits: Vec<Hit>,
    compared: usize,
    excluded_count: usize,
    excluded: Vec<Excluded>,
) -> Result<HitList> {
    let margin = (hits.len() >= 2).then(|| hits[0].score - hits[1].score);
    let mut confidence = confidence(request.technique, &request.params);
    if let Some(w) = request.thresholds.weak_score {
        confidence.weak_score = w;
        confidence.derived = false;
    }
    if let Some(c) = request.thresholds.close_margin {
        confidence.close_margin = c;
        confidence.derived = false;
    }
    let mut warnings = list_warnings(&hits, &confidence);
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
    Ok(HitList {
        hits,
        candidates: compared,
        excluded_count,
        excluded,
        margin,
        confidence,
        warnings,
    })
}

/// The first hit, the nearest hit of another compound, and the gap between their scores: the
/// gap decides whether the first can be told apart.
fn runner_up(hits: &[Hit]) -> Option<(&Hit, &Hit, f64)> {
    let first = hits.first()?;
    let other = hits
        .iter()
        .skip(1)
        .find(|h| h.compound_id != first.compound_id)?;
    Some((first, other, first.score - other.score))
}

/// True when a hit list's first hit passes both confidence thresholds: its score is not weak
/// and the nearest hit of another compound is not too close.
pub fn is_confident(hits: &[Hit], c: &Confidence) -> bool {
    hits.first().is_some_and(|best| best.score >= c.weak_score)
        && runner_up(hits).is_none_or(|(_, _, gap)| gap >= c.close_margin)
}

/// The plain-language warnings about a hit list: no hits, a weak best hit, top hits too close.
fn list_warnings(hits: &[Hit], c: &Confidence) -> Vec<String> {
    let mut warnings = Vec::new();
    match hits.first() {
        None => warnings.push(
            "no library spectrum to compare with: check the technique, the --where query and the constraints"
                .to_string(),
        ),
        Some(best) if best.score < c.weak_score => warnings.push(format!(
            "best score {:.3} is below {:.3}: a weak match, not an identification",
            best.score, c.weak_score
        )),
        Some(_) => {}
    }
    if let Some((first, other, gap)) = runner_up(hits)
        && gap < c.close_margin
    {
        warnings.push(format!(
            "{} and {} differ by only {gap:.3} (less than {:.3}): too close to tell apart by this spectrum alone",
            first.name, other.name, c.close_margin
        ));
    }
    warnings
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

impl LibraryStamp {
    /// The stamp of a library as it is now.
    pub fn of(library: &Library) -> Result<LibraryStamp> {
        Ok(LibraryStamp {
            path: library
                .root()
                .map(|p| p.display().to_string())
                .unwrap_or_else(|| ":memory:".into()),
            fingerprint: library.fingerprint()?,
            last_event: library.last_event()?,
        })
    }
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
    /// Constraints applied to the hits.
    pub constraints: Constraints,
    /// Whether ruled-out candidates are listed.
    pub explain: bool,
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
    /// Candidates the query or the constraints ruled out.
    pub excluded_count: usize,
    /// With `--explain`: ruled-out candidates that scored above the last hit, with the reason.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub excluded: Vec<Excluded>,
    /// Hits, best first.
    pub hits: Vec<Hit>,
    /// Hit 1 minus hit 2.
    pub margin: Option<f64>,
    /// The thresholds behind the warnings.
    pub confidence: Confidence,
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
    request.params.validate(request.technique)?;
    request.constraints.validate()?;
    let (raw, unknown) = crate::library::read_and_prepare(file, &recipe, x_unit, y_unit, solvent)?;
    let mut request = request.clone();
    request.solvent = solvent;
    let list = search(library, &unknown, &request)?;
    let report = make_report(
        library, file, raw, &unknown, list, x_unit, solvent, &request,
    )?;
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
    let mut request = request.clone();
    request.solvent = solvent;
    let request = &request;
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
        library: LibraryStamp::of(library)?,
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
            constraints: request.constraints.clone(),
            explain: request.explain,
            recipe,
            thresholds: request.thresholds,
        },
        candidates: list.candidates,
        excluded_count: list.excluded_count,
        excluded: list.excluded,
        hits: list.hits,
        margin: list.margin,
        confidence: list.confidence,
        warnings,
        caution: crate::CAUTION.to_string(),
    };
    Ok(report)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thresholds_match_the_evaluation() {
        // docs/evaluation.md is the output of examples/evaluate.rs; its threshold table has
        // the technique, the measure, then the weak score and close margin in bold.
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/evaluation.md");
        let text = std::fs::read_to_string(path).expect("docs/evaluation.md");
        let mut rows = 0;
        let section = text
            .split("## Confidence thresholds")
            .nth(1)
            .expect("a thresholds section");
        for line in section
            .lines()
            .filter(|l| l.matches("**").count() == 4 && !l.starts_with("| technique"))
        {
            let cells: Vec<&str> = line.trim_matches('|').split('|').map(str::trim).collect();
            let technique: Technique = cells[0].parse().unwrap();
            let (measure, reverse) = match cells[1].split_once(", ") {
                Some((m, "reverse")) => (m, true),
                Some((m, "forward")) => (m, false),
                _ => (cells[1], false),
            };
            let measure: Measure = measure.parse().unwrap();
            let bold: Vec<f64> = cells
                .iter()
                .filter_map(|c| c.strip_prefix("**")?.strip_suffix("**")?.parse().ok())
                .collect();
            let t = THRESHOLDS
                .iter()
                .find(|t| t.technique == technique && t.measure == measure && t.reverse == reverse)
                .unwrap_or_else(|| panic!("no THRESHOLDS row for {line}"));
            assert_eq!((t.weak_score, t.close_margin), (bold[0], bold[1]), "{line}");
            rows += 1;
        }
        assert_eq!(
            rows,
            THRESHOLDS.len(),
            "every row of THRESHOLDS is in the evaluation"
        );
    }

    #[test]
    fn every_technique_has_thresholds_for_its_default_scoring() {
        for t in Technique::ALL {
            let c = confidence(t, &ScoreParams::default_for(t));
            assert!(c.derived, "{t}");
            assert!(c.weak_score > 0.0 && c.close_margin > 0.0);
        }
        // The search direction does not change the cosine, so it keeps the cosine's row.
        let mut p = ScoreParams::default_for(Technique::MsEi);
        p.measure = Measure::Cosine;
        for reverse in [false, true] {
            p.composite.reverse = reverse;
            let c = confidence(Technique::MsEi, &p);
            assert!(c.derived, "{p:?}");
        }
    }
}
