//! EI-MS on the real set: other spectra of the same metabolite (leave one out), and each
//! spectrum degraded as a second instrument and a real sample degrade it.

use std::collections::BTreeMap;
use std::path::Path;

use whorl::prepare::{Conditions, Prepared, prepare};
use whorl::score::{Measure, ScoreParams};
use whorl::search::{
    Hit, HitList, RiWindow, TWIN_SIMILARITY, TWIN_SWAP_RATE, reference_similarity, search,
    search_many,
};
use whorl::technique::Technique;

use crate::baseline::{ei_cosine, ei_vector, ranked};
use crate::data::{Entry, Part, entries, import, request, split};
use crate::rng::Rng;
use crate::tally::{Row, Table, Verdicts, rank};

pub const SOURCE: &str = "PNNL GC-MS metabolite library (2019-10-15 release), as shipped in the `corems` 4.1.0 package; \
     one half of it, split by compound (`real-spectra/ei-ms/`). Licence: BSD-2-Clause style, Battelle Memorial Institute \
     (`real-spectra/ei-ms/LICENSE`).";

/// Stream tag of the degraded EI queries.
const DEGRADED_STREAM: u64 = 11;

/// Stream tag of the degraded queries' retention-index drift.
const RI_STREAM: u64 = 12;

/// How far a query's retention index drifts from the library's value: uniform in +-this, as
/// a second run of the same method on the same column phase may drift (common practice; the
/// size is a judgement, fixed before any result was seen).
const RI_DRIFT: f64 = 10.0;

/// The retention-index window of the search: whorl's default `--ri-window` half-width.
const RI_WINDOW: f64 = 20.0;

/// The scorings compared: whorl's default first.
/// Each published alternative names its source: the entropy similarity (Li et al., Nature
/// Methods 2021); the composite with Stein & Scott's weights (J. Am. Soc. Mass Spectrom.
/// 1994); the weights intensity^0.53 (m/z)^1.3 that S. Kim, I. Koo et al. found optimal for
/// GC-MS library search (Bioinformatics 2012, from memory); square-root intensities without a
/// mass weight (the baseline's weighting, inside the composite).
fn variants() -> Vec<(&'static str, bool, ScoreParams)> {
    let default = ScoreParams::default_for(Technique::MsEi);
    let mut jaccard = default.clone();
    jaccard.spectral_weight = 0.8;
    let mut composite = default.clone();
    composite.measure = Measure::Composite;
    composite.composite.reverse = true;
    let mut earlier = composite.clone();
    earlier.spectral_weight = 0.8;
    let mut forward = composite.clone();
    forward.composite.reverse = false;
    let mut kim = forward.clone();
    kim.composite.intensity_exponent = 0.53;
    kim.composite.mass_exponent = 1.3;
    let mut root = forward.clone();
    root.composite.intensity_exponent = 0.5;
    root.composite.mass_exponent = 0.0;
    let mut cosine = default.clone();
    cosine.measure = Measure::Cosine;
    vec![
        ("whorl: entropy similarity (default)", true, default),
        (
            "whorl: entropy similarity, 0.2 peak Jaccard",
            false,
            jaccard,
        ),
        (
            "whorl: composite, reverse search, 0.2 peak Jaccard (the earlier default)",
            false,
            earlier,
        ),
        ("whorl: composite, reverse search", false, composite),
        ("whorl: composite, forward search", false, forward),
        (
            "whorl: composite, forward, weights I^0.53 (m/z)^1.3 (Kim et al. 2012)",
            false,
            kim,
        ),
        (
            "whorl: composite, forward, weights I^0.5, no m/z weight",
            false,
            root,
        ),
        ("whorl: `--measure cosine`", false, cosine),
    ]
}

const BASELINE: &str = "baseline: cosine of square-root intensities over nominal m/z (raw points)";

/// The degradations of one query, drawn in this order from its own stream: a multiplicative
/// noise of +-10 % (uniform) on each ion; a co-eluting compound (another spectrum of the set,
/// of another InChIKey, picked uniformly) added with its base peak at 15 % of the query's; a
/// tuning skew, every ion times exp(g (m/z - 100) / 100) with g uniform in -0.2..0.2, so the
/// intensities drift smoothly up or down with m/z; column-bleed ions m/z 73 and 207 at 5-20 %
/// and m/z 281 at 2-10 % of the query's base peak (uniform); ions below 2 % of the new base
/// peak lost; the rest scaled to a base peak of 999 and rounded. Fixed before any result.
fn degrade(me: &[(f64, f64)], others: &[&[(f64, f64)]], rng: &mut Rng) -> Vec<(f64, f64)> {
    let top = |p: &[(f64, f64)]| p.iter().map(|q| q.1).fold(0.0, f64::max);
    let mut ions: BTreeMap<i64, f64> = BTreeMap::new();
    let base = top(me);
    for &(mz, y) in me {
        *ions.entry(mz.round() as i64).or_default() += 100.0 * y / base * rng.range(0.9, 1.1);
    }
    let other = others[rng.pick(others.len())];
    let other_top = top(other);
    for &(mz, y) in other {
        *ions.entry(mz.round() as i64).or_default() += 15.0 * y / other_top;
    }
    let g = rng.range(-0.2, 0.2);
    for (&mz, v) in ions.iter_mut() {
        *v *= (g * (mz as f64 - 100.0) / 100.0).exp();
    }
    for (mz, lo, hi) in [(73, 5.0, 20.0), (207, 5.0, 20.0), (281, 2.0, 10.0)] {
        *ions.entry(mz).or_default() += rng.range(lo, hi);
    }
    let new_top = ions.values().copied().fold(0.0, f64::max);
    ions.into_iter()
        .filter(|&(_, v)| v >= 0.02 * new_top)
        .map(|(mz, v)| (mz as f64, (999.0 * v / new_top).round().max(1.0)))
        .collect()
}

/// The two EI protocols, each with every variant and the baseline on the same queries.
pub fn protocols(dir: &Path) -> Vec<Table> {
    let entries: Vec<Entry> = entries(dir, "inchikey");
    let parts = split(entries.iter().map(|e| e.label.clone()));
    let imported = import(dir, Technique::MsEi, |_| {});
    // One query per stored spectrum: files that repeat another file byte for byte are stored
    // once, and their first file stands for them.
    let mut first: BTreeMap<i64, usize> = BTreeMap::new();
    for (i, &id) in imported.ids.iter().enumerate() {
        first.entry(id).or_insert(i);
    }
    let distinct: Vec<usize> = first.values().copied().collect();
    let label_of: BTreeMap<i64, &str> = first
        .iter()
        .map(|(&id, &i)| (id, entries[i].label.as_str()))
        .collect();
    let mut per_label: BTreeMap<&str, usize> = BTreeMap::new();
    for &i in &distinct {
        *per_label.entry(&entries[i].label).or_default() += 1;
    }
    let vectors: Vec<Vec<(i64, f64)>> = entries.iter().map(|e| ei_vector(&e.points)).collect();
    let lib = &imported.library;

    // Leave one out: each stored spectrum whose InChIKey has another stored spectrum.
    let queries: Vec<usize> = distinct
        .iter()
        .copied()
        .filter(|&i| per_label[entries[i].label.as_str()] >= 2)
        .collect();
    let prepared: Vec<Prepared> = queries
        .iter()
        .map(|&i| imported.prepared[i].clone())
        .collect();
    let mut rows = Vec::new();
    let mut loo_verdicts = None;
    for (label, default, params) in variants() {
        let mut req = request(Technique::MsEi, VERDICT_DEPTH);
        req.params = params;
        let lists: Vec<HitList> = search_many(lib, &prepared, &req).expect("search");
        let mut row = Row::new(label, default);
        let mut verdicts: [Verdicts; 2] = Default::default();
        for (&i, list) in queries.iter().zip(&lists) {
            let own = imported.ids[i];
            let hits: Vec<Hit> = list
                .hits
                .iter()
                .filter(|h| h.spectrum_id != own)
                .cloned()
                .collect();
            let labels = hits.iter().map(|h| label_of[&h.spectrum_id]);
            let r = rank(labels, &entries[i].label);
            let part = parts[&entries[i].label];
            row.add(part, r);
            if default {
                let truth = entries[i].label.as_str();
                verdicts[part as usize].add_hits(
                    hits,
                    &list.confidence,
                    &format!("ei-loo/{part:?}"),
                    r == Some(1),
                    |h| label_of[&h.spectrum_id] == truth,
                    // The query's own spectrum led its list and was removed: the list's
                    // warnings are about that spectrum, not about what is left.
                    None,
                );
            }
        }
        if default {
            loo_verdicts = Some(verdicts);
        }
        rows.push(row);
    }
    let mut row = Row::new(BASELINE, false);
    for &i in &queries {
        let others = distinct
            .iter()
            .copied()
            .filter(|&k| imported.ids[k] != imported.ids[i]);
        let order = ranked(others, |k| ei_cosine(&vectors[i], &vectors[k]));
        let labels = order.iter().map(|&k| entries[k].label.as_str());
        row.add(parts[&entries[i].label], rank(labels, &entries[i].label));
    }
    rows.push(row);
    let loo = Table {
        title: "EI-MS: other spectra of the same metabolite (leave one out)",
        protocol: format!(
            "Each stored spectrum whose InChIKey has at least one other stored spectrum ({} of the {} distinct spectra; \
             the {} files that repeat another file byte for byte are stored once) is searched against the library of \
             all other spectra; right when the first hit has the same InChIKey (top-5: among the first five hits). \
             The other spectra of a metabolite are mostly other derivatives (e.g. another number of TMS groups) or \
             isomers, so this asks whether a library spectrum of a related form still finds the metabolite. \
             Baseline: the raw intensities summed per nominal m/z, square roots taken, cosine; the same library.",
            queries.len(),
            distinct.len(),
            entries.len() - distinct.len()
        ),
        source: SOURCE,
        rows,
        verdicts: loo_verdicts,
        extra: None,
    };

    // Degraded: every stored spectrum, degraded, against the full library.
    let degraded: Vec<Vec<(f64, f64)>> = distinct
        .iter()
        .map(|&i| {
            let others: Vec<&[(f64, f64)]> = distinct
                .iter()
                .filter(|&&k| entries[k].label != entries[i].label)
                .map(|&k| entries[k].points.as_slice())
                .collect();
            let mut rng = Rng::new(&[DEGRADED_STREAM, i as u64]);
            degrade(&entries[i].points, &others, &mut rng)
        })
        .collect();
    let recipe = lib.recipe(Technique::MsEi).expect("recipe").clone();
    let prepared: Vec<Prepared> = distinct
        .iter()
        .zip(&degraded)
        .map(|(&i, points)| {
            let conditions = Conditions {
                y_unit: Some(imported.prepared[i].y_unit),
                solvent: None,
            };
            prepare(Path::new(&entries[i].file), &recipe, points, &conditions).expect("prepares")
        })
        .collect();
    let tally = |tag: &str, twins: bool, lists: &dyn Fn(ScoreParams) -> Vec<HitList>| {
        let mut rows = Vec::new();
        let mut verdicts = None;
        let mut right_first = Vec::new();
        for (label, default, params) in variants() {
            let lists = lists(params);
            let mut row = Row::new(label, default);
            let mut by_part: [Verdicts; 2] = Default::default();
            for (&i, list) in distinct.iter().zip(&lists) {
                let labels = list.hits.iter().map(|h| label_of[&h.spectrum_id]);
                let r = rank(labels, &entries[i].label);
                let part = parts[&entries[i].label];
                row.add(part, r);
                if default {
                    let truth = entries[i].label.as_str();
                    by_part[part as usize].add_hits(
                        list.hits.clone(),
                        &list.confidence,
                        &format!("{tag}/{part:?}"),
                        r == Some(1),
                        |h| label_of[&h.spectrum_id] == truth,
                        twins.then_some(list.warnings.as_slice()),
                    );
                    right_first.push(r == Some(1));
                }
            }
            if default {
                verdicts = Some(by_part);
            }
            rows.push(row);
        }
        (rows, verdicts, right_first)
    };
    let (mut rows, deg_verdicts, deg_right) = tally("ei-degraded", true, &|params| {
        let mut req = request(Technique::MsEi, VERDICT_DEPTH);
        req.params = params;
        search_many(lib, &prepared, &req).expect("search")
    });
    let mut row = Row::new(BASELINE, false);
    for (&i, points) in distinct.iter().zip(&degraded) {
        let v = ei_vector(points);
        let order = ranked(distinct.iter().copied(), |k| ei_cosine(&v, &vectors[k]));
        let labels = order.iter().map(|&k| entries[k].label.as_str());
        row.add(parts[&entries[i].label], rank(labels, &entries[i].label));
    }
    rows.push(row);
    let deg = Table {
        title: "EI-MS: degraded as a second instrument and a real sample degrade it",
        protocol: format!(
            "Each of the {} distinct spectra, degraded (below), is searched against the full library, which holds its \
             own original; right when the first hit has the right InChIKey. Degradations, drawn per query from a \
             seeded generator and fixed before any result was seen: intensity noise +-10 % per ion; a co-eluting \
             compound (another spectrum of the set, of another InChIKey) with its base peak at 15 % of the query's; \
             an m/z tuning skew (every ion times exp(g (m/z - 100) / 100), g uniform in -0.2..0.2); column-bleed \
             ions m/z 73 and 207 at 5-20 % and m/z 281 at 2-10 % of the base peak; ions below 2 % of the new base \
             peak lost.",
            distinct.len()
        ),
        source: SOURCE,
        rows,
        verdicts: deg_verdicts,
        extra: Some(twins_section(
            &distinct,
            &entries,
            &imported.prepared,
            &parts,
            &deg_right,
        )),
    };

    // Degraded, searched with the query's retention index: the same degraded queries, each
    // given its library retention index moved by a drift of its own, and a window of
    // +-RI_WINDOW; references outside it (or without one) are not hits. The baseline keeps the
    // same window.
    let query_ri: Vec<f64> = distinct
        .iter()
        .map(|&i| {
            let mut rng = Rng::new(&[RI_STREAM, i as u64]);
            entries[i].ri.expect("every EI entry has a retention index")
                + rng.range(-RI_DRIFT, RI_DRIFT)
        })
        .collect();
    let (mut rows, ri_verdicts, _) = tally("ei-degraded-ri", false, &|params| {
        prepared
            .iter()
            .zip(&query_ri)
            .map(|(unknown, &ri)| {
                let mut req = request(Technique::MsEi, VERDICT_DEPTH);
                req.params = params.clone();
                req.constraints.ri = Some(RiWindow {
                    value: ri,
                    window: RI_WINDOW,
                    phase: None,
                });
                search(lib, unknown, &req).expect("search")
            })
            .collect()
    });
    let mut row = Row::new(BASELINE, false);
    for ((&i, points), &ri) in distinct.iter().zip(&degraded).zip(&query_ri) {
        let v = ei_vector(points);
        let within = distinct
            .iter()
            .copied()
            .filter(|&k| entries[k].ri.is_some_and(|r| (r - ri).abs() <= RI_WINDOW));
        let order = ranked(within, |k| ei_cosine(&v, &vectors[k]));
        let labels = order.iter().map(|&k| entries[k].label.as_str());
        row.add(parts[&entries[i].label], rank(labels, &entries[i].label));
    }
    rows.push(row);
    let with_ri = Table {
        title: "EI-MS: degraded, searched with its retention index",
        protocol: format!(
            "The degraded queries above, each searched as a GC-MS analyst searches a peak: with its retention \
             index (`--ri`) and whorl's default window of +-{RI_WINDOW:.0} index units (`--ri-window`), so a \
             reference whose retention index lies outside the window is no hit. A query's retention index is the \
             source's value for its spectrum moved by a drift drawn per query, uniform in +-{RI_DRIFT:.0} units \
             (a second run of the same method; fixed before any result was seen). The baseline ranks the same \
             references, those within the same window, by its cosine. Its verdicts take the weak threshold whorl \
             derives for searches given a retention index, on this protocol's tuning part alone (last section). \
             Not applied to the leave-one-out protocol: another derivative of a metabolite elutes at another \
             retention index, so a window would remove the very spectra that protocol counts as right."
        ),
        source: SOURCE,
        rows,
        verdicts: ri_verdicts,
        extra: None,
    };
    vec![loo, deg, with_ri]
}

/// Hits asked for per query: enough that withdrawing every spectrum of the true InChIKey
/// still leaves the list's first hits.
const VERDICT_DEPTH: usize = 40;

/// The similarities scanned for [`TWIN_SIMILARITY`]: 0.80, 0.81, ..., 0.99.
fn twin_steps() -> impl Iterator<Item = f64> {
    (80..100).map(|k| f64::from(k) / 100.0)
}

/// "Reference spectra too alike": for each degraded query, the highest entropy similarity
/// between its own original (the reference it should find) and a spectrum of another
/// InChIKey, reference against reference; per band of that similarity, how often the default
/// put another compound first. [`TWIN_SIMILARITY`] is the lowest similarity, in steps of
/// 0.01, at and above which at least [`TWIN_SWAP_RATE`] of the tuning searches did.
fn twins_section(
    distinct: &[usize],
    entries: &[Entry],
    prepared: &[Prepared],
    parts: &BTreeMap<String, Part>,
    right_first: &[bool],
) -> String {
    use std::fmt::Write;
    let nearest: Vec<f64> = distinct
        .iter()
        .map(|&i| {
            distinct
                .iter()
                .filter(|&&k| entries[k].label != entries[i].label)
                .map(|&k| reference_similarity(&prepared[i], &prepared[k]))
                .fold(0.0, f64::max)
        })
        .collect();
    let count = |part: Part, t: f64| -> (usize, usize) {
        let mut n = 0;
        let mut wrong = 0;
        for ((&i, &s), &right) in distinct.iter().zip(&nearest).zip(right_first) {
            if parts[&entries[i].label] == part && s >= t {
                n += 1;
                wrong += usize::from(!right);
            }
        }
        (n, wrong)
    };
    let derived = twin_steps().find(|&t| {
        let (n, wrong) = count(Part::Tuning, t);
        n > 0 && wrong as f64 >= TWIN_SWAP_RATE * n as f64
    });
    let mut out = String::new();
    let _ = writeln!(out, "### Reference spectra too alike");
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "Most wrong first hits above are isomers or close relatives whose library spectra agree almost as \
         well as two runs of one standard. For each degraded query, the highest entropy similarity (Li et al. \
         2021) between its own original and a spectrum of another InChIKey, reference against reference; per \
         similarity, how many queries reach it and how many of them the default put another compound first. An \
         EI search without a retention index warns (`similar-references`) when the first hit's reference and \
         another compound's among the hits reach `TWIN_SIMILARITY` (`src/search/twins.rs`): the lowest \
         similarity, in steps of 0.01 from 0.80, at and above which at least {:.0} % of the tuning searches put \
         another compound first (bold). The reported part is shown for information; it played no part.",
        100.0 * TWIN_SWAP_RATE
    );
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "| similarity at least | tuning: queries | tuning: another compound first | reported: queries | reported: another compound first |"
    );
    let _ = writeln!(out, "|---|---|---|---|---|");
    for t in twin_steps() {
        let (tn, tw) = count(Part::Tuning, t);
        let (rn, rw) = count(Part::Reported, t);
        let share = |w: usize, n: usize| {
            if n == 0 {
                "-".to_string()
            } else {
                format!("{w} ({:.2})", w as f64 / n as f64)
            }
        };
        let label = if Some(t) == derived {
            format!("**{t:.2}**")
        } else {
            format!("{t:.2}")
        };
        let _ = writeln!(
            out,
            "| {label} | {tn} | {} | {rn} | {} |",
            share(tw, tn),
            share(rw, rn)
        );
    }
    let _ = writeln!(out);
    match derived {
        Some(t) => {
            let _ = writeln!(
                out,
                "Derived: {t:.2}; `TWIN_SIMILARITY` holds {TWIN_SIMILARITY:.2}{}.",
                if (t - TWIN_SIMILARITY).abs() < 1e-9 {
                    ""
                } else {
                    " -- they differ: set it to the derived value"
                }
            );
        }
        None => {
            let _ = writeln!(
                out,
                "Derived: none (no similarity reaches the rate on tuning); `TWIN_SIMILARITY` holds {TWIN_SIMILARITY:.2}."
            );
        }
    }
    out
}
