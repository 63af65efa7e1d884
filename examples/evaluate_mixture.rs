//! Mixture fits on real EI spectra: how often does `whorl search --components` find both
//! spectra of a mixture of two, at several ratios, and how often does it call a pure
//! compound a mixture?
//!
//! Reads the real EI set of `real-spectra/ei-ms/` (PNNL GC-MS metabolite library, see its
//! README), imports it into an in-memory library, and mixes pairs of its spectra (of two
//! InChIKeys) at known shares of signal. Each mixture is prepared and searched like an
//! unknown, and fitted with `search::fit_mixture_with`. Prints markdown:
//!
//! ```sh
//! cargo run --example evaluate_mixture > docs/evaluation-mixture.md
//! ```
//!
//! The set is split by InChIKey into a tuning and a reported part exactly as
//! `examples/evaluate_real` splits it (`data::split`); the thresholds of `search::mixture` are
//! chosen on the tuning part (its table over a grid of thresholds), and the reported part
//! reports them. Pairs, ratios and noise are drawn from the seeded generator of
//! `examples/evaluate` (`rng.rs`), so every run prints the same.

#[allow(dead_code)]
#[path = "evaluate_real/data.rs"]
mod data;
#[allow(dead_code)]
#[path = "evaluate/rng.rs"]
mod rng;

use std::collections::{BTreeMap, HashSet};
use std::path::Path;

use whorl::library::Library;
use whorl::prepare::{Conditions, Prepared, prepare};
use whorl::search::{Mixture, MixtureSettings, Plan, fit_mixture_with};
use whorl::spectrum::YUnit;
use whorl::technique::Technique;

use data::{Part, entries, import, request, split};
use rng::Rng;

/// Stream tag of the pairs and their noise.
const STREAM: u64 = 23;
/// Pairs drawn per part.
const PAIRS: usize = 60;
/// Pure spectra (measured again) per part.
const PURE: usize = 120;
/// The shares of signal of the first spectrum of a pair: 1:1, 3:1, 10:1.
const RATIOS: [(f64, &str); 3] = [(0.5, "1:1"), (0.75, "3:1"), (10.0 / 11.0, "10:1")];
/// Multiplicative noise on every ion of a "measured again" spectrum, +-10 % uniform.
const NOISE: f64 = 0.10;

const SOURCE: &str = "PNNL GC-MS metabolite library (2019-10-15 release), as shipped in the `corems` 4.1.0 package; \
     one half of it, split by compound (`real-spectra/ei-ms/`). Licence: BSD-2-Clause style, Battelle Memorial Institute \
     (`real-spectra/ei-ms/LICENSE`).";

/// The share of the base peak below which whorl's EI recipe drops an ion.
fn low_abundance() -> f64 {
    whorl::prepare::Recipe::default_for(Technique::MsEi).min_relative_abundance
}

/// A spectrum's ions scaled as whorl prepares them (base peak 1, ions under the recipe's
/// low-abundance threshold dropped), then to unit signal (sum 1), so that `w a + (1 - w) b` holds a share `w` of the signal
/// from `a`.
fn unit_signal(points: &[(f64, f64)]) -> BTreeMap<i64, f64> {
    let top = points.iter().map(|p| p.1).fold(0.0, f64::max);
    let kept: Vec<(i64, f64)> = points
        .iter()
        .map(|&(x, y)| (x.round() as i64, y / top))
        .filter(|&(_, r)| r >= low_abundance())
        .collect();
    let sum: f64 = kept.iter().map(|k| k.1).sum();
    kept.into_iter().map(|(x, r)| (x, r / sum)).collect()
}

/// Two spectra mixed at share `w` of `a`, each ion then times 1 + noise x uniform(-1, 1)
/// when `noise` is given, in percent of the base peak.
fn mix(
    a: &[(f64, f64)],
    b: Option<&[(f64, f64)]>,
    w: f64,
    noise: Option<&mut Rng>,
) -> Vec<(f64, f64)> {
    let mut ions: BTreeMap<i64, f64> = BTreeMap::new();
    for (mz, y) in unit_signal(a) {
        *ions.entry(mz).or_default() += w * y;
    }
    if let Some(b) = b {
        for (mz, y) in unit_signal(b) {
            *ions.entry(mz).or_default() += (1.0 - w) * y;
        }
    }
    if let Some(rng) = noise {
        for v in ions.values_mut() {
            *v *= 1.0 + NOISE * rng.range(-1.0, 1.0);
        }
    }
    let top = ions.values().copied().fold(0.0, f64::max);
    ions.into_iter()
        .map(|(mz, y)| (mz as f64, 100.0 * y / top))
        .collect()
}

fn prepared(library: &Library, points: &[(f64, f64)]) -> Prepared {
    let recipe = library.recipe(Technique::MsEi).expect("recipe");
    let conditions = Conditions {
        y_unit: Some(YUnit::Relative),
        solvent: None,
    };
    prepare(Path::new("mixture"), recipe, points, &conditions).expect("prepares")
}

/// One query: the prepared unknown, the labels and shares it was made of.
struct Query {
    unknown: Prepared,
    /// (label, share of signal), the first the larger.
    truth: Vec<(String, f64)>,
    /// The label left out of the library's search (co-elution protocol).
    absent: Option<String>,
    /// Which ratio (index into RATIOS), or None for a pure spectrum.
    ratio: Option<usize>,
    noisy: bool,
}

/// Counts of one row.
#[derive(Default, Clone)]
struct Tally {
    n: usize,
    hits: usize,
    share_error: f64,
    share_n: usize,
}

impl Tally {
    fn add(&mut self, ok: bool) {
        self.n += 1;
        self.hits += usize::from(ok);
    }

    fn rate(&self) -> String {
        if self.n == 0 {
            return "-".into();
        }
        let p = self.hits as f64 / self.n as f64;
        format!(
            "{:.2} ± {:.2} ({}/{})",
            p,
            (p * (1.0 - p) / self.n as f64).sqrt(),
            self.hits,
            self.n
        )
    }

    fn mean_error(&self) -> String {
        if self.share_n == 0 {
            "-".into()
        } else {
            format!("{:.3}", self.share_error / self.share_n as f64)
        }
    }
}

struct Setup<'a> {
    library: &'a Library,
    plan: Plan,
    label_of: BTreeMap<i64, String>,
    ids_of: BTreeMap<String, Vec<i64>>,
}

impl Setup<'_> {
    /// The fit of one query under `settings`: its hit list searched under the plan (less the
    /// absent label's spectra), then fitted.
    fn fit(&self, q: &Query, settings: &MixtureSettings) -> Mixture {
        let mut plan = self.plan.clone();
        if let Some(absent) = &q.absent {
            let out: HashSet<i64> = self.ids_of[absent].iter().copied().collect();
            plan.allowed = Some(
                self.label_of
                    .keys()
                    .copied()
                    .filter(|id| !out.contains(id))
                    .collect(),
            );
        }
        let hits = plan.search(self.library, &q.unknown).expect("search").hits;
        fit_mixture_with(self.library, &plan, &q.unknown, &hits, settings).expect("fit")
    }

    fn labels(&self, m: &Mixture) -> Vec<&str> {
        m.components
            .iter()
            .map(|c| self.label_of[&c.spectrum_id].as_str())
            .collect()
    }
}

/// The queries of one part: pairs at each ratio, clean and noisy; pure spectra measured
/// again; and co-elution pairs whose minor spectrum's InChIKey is left out of the search.
fn queries(
    library: &Library,
    entries: &[data::Entry],
    pool: &[usize],
    part: Part,
) -> (Vec<Query>, Vec<Query>, Vec<Query>) {
    let tag = match part {
        Part::Tuning => 1,
        Part::Reported => 2,
    };
    let mut rng = Rng::new(&[STREAM, tag]);
    let mut pairs = Vec::new();
    let mut coelution = Vec::new();
    for k in 0..PAIRS {
        let a = pool[rng.pick(pool.len())];
        let b = loop {
            let b = pool[rng.pick(pool.len())];
            if entries[b].label != entries[a].label {
                break b;
            }
        };
        for (r, &(w, _)) in RATIOS.iter().enumerate() {
            for noisy in [false, true] {
                let mut noise = Rng::new(&[STREAM, tag, k as u64, r as u64]);
                let points = mix(
                    &entries[a].points,
                    Some(&entries[b].points),
                    w,
                    noisy.then_some(&mut noise),
                );
                let truth = vec![
                    (entries[a].label.clone(), w),
                    (entries[b].label.clone(), 1.0 - w),
                ];
                pairs.push(Query {
                    unknown: prepared(library, &points),
                    truth: truth.clone(),
                    absent: None,
                    ratio: Some(r),
                    noisy,
                });
                if noisy {
                    coelution.push(Query {
                        unknown: prepared(library, &points),
                        truth,
                        absent: Some(entries[b].label.clone()),
                        ratio: Some(r),
                        noisy,
                    });
                }
            }
        }
    }
    let mut pure = Vec::new();
    for k in 0..PURE.min(pool.len()) {
        let a = pool[(k * pool.len()) / PURE.min(pool.len())];
        let mut noise = Rng::new(&[STREAM, tag, 1000 + k as u64]);
        let points = mix(&entries[a].points, None, 1.0, Some(&mut noise));
        pure.push(Query {
            unknown: prepared(library, &points),
            truth: vec![(entries[a].label.clone(), 1.0)],
            absent: None,
            ratio: None,
            noisy: true,
        });
    }
    (pairs, pure, coelution)
}

/// Both spectra found (by InChIKey), the share error of the pair when they are.
fn both_found(setup: &Setup, q: &Query, m: &Mixture) -> (bool, Option<f64>) {
    let labels = setup.labels(m);
    let found = q.truth.iter().all(|(l, _)| labels.contains(&l.as_str()));
    if !found {
        return (false, None);
    }
    let share = |label: &str| -> f64 {
        m.components
            .iter()
            .zip(&labels)
            .filter(|(_, l)| **l == label)
            .map(|(c, _)| c.share)
            .sum()
    };
    let err = q
        .truth
        .iter()
        .map(|(l, w)| (share(l) - w).abs())
        .fold(0.0, f64::max);
    (true, Some(err))
}

/// The mixture rows of one part under `settings`: per ratio and noise, both found; and the
/// pure spectra kept as one component.
fn mixture_rows(
    setup: &Setup,
    pairs: &[Query],
    pure: &[Query],
    settings: &MixtureSettings,
) -> (Vec<Tally>, Tally) {
    let mut rows = vec![Tally::default(); RATIOS.len() * 2];
    for q in pairs {
        let m = setup.fit(q, settings);
        let (ok, err) = both_found(setup, q, &m);
        let row = &mut rows[q.ratio.expect("a pair") * 2 + usize::from(q.noisy)];
        row.add(ok);
        if let Some(e) = err {
            row.share_error += e;
            row.share_n += 1;
        }
    }
    let mut single = Tally::default();
    for q in pure {
        let m = setup.fit(q, settings);
        single.add(m.components.len() == 1 && setup.labels(&m)[0] == q.truth[0].0);
    }
    (rows, single)
}

fn main() {
    let started = std::time::Instant::now();
    let dir = data::root().join("ei-ms");
    let entries = entries(&dir, "inchikey");
    let parts = split(entries.iter().map(|e| e.label.clone()));
    let imported = import(&dir, Technique::MsEi, |_| {});
    let library = &imported.library;
    let mut first: BTreeMap<i64, usize> = BTreeMap::new();
    for (i, &id) in imported.ids.iter().enumerate() {
        first.entry(id).or_insert(i);
    }
    let label_of: BTreeMap<i64, String> = first
        .iter()
        .map(|(&id, &i)| (id, entries[i].label.clone()))
        .collect();
    let mut ids_of: BTreeMap<String, Vec<i64>> = BTreeMap::new();
    for (&id, l) in &label_of {
        ids_of.entry(l.clone()).or_default().push(id);
    }
    let setup = Setup {
        library,
        plan: Plan::new(library, &request(Technique::MsEi, 10)).expect("plan"),
        label_of,
        ids_of,
    };
    let pool = |p: Part| -> Vec<usize> {
        first
            .values()
            .copied()
            .filter(|&i| parts[&entries[i].label] == p)
            .collect()
    };
    let (tune_pairs, tune_pure, tune_co) =
        queries(library, &entries, &pool(Part::Tuning), Part::Tuning);
    let (rep_pairs, rep_pure, rep_co) =
        queries(library, &entries, &pool(Part::Reported), Part::Reported);
    let default = MixtureSettings::default();

    println!("# Mixture fits on real EI spectra");
    println!();
    println!(
        "Generated by `cargo run --example evaluate_mixture > docs/evaluation-mixture.md` (examples/evaluate_mixture.rs); do not edit by hand."
    );
    println!();
    println!("Source: {SOURCE}");
    println!();
    println!(
        "**Queries.** Pairs of stored spectra of two InChIKeys of one part (the split by InChIKey of \
         `examples/evaluate_real`), drawn from a seeded generator, mixed at shares of signal 1:1, 3:1 and 10:1: each \
         spectrum scaled as whorl prepares it (base peak 1, ions under {} % dropped) and then to unit signal (sum \
         of abundances 1), added with weights w and 1 - w, once clean and once with every ion of the sum times \
         1 + 0.1 u (u uniform in -1..1, a second measurement's scatter). Each mixture is prepared with the library's \
         recipe, searched against the whole set (both spectra are in it) and fitted with up to {} components. \
         **Both found**: both InChIKeys among the components (a stored spectrum of the same InChIKey counts); share \
         error: the larger of the two |fitted share - w| over the mixtures where both were found. **Pure**: {} \
         spectra per part measured again (the same noise), right when the fit keeps one component of the right \
         InChIKey. **Co-elution**: the noisy pairs searched with every spectrum of the minor InChIKey left out of \
         the library, flagged when some ion is unexplained; the pure spectra should not be flagged. Uncertainties are \
         binomial standard errors; pairs share spectra, so the true uncertainty is larger.",
        100.0 * low_abundance(),
        default.max_components,
        PURE
    );
    println!();

    // Tuning: a grid of the two gain thresholds on the tuning part.
    println!("## Tuning part: thresholds of a further component");
    println!();
    println!(
        "| min relative gain | min gain | both found 1:1 | 3:1 | 10:1 | noisy 1:1 | noisy 3:1 | noisy 10:1 | pure kept as one |"
    );
    println!("| --- | --- | --- | --- | --- | --- | --- | --- | --- |");
    for rel in [0.25, 0.5, 0.75] {
        for gain in [0.0005, 0.002, 0.01] {
            let s = MixtureSettings {
                min_relative_gain: rel,
                min_gain: gain,
                ..default
            };
            let (rows, single) = mixture_rows(&setup, &tune_pairs, &tune_pure, &s);
            let mark = if rel == default.min_relative_gain && gain == default.min_gain {
                "**"
            } else {
                ""
            };
            println!(
                "| {mark}{rel}{mark} | {mark}{gain}{mark} | {} | {} | {} | {} | {} | {} | {} |",
                rows[0].rate(),
                rows[2].rate(),
                rows[4].rate(),
                rows[1].rate(),
                rows[3].rate(),
                rows[5].rate(),
                single.rate()
            );
        }
    }
    println!();

    // Tuning: co-elution thresholds, from the default fit's components.
    println!("## Tuning part: co-elution thresholds");
    println!();
    println!(
        "Flagged: some ion of at least *abundance* of the base peak has at least *left* of it unexplained by the fit \
         (default fit). Co-elution rows: noisy pairs with the minor InChIKey absent from the library; pure: the pure \
         spectra."
    );
    println!();
    println!("| abundance | left | flagged 1:1 | 3:1 | 10:1 | pure flagged |");
    println!("| --- | --- | --- | --- | --- | --- |");
    let fitted_of = |m: &Mixture| -> Vec<f64> {
        let mut f = vec![0.0; m_len(library)];
        for c in &m.components {
            let v = library.prepared(c.spectrum_id).expect("prepared").vector;
            for (fi, &a) in f.iter_mut().zip(&v) {
                *fi += c.coefficient * f64::from(a);
            }
        }
        f
    };
    let co_fits: Vec<(Vec<f64>, Vec<f64>)> = tune_co
        .iter()
        .chain(&tune_pure)
        .map(|q| {
            let m = setup.fit(q, &default);
            let u: Vec<f64> = q.unknown.vector.iter().map(|&v| f64::from(v)).collect();
            (u, fitted_of(&m))
        })
        .collect();
    for abundance in [0.02, 0.05, 0.1] {
        for left in [0.3, 0.5, 0.7] {
            let flagged = |u: &[f64], f: &[f64]| {
                u.iter()
                    .zip(f)
                    .any(|(&y, &f)| y >= abundance && (y - f).max(0.0) >= left * y)
            };
            let mut rows = vec![Tally::default(); RATIOS.len()];
            let mut pure = Tally::default();
            for (q, (u, f)) in tune_co.iter().chain(&tune_pure).zip(&co_fits) {
                match q.ratio {
                    Some(r) => rows[r].add(flagged(u, f)),
                    None => pure.add(flagged(u, f)),
                }
            }
            let mark = if abundance == default.coelution_min_abundance
                && left == default.coelution_unexplained
            {
                "**"
            } else {
                ""
            };
            println!(
                "| {mark}{abundance}{mark} | {mark}{left}{mark} | {} | {} | {} | {} |",
                rows[0].rate(),
                rows[1].rate(),
                rows[2].rate(),
                pure.rate()
            );
        }
    }
    println!();

    // Reported part: the defaults only.
    println!("## Reported part: whorl's defaults");
    println!();
    println!(
        "Defaults: at most {} components, min relative gain {}, min gain {}, co-elution at {} of the base peak with {} \
         of the ion left.",
        default.max_components,
        default.min_relative_gain,
        default.min_gain,
        default.coelution_min_abundance,
        default.coelution_unexplained
    );
    println!();
    let (rows, single) = mixture_rows(&setup, &rep_pairs, &rep_pure, &default);
    println!("| mixture | both found | share error (mean) |");
    println!("| --- | --- | --- |");
    for (r, &(_, name)) in RATIOS.iter().enumerate() {
        for noisy in [false, true] {
            let t = &rows[r * 2 + usize::from(noisy)];
            println!(
                "| {name}{} | {} | {} |",
                if noisy { ", noisy" } else { "" },
                t.rate(),
                t.mean_error()
            );
        }
    }
    println!(
        "| pure, noisy: kept as one component | {} | - |",
        single.rate()
    );
    let mut co = vec![Tally::default(); RATIOS.len()];
    let mut found_major = Tally::default();
    for q in &rep_co {
        let m = setup.fit(q, &default);
        co[q.ratio.expect("a pair")].add(m.coelution());
        found_major.add(setup.labels(&m).contains(&q.truth[0].0.as_str()));
    }
    let mut pure_flag = Tally::default();
    for q in &rep_pure {
        pure_flag.add(setup.fit(q, &default).coelution());
    }
    for (r, &(_, name)) in RATIOS.iter().enumerate() {
        println!(
            "| co-elution {name}, minor absent: flagged | {} | - |",
            co[r].rate()
        );
    }
    println!(
        "| co-elution, minor absent: major found | {} | - |",
        found_major.rate()
    );
    println!("| pure, noisy: flagged | {} | - |", pure_flag.rate());
    println!();
    println!(
        "A component is evidence that a library spectrum accounts for part of the signal, not proof that the compound \
         is present; shares are of signal, not of amount."
    );
    eprintln!("evaluated in {:.0} s", started.elapsed().as_secs_f64());
}

/// The length of the EI grid's vectors.
fn m_len(library: &Library) -> usize {
    library.recipe(Technique::MsEi).expect("recipe").grid.len()
}
