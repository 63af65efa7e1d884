//! Ranking: the hit list of an unknown, through the vector cache when it can prove the top
//! of the list, else by scoring every candidate.

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use super::confidence::{Confidence, Verdict, confidence_for, list_warnings, verdict};
use super::hit::{Excluded, Hit};
use super::plan::{Plan, Request};
use super::scan;
use super::twins::{similar_references, twin_warning};
use super::warning::{Warning, WarningCode};
use crate::error::Result;
use crate::library::{HitRecord, Library, Status};
use crate::prepare::{Prepared, Solvent, mask_prepared};
use crate::score::{Scores, score};
use crate::technique::Technique;

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
    pub warnings: Vec<Warning>,
    /// What the list comes to (absent in lists saved before verdicts existed).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub verdict: Option<Verdict>,
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
    Plan::new(library, request)?.search(library, unknown)
}

/// Searches several unknowns of one technique together: one pass over the vector cache for
/// all of them. One hit list per unknown, in order.
pub fn search_many(
    library: &Library,
    unknowns: &[Prepared],
    request: &Request,
) -> Result<Vec<HitList>> {
    Plan::new(library, request)?.search_many(library, unknowns)
}

/// [`search`] by scoring every candidate with the full measures: the path constraints and
/// `explain` use, and the reference the cached path is tested against.
pub fn search_exact(library: &Library, unknown: &Prepared, request: &Request) -> Result<HitList> {
    Plan::new(library, request)?.search_exact(library, unknown)
}

impl Plan {
    /// [`search`] under this plan.
    pub fn search(&self, library: &Library, unknown: &Prepared) -> Result<HitList> {
        let mut lists = self.search_many(library, std::slice::from_ref(unknown))?;
        Ok(lists.pop().expect("one hit list per unknown"))
    }

    /// [`search_many`] under this plan.
    pub fn search_many(&self, library: &Library, unknowns: &[Prepared]) -> Result<Vec<HitList>> {
        let request = &self.request;
        // The cache proves a short top list; a request for every candidate (as `identify` makes)
        // scores them all anyway.
        if request.constraints.is_empty()
            && !request.explain
            && request.top <= 1000
            && !self.masks_vary()
            && let Some(rankings) = scan::rank_plan(library, unknowns, self)?
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
            .map(|u| self.search_exact(library, u))
            .collect()
    }
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

impl Plan {
    /// [`search_exact`] under this plan.
    pub fn search_exact(&self, library: &Library, unknown: &Prepared) -> Result<HitList> {
        let request = &self.request;
        let allowed = &self.allowed;
        let candidates = library.candidates(request.technique, &request.statuses)?;
        let grid = &self.recipe.grid;
        // Without `explain`, the text query restricts the candidates before scoring; with it,
        // every candidate is scored so that the ones the query rules out can be listed.
        let prefilter = !request.explain;
        let mut scored: Vec<(f64, usize, Scores)> = candidates
            .par_iter()
            .enumerate()
            .filter(|(_, c)| {
                !prefilter || allowed.as_ref().is_none_or(|a| a.contains(&c.spectrum_id))
            })
            .map(|(i, c)| {
                let regions = self.shared_masks(c.spectrum_id);
                let s = if regions.is_empty() {
                    score(unknown, &c.prepared, grid, &request.params)
                } else {
                    let u = mask_prepared(unknown, grid, &regions);
                    let r = mask_prepared(&c.prepared, grid, &regions);
                    score(&u, &r, grid, &request.params)
                };
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
            if hits.len() >= request.depth() && !check_each {
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
            if hits.len() >= request.depth() {
                continue;
            }
            hits.push(make_hit(hits.len() + 1, combined, components, rec, request));
        }
        finish(library, request, hits, compared, excluded_count, excluded)
    }
}

/// A hit list cut to its first `request.top` hits, with the margin, thresholds and warnings
/// such a list gets: what the same search asking for that many hits gives (for a list made
/// without `explain`, whose ruled-out candidates depend on its length).
pub(super) fn cut(library: &Library, request: &Request, list: &HitList) -> Result<HitList> {
    let hits = list.hits.iter().take(request.depth()).cloned().collect();
    finish(
        library,
        request,
        hits,
        list.candidates,
        list.excluded_count,
        Vec::new(),
    )
}

/// The margin, the thresholds, the verdict and the warnings that go with a hit list, judged on
/// the ranked hits (at least [`super::plan::VERDICT_DEPTH`] of them where there are as many),
/// and the list cut to `request.top`.
fn finish(
    library: &Library,
    request: &Request,
    mut hits: Vec<Hit>,
    compared: usize,
    excluded_count: usize,
    excluded: Vec<Excluded>,
) -> Result<HitList> {
    let margin = (hits.len() >= 2).then(|| hits[0].score - hits[1].score);
    let mut confidence = confidence_for(
        request.technique,
        &request.params,
        request.constraints.ri.is_some(),
    );
    if let Some(w) = request.thresholds.weak_score {
        // A configured weak score is a score, as `whorl.toml` documents it.
        confidence.weak_score = w;
        confidence.evidence = crate::search::Evidence::Score;
        confidence.derived = false;
    }
    if let Some(c) = request.thresholds.close_margin {
        confidence.close_margin = c;
        confidence.derived = false;
    }
    if let Some(s) = request.thresholds.strong_score {
        confidence.strong_score = s;
        confidence.derived = false;
    }
    // A configured weak score above the derived strong one leaves no room for "probable".
    confidence.strong_score = confidence.strong_score.max(confidence.weak_score);
    let mut warnings = list_warnings(&hits, &confidence);
    let verdict = verdict(&hits, &confidence);
    // Without a retention index, an EI list whose first hit is accepted says so when another
    // compound's reference is as alike as isomers are (`twins`).
    if request.technique == Technique::MsEi
        && request.constraints.ri.is_none()
        && !matches!(verdict, Verdict::NoAcceptableMatch { .. })
    {
        let twins = similar_references(library, &hits, confidence.close_margin)?;
        warnings.extend(twin_warning(&hits[0], &twins));
    }
    let verdict = Some(verdict);
    hits.truncate(request.top);
    if request.filter.is_some() && library.text_index_behind() {
        warnings.push(Warning::new(
            WarningCode::TextIndexBehind,
            "the metadata index is behind the database (another process is writing); the --where filter may miss the newest spectra",
        ));
    }
    if !request.statuses.contains(&Status::Pending) {
        let pending = library.count(request.technique, Status::Pending)?;
        if pending > 0 {
            warnings.push(Warning::new(
                WarningCode::PendingNotSearched,
                format!(
                    "{pending} pending (not yet reviewed) {} spectra were not searched; --include-pending adds them",
                    request.technique
                ),
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
        verdict,
    })
}
