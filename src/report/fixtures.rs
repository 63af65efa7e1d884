//! Prepared spectra and search reports built in memory for the report's tests, so that they
//! need no library: the report draws what it is handed.

use crate::prepare::{Conditions, Peak, Prepared, Recipe, prepare};
use crate::score::{ScoreParams, score};
use crate::search::{
    Constraints, Hit, LibraryStamp, Parameters, Report, Thresholds, UnknownStamp, confidence,
};
use crate::spectrum::{Status, YUnit};
use crate::technique::Technique;

/// The library state hash the reports of [`report`] carry.
pub const STATE_HASH: &str = "5d1c0a9e7b3f42c8a6e0d4b2f9c7e5a3b1d8f6e4c2a0b9d7f5e3c1a8b6d4f2e0";
/// The unknown file's SHA-256 the reports of [`report`] carry.
pub const SHA256: &str = "0a1b2c3d4e5f60718293a4b5c6d7e8f90a1b2c3d4e5f60718293a4b5c6d7e8f9";

/// An IR absorbance spectrum with Gaussian bands `(centre cm-1, height)`, prepared with the
/// default recipe.
pub fn ir(bands: &[(f64, f64)]) -> Prepared {
    let recipe = Recipe::default_for(Technique::Ir);
    let pts: Vec<(f64, f64)> = (0..=1800)
        .map(|i| {
            let x = 400.0 + 2.0 * f64::from(i);
            let y = bands
                .iter()
                .map(|&(c, h)| h * (-((x - c) / 10.0).powi(2)).exp())
                .sum::<f64>();
            (x, 0.01 + y)
        })
        .collect();
    let cond = Conditions {
        y_unit: Some(YUnit::Absorbance),
        solvent: None,
    };
    prepare(std::path::Path::new("t"), &recipe, &pts, &cond).unwrap()
}

/// An EI mass spectrum of the ions `(m/z, relative abundance)`.
pub fn ions(list: &[(f64, f64)]) -> Prepared {
    Prepared {
        technique: Technique::MsEi,
        vector: vec![],
        peaks: list
            .iter()
            .map(|&(x, height)| Peak {
                x,
                height,
                width: 0.0,
                area: 0.0,
            })
            .collect(),
        y_unit: YUnit::Relative,
        warnings: vec![],
        coverage: None,
    }
}

/// The report of an IR search of `unknown` (read from `file`) among the named references,
/// scored with the default parameters and ranked best first as a search ranks them, with the
/// references in rank order (`references[i]` belongs to `hits[i]`).
pub fn report(
    file: &str,
    unknown: &Prepared,
    references: &[(&str, &Prepared)],
    filter: Option<&str>,
) -> (Report, Vec<Prepared>) {
    let technique = Technique::Ir;
    let params = ScoreParams::default_for(technique);
    let recipe = Recipe::default_for(technique);
    let mut ranked: Vec<(Hit, Prepared)> = references
        .iter()
        .enumerate()
        .map(|(i, &(name, p))| {
            let scores = score(unknown, p, &recipe.grid, &params);
            let id = i as i64 + 1;
            let hit = Hit {
                rank: 0,
                score: scores.combined,
                components: scores,
                spectrum_id: id,
                compound_id: id,
                name: name.to_string(),
                formula: None,
                cas: None,
                technique,
                status: Status::Pending,
                solvent: None,
                notes: vec![],
            };
            (hit, p.clone())
        })
        .collect();
    ranked.sort_by(|a, b| b.0.score.total_cmp(&a.0.score));
    let (mut hits, refs): (Vec<Hit>, Vec<Prepared>) = ranked.into_iter().unzip();
    for (i, h) in hits.iter_mut().enumerate() {
        h.rank = i + 1;
    }
    let margin = (hits.len() > 1).then(|| hits[0].score - hits[1].score);
    let report = Report {
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        searched_at: "2025-01-02T03:04:05Z".into(),
        library: LibraryStamp {
            path: "/lab/library".into(),
            state_hash: STATE_HASH.into(),
            last_event: 7,
        },
        unknown: UnknownStamp {
            file: file.into(),
            sha256: SHA256.into(),
            technique,
            x_unit: None,
            y_unit: unknown.y_unit,
            solvent: None,
            peaks: unknown.peaks.len(),
            points: None,
            points_sha256: None,
        },
        parameters: Parameters {
            top: 5,
            filter: filter.map(str::to_string),
            statuses: vec![Status::Verified, Status::Pending],
            score: params.clone(),
            constraints: Constraints::default(),
            explain: false,
            recipe,
            thresholds: Thresholds::default(),
        },
        candidates: references.len(),
        excluded_count: 0,
        excluded: vec![],
        hits,
        margin,
        confidence: confidence(technique, &params),
        warnings: vec![],
        verdict: None,
        caution: crate::CAUTION.to_string(),
    };
    (report, refs)
}

/// The search page of an unknown with two IR bands, searched among the named references as
/// [`report`] searches.
pub fn search_page_for(
    file: &str,
    references: &[(&str, &Prepared)],
    filter: Option<&str>,
) -> String {
    let unknown = ir(&[(1715.0, 0.9), (2950.0, 0.3)]);
    let (report, references) = report(file, &unknown, references, filter);
    crate::report::search_page(&crate::report::Query {
        report: &report,
        unknown: &unknown,
        references: &references,
    })
    .unwrap()
}

/// (x, y, text) of every `<text>` element of an SVG.
pub fn svg_texts(svg: &str) -> Vec<(f64, f64, String)> {
    svg.split("<text ")
        .skip(1)
        .map(|t| {
            let head = format!(" {}", &t[..t.find('>').unwrap()]);
            let attr = |name: &str| -> f64 {
                let key = format!(" {name}=\"");
                let rest = &head[head.find(&key).unwrap() + key.len()..];
                rest[..rest.find('"').unwrap()].parse().unwrap()
            };
            let body = &t[t.find('>').unwrap() + 1..t.find("</text>").unwrap()];
            (attr("x"), attr("y"), body.trim().to_string())
        })
        .collect()
}
