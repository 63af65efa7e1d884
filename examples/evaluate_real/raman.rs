//! Raman on the real set: each spectrum searched against the spectra of the other
//! instruments, as measured and degraded.

use std::collections::BTreeMap;
use std::path::Path;

use whorl::prepare::{ALS_DEFAULT, Baseline, Conditions, Prepared, Recipe, prepare};
use whorl::score::{Measure, ScoreParams};
use whorl::search::{Hit, search_many};
use whorl::spectrum::YUnit;
use whorl::technique::Technique;

use crate::baseline::{raman_cosine, raman_vector, ranked};
use crate::data::{Entry, Imported, entries, import, request, split};
use crate::rng::Rng;
use crate::tally::{Row, Table, Verdicts, rank};

pub const SOURCE: &str = "Raman round-robin spectra of the CHARISMA project, as shipped in the `ramanchada2` 1.5.0 \
     package (`real-spectra/raman/`): four materials on six instrument set-ups, raw counts. Licence: MIT \
     (`real-spectra/raman/LICENSE`).";

/// Stream tag of the degraded Raman queries.
const DEGRADED_STREAM: u64 = 12;

/// A change to the technique's default recipe.
type Tweak = fn(&mut Recipe);

/// The library preparations compared: whorl's default (ALS baseline removal) first.
fn preparations() -> Vec<(&'static str, Tweak)> {
    vec![
        ("rubber-band baseline", |r| {
            r.baseline = Some(Baseline::RubberBand)
        }),
        ("ALS baseline", |r| r.baseline = Some(ALS_DEFAULT)),
        ("no baseline removal", |r| r.baseline = None),
    ]
}

/// The measures compared: whorl's default (derivative) first.
const MEASURES: [Measure; 3] = [Measure::Derivative, Measure::Correlation, Measure::Cosine];

const BASELINE: &str =
    "baseline: cosine after a smoothed running-minimum baseline, 200-1800 cm-1 (raw points)";

/// The degradations of one query, drawn in this order from its own stream: a laser-wavelength
/// calibration offset, every x moved by d cm-1 with |d| uniform in 1..4 and a random sign; a
/// fluorescence background, a Gaussian 2500 cm-1 wide (FWHM) centred uniformly in 500-3000
/// cm-1 and as tall as 1-3 times the spectrum's own range (99th minus 1st percentile of its
/// counts), with its shot noise (sd the square root of the background); one cosmic-ray spike,
/// one point anywhere in the spectrum raised by 1-5 times that range. Fixed before any result.
fn degrade(points: &[(f64, f64)], rng: &mut Rng) -> Vec<(f64, f64)> {
    let mut ys: Vec<f64> = points.iter().map(|p| p.1).collect();
    ys.sort_by(f64::total_cmp);
    let at = |q: f64| ys[((ys.len() - 1) as f64 * q).round() as usize];
    let range = at(0.99) - at(0.01);
    let offset = rng.sign() * rng.range(1.0, 4.0);
    let centre = rng.range(500.0, 3000.0);
    let height = rng.range(1.0, 3.0) * range;
    let spike_at = rng.pick(points.len());
    let spike = rng.range(1.0, 5.0) * range;
    points
        .iter()
        .enumerate()
        .map(|(k, &(x, y))| {
            let d = (x - centre) / 2500.0;
            let background = height * (-4.0 * std::f64::consts::LN_2 * d * d).exp();
            let mut y = y + background + background.sqrt() * rng.gauss();
            if k == spike_at {
                y += spike;
            }
            (x + offset, y)
        })
        .collect()
}

/// The queries of one protocol, prepared with each library's recipe.
struct Queries<'a> {
    /// The raw points of each query (for the baseline).
    points: Vec<&'a [(f64, f64)]>,
    /// Per preparation, each query prepared with its recipe.
    prepared: Vec<Vec<Prepared>>,
    /// The protocol's short name.
    tag: &'static str,
}

/// Every variant and the baseline over one set of queries (query k is entry k), each searched
/// against the spectra of the other instruments.
fn table(
    entries: &[Entry],
    libs: &[(&'static str, Imported)],
    queries: &Queries,
    parts: &BTreeMap<String, crate::data::Part>,
) -> (Vec<Row>, Option<[Verdicts; 2]>) {
    let mut rows = Vec::new();
    let mut verdicts: Option<[Verdicts; 2]> = None;
    let default = ScoreParams::default_for(Technique::Raman);
    for (p, (prep, imported)) in libs.iter().enumerate() {
        let of_id: BTreeMap<i64, usize> = imported
            .ids
            .iter()
            .enumerate()
            .map(|(i, &id)| (id, i))
            .collect();
        for m in MEASURES {
            let mut req = request(Technique::Raman, entries.len());
            req.params.measure = m;
            let lists = search_many(&imported.library, &queries.prepared[p], &req).expect("search");
            let is_default = p == 0 && req.params == default;
            let label = format!(
                "whorl: {prep}, {m}{}",
                if is_default { " (default)" } else { "" }
            );
            let mut row = Row::new(label, is_default);
            let mut tallies: [Verdicts; 2] = Default::default();
            for (k, list) in lists.iter().enumerate() {
                let entry = |h: &Hit| &entries[of_id[&h.spectrum_id]];
                let hits: Vec<Hit> = list
                    .hits
                    .iter()
                    .filter(|h| entry(h).instrument != entries[k].instrument)
                    .cloned()
                    .collect();
                let labels = hits.iter().map(|h| entry(h).label.as_str());
                let r = rank(labels, &entries[k].label);
                let part = parts[&entries[k].label];
                row.add(part, r);
                if is_default {
                    tallies[part as usize].add_hits(
                        hits,
                        &list.confidence,
                        &format!("{}/{part:?}", queries.tag),
                        r == Some(1),
                        |h| entry(h).label == entries[k].label,
                        None,
                    );
                }
            }
            if is_default {
                verdicts = Some(tallies);
            }
            rows.push(row);
        }
    }
    let library: Vec<Vec<f64>> = entries.iter().map(|e| raman_vector(&e.points)).collect();
    let mut row = Row::new(BASELINE, false);
    for (k, points) in queries.points.iter().enumerate() {
        let v = raman_vector(points);
        let others = (0..entries.len()).filter(|&i| entries[i].instrument != entries[k].instrument);
        let order = ranked(others, |i| raman_cosine(&v, &library[i]));
        let labels = order.iter().map(|&i| entries[i].label.as_str());
        row.add(parts[&entries[k].label], rank(labels, &entries[k].label));
    }
    rows.push(row);
    (rows, verdicts)
}

/// The two Raman protocols.
pub fn protocols(dir: &Path) -> Vec<Table> {
    let entries: Vec<Entry> = entries(dir, "tags");
    let parts = split(entries.iter().map(|e| e.label.clone()));
    let libs: Vec<(&'static str, Imported)> = preparations()
        .into_iter()
        .map(|(name, tweak)| (name, import(dir, Technique::Raman, tweak)))
        .collect();
    for (_, imported) in &libs {
        let mut ids = imported.ids.clone();
        ids.sort_unstable();
        ids.dedup();
        assert_eq!(
            ids.len(),
            entries.len(),
            "every Raman file is a spectrum of its own"
        );
    }
    let instruments: std::collections::BTreeSet<&str> =
        entries.iter().map(|e| e.instrument.as_str()).collect();
    let materials: std::collections::BTreeSet<&str> =
        entries.iter().map(|e| e.label.as_str()).collect();

    let measured = Queries {
        tag: "raman-across",
        points: entries.iter().map(|e| e.points.as_slice()).collect(),
        prepared: libs
            .iter()
            .map(|(_, imported)| imported.prepared.clone())
            .collect(),
    };
    let (measured_rows, measured_verdicts) = table(&entries, &libs, &measured, &parts);
    let across = Table {
        title: "Raman: across instruments",
        protocol: format!(
            "Each of the {} spectra ({} materials, {} instrument set-ups) is searched against the library without the \
             spectra of its own instrument; right when the first hit is the same material (top-5: among the first \
             five hits; hits are spectra, so five hits may all be one wrong material). Variants: the library's \
             preparation (whorl's ALS baseline removal, none, rubber band) and the measure (correlation, derivative \
             correlation, cosine). Baseline: the raw counts interpolated linearly onto 2 cm-1 steps over 160-1990 \
             cm-1, minus the running minimum over 101 points (200 cm-1) smoothed by a moving average over 101 points \
             (200 cm-1), windows shrinking at the ends; cosine over 200-1800 cm-1.",
            entries.len(),
            materials.len(),
            instruments.len()
        ),
        source: SOURCE,
        rows: measured_rows,
        verdicts: measured_verdicts,
        extra: None,
    };

    let degraded: Vec<Vec<(f64, f64)>> = entries
        .iter()
        .enumerate()
        .map(|(k, e)| degrade(&e.points, &mut Rng::new(&[DEGRADED_STREAM, k as u64])))
        .collect();
    let conditions = Conditions {
        y_unit: Some(YUnit::Counts),
        solvent: None,
    };
    let queries = Queries {
        tag: "raman-degraded",
        points: degraded.iter().map(Vec::as_slice).collect(),
        prepared: libs
            .iter()
            .map(|(_, imported)| {
                let recipe = imported.library.recipe(Technique::Raman).expect("recipe");
                entries
                    .iter()
                    .zip(&degraded)
                    .map(|(e, points)| {
                        prepare(Path::new(&e.file), recipe, points, &conditions).expect("prepares")
                    })
                    .collect()
            })
            .collect(),
    };
    let (degraded_rows, degraded_verdicts) = table(&entries, &libs, &queries, &parts);
    let deg = Table {
        title: "Raman: degraded, across instruments",
        protocol: format!(
            "As above, with each of the {} queries degraded first (drawn per query from a seeded generator, fixed \
             before any result was seen): a laser-wavelength calibration offset of 1-4 cm-1 either way; a \
             fluorescence background, a Gaussian 2500 cm-1 wide centred in 500-3000 cm-1, 1-3 times as tall as the \
             spectrum's own range of counts, with its shot noise; one cosmic-ray spike, a single point raised by \
             1-5 times that range.",
            entries.len()
        ),
        source: SOURCE,
        rows: degraded_rows,
        verdicts: degraded_verdicts,
        extra: None,
    };
    vec![across, deg]
}
