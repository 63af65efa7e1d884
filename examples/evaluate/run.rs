//! One generator run: every scoring on its unknowns, and the fused default scorings.

use std::collections::BTreeMap;
use std::path::Path;

use whorl::library::{Library, Status};
use whorl::prepare::{Prepared, prepare};
use whorl::search::{Hit, Request, fuse, search};
use whorl::technique::Technique;

use crate::scorings::{Scoring, build_library, scorings};
use crate::seed::Compound;
use crate::unknowns::{Unknown, make_unknown};
use crate::{LEVELS, Level, REPLICATES};

/// One unknown's outcome under one scoring.
#[derive(Clone)]
pub struct Outcome {
    pub level: Level,
    /// The compound ranked first.
    pub first: String,
    /// The true compound.
    pub truth: String,
    /// Rank of the true compound (1-based); `None` when not listed.
    pub rank: Option<usize>,
    /// Best score of a wrong compound.
    pub best_wrong: f64,
    /// Score of the true compound (0 when not listed).
    pub truth_score: f64,
    /// Margin between hits 1 and 2 as the hit list shows it.
    pub margin: f64,
}

pub fn outcome(hits: &[Hit], truth: &str, level: Level) -> Outcome {
    let rank = hits.iter().position(|h| h.name == truth).map(|i| i + 1);
    let best_wrong = hits
        .iter()
        .find(|h| h.name != truth)
        .map_or(0.0, |h| h.score);
    let margin = if hits.len() >= 2 {
        hits[0].score - hits[1].score
    } else {
        0.0
    };
    Outcome {
        level,
        first: hits.first().map_or_else(String::new, |h| h.name.clone()),
        truth: truth.to_string(),
        rank,
        best_wrong,
        truth_score: hits
            .iter()
            .find(|h| h.name == truth)
            .map_or(0.0, |h| h.score),
        margin,
    }
}

pub type Results = Vec<(Scoring, Vec<Outcome>, Vec<f64>)>;

/// Every scoring on the unknowns of one generator run, and the fused default scorings.
pub fn evaluate(seed: &Path, compounds: &[Compound], run: u64) -> (Results, Vec<Outcome>) {
    // Unknowns: generated once per technique, compound, level and replicate.
    let mut results: Results = Vec::new();
    // Default-scoring hit lists for the fusion: (compound, level, replicate) -> per technique.
    type Key = (usize, Level, u64);
    let mut fused_inputs: BTreeMap<Key, Vec<(Technique, Vec<Hit>)>> = BTreeMap::new();
    let all = scorings();
    let mut libs: Vec<((Technique, &'static str), Library)> = Vec::new();
    for s in &all {
        if !libs.iter().any(|(k, _)| *k == (s.technique, s.preparation)) {
            libs.push((
                (s.technique, s.preparation),
                build_library(seed, s.technique, s.tweak),
            ));
        }
    }
    for t in Technique::ALL {
        let unknowns: Vec<(usize, Level, u64, Unknown)> = (0..compounds.len())
            .flat_map(|k| {
                LEVELS
                    .into_iter()
                    .flat_map(move |level| (0..REPLICATES).map(move |r| (k, level, r)))
            })
            .map(|(k, level, r)| {
                (
                    k,
                    level,
                    r,
                    make_unknown(t, compounds, k, level, (run, r), 0),
                )
            })
            .collect();
        // Repeat measurements of the moderate unknowns, for the close margin.
        let repeats: Vec<(usize, Unknown)> = unknowns
            .iter()
            .enumerate()
            .filter(|(_, u)| u.1 == Level::Moderate)
            .map(|(i, (k, level, r, _))| (i, make_unknown(t, compounds, *k, *level, (run, *r), 1)))
            .collect();
        for (_, lib) in libs.iter().filter(|((lt, _), _)| *lt == t) {
            let recipe = lib.recipe(t).unwrap().clone();
            let prepared: Vec<Prepared> = unknowns
                .iter()
                .map(|(k, level, r, u)| {
                    prepare(Path::new("unknown"), &recipe, &u.points, &u.conditions)
                        .unwrap_or_else(|e| panic!("{} {t} {level:?} {r}: {e}", compounds[*k].name))
                })
                .collect();
            let prep_name = libs
                .iter()
                .find(|(_, l)| std::ptr::eq(l, lib))
                .map(|((_, p), _)| *p)
                .unwrap();
            for s in all
                .iter()
                .filter(|s| s.technique == t && s.preparation == prep_name)
            {
                let mut request = Request::new(t);
                request.top = compounds.len();
                // The seed spectra are imported unreviewed (pending); search them all.
                request.statuses = vec![Status::Verified, Status::Pending];
                request.params = s.params.clone();
                let mut outs = Vec::new();
                let mut first_lists: Vec<Vec<Hit>> = Vec::new();
                for ((k, level, r, u), p) in unknowns.iter().zip(&prepared) {
                    request.solvent = u.conditions.solvent;
                    let list = search(lib, p, &request).expect("search");
                    outs.push(outcome(&list.hits, &compounds[*k].name, *level));
                    first_lists.push(list.hits.iter().take(2).cloned().collect());
                    if s.default {
                        fused_inputs
                            .entry((*k, *level, *r))
                            .or_default()
                            .push((t, list.hits));
                    }
                }
                // How much the margin between the first two compounds of an unknown moves in
                // a repeat measurement.
                let mut moves = Vec::new();
                for (i, u) in &repeats {
                    let p = prepare(Path::new("repeat"), &recipe, &u.points, &u.conditions)
                        .expect("repeat prepares");
                    request.solvent = u.conditions.solvent;
                    let again = search(lib, &p, &request).expect("search");
                    let first = &first_lists[*i];
                    if first.len() < 2 {
                        continue;
                    }
                    let score_of = |name: &str| {
                        again
                            .hits
                            .iter()
                            .find(|h| h.name == name)
                            .map_or(0.0, |h| h.score)
                    };
                    let before = first[0].score - first[1].score;
                    let after = score_of(&first[0].name) - score_of(&first[1].name);
                    moves.push(before - after);
                }
                results.push((s.clone(), outs, moves));
            }
        }
    }

    // Fusion over all five techniques with the default scorings.
    let mut fused: Vec<Outcome> = Vec::new();
    for ((k, level, _), lists) in &fused_inputs {
        let borrowed: Vec<(Technique, &[Hit])> =
            lists.iter().map(|(t, h)| (*t, h.as_slice())).collect();
        let f = fuse(&borrowed, compounds.len());
        let truth = &compounds[*k].name;
        let rank = f
            .compounds
            .iter()
            .position(|c| &c.name == truth)
            .map(|i| i + 1);
        fused.push(Outcome {
            level: *level,
            first: f
                .compounds
                .first()
                .map_or_else(String::new, |c| c.name.clone()),
            truth: truth.clone(),
            rank,
            best_wrong: f
                .compounds
                .iter()
                .find(|c| &c.name != truth)
                .map_or(0.0, |c| c.fused),
            truth_score: f
                .compounds
                .iter()
                .find(|c| &c.name == truth)
                .map_or(0.0, |c| c.fused),
            margin: f.margin.unwrap_or(0.0),
        });
    }

    (results, fused)
}
