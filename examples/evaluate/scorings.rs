//! The scorings compared: a library preparation and score parameters each.

use std::path::Path;

use whorl::library::{Library, Recipes, default_recipes, import_rows, read_manifest};
use whorl::prepare::{ALS_DEFAULT, Baseline, Binning, Recipe};
use whorl::score::{Measure, ScoreParams};
use whorl::technique::Technique;

/// One way of scoring: a library preparation and score parameters.
#[derive(Clone)]
pub struct Scoring {
    pub technique: Technique,
    pub preparation: &'static str,
    /// Changes to the technique's default recipe.
    pub tweak: fn(&mut Recipe),
    pub params: ScoreParams,
    pub label: String,
    pub default: bool,
}

/// Whether THRESHOLDS has a row of this scoring's own: rows are keyed by technique, measure
/// and EI-MS direction, so the 13C shift match's variants share the default's row.
pub fn keyed(s: &Scoring) -> bool {
    let d = whorl::score::CompositeParams::default();
    let c = &s.params.composite;
    !(s.technique == Technique::Nmr13c && s.params.measure == Measure::ShiftMatch && !s.default)
        && (c.intensity_exponent, c.mass_exponent) == (d.intensity_exponent, d.mass_exponent)
}

pub fn scorings() -> Vec<Scoring> {
    let mut out = Vec::new();
    for t in Technique::ALL {
        type Tweak = fn(&mut Recipe);
        let preparations: Vec<(&'static str, Tweak)> = match t {
            Technique::Ir => vec![
                ("baseline none", |_| {}),
                ("baseline als", |r| r.baseline = Some(ALS_DEFAULT)),
                ("baseline rubber-band", |r| {
                    r.baseline = Some(Baseline::RubberBand)
                }),
            ],
            Technique::Raman => vec![
                ("baseline rubber-band", |_| {}),
                ("baseline als", |r| r.baseline = Some(ALS_DEFAULT)),
                ("baseline none", |r| r.baseline = None),
            ],
            // The 1H preparation before the evaluation led to linear binning and the noise
            // floor, and each change on its own.
            Technique::Nmr1h => vec![
                ("linear bins, noise floor", |_| {}),
                ("nearest bins, noise floor", |r| {
                    r.binning = Binning::Nearest
                }),
                ("linear bins, no noise floor", |r| r.noise_floor = None),
                ("nearest bins, no noise floor", |r| {
                    r.binning = Binning::Nearest;
                    r.noise_floor = None;
                }),
            ],
            _ => vec![("default", |_| {})],
        };
        for (pi, (prep, tweak)) in preparations.into_iter().enumerate() {
            let mut variants: Vec<(String, ScoreParams)> = Vec::new();
            for m in Measure::ALL {
                if !m.applies_to(t) {
                    continue;
                }
                let mut p = ScoreParams::default_for(t);
                p.measure = m;
                if t == Technique::MsEi && m == Measure::Composite {
                    for reverse in [true, false] {
                        p.composite.reverse = reverse;
                        let dir = if reverse { "reverse" } else { "forward" };
                        variants.push((format!("composite, {dir}"), p.clone()));
                    }
                    // Square-root intensities without a mass weight (the real-data
                    // baseline's weighting), forward; it has no thresholds of its own.
                    p.composite.reverse = false;
                    p.composite.intensity_exponent = 0.5;
                    p.composite.mass_exponent = 0.0;
                    variants.push(("composite, forward, I^0.5, no m/z weight".into(), p.clone()));
                } else if t == Technique::Nmr13c && m == Measure::ShiftMatch {
                    // The default, each of its two refinements left out, and both (the
                    // earlier default).
                    for (referencing, discount, suffix) in [
                        (true, true, ""),
                        (true, false, ", no weak-line discount"),
                        (false, true, ", no referencing correction"),
                        (false, false, ", neither"),
                    ] {
                        p.referencing_correction = referencing;
                        p.weak_line_discount = discount;
                        variants.push((format!("{m}{suffix}"), p.clone()));
                    }
                } else {
                    variants.push((m.name().to_string(), p));
                }
            }
            // The technique's default scoring first, then the other variants of its measure.
            let d = ScoreParams::default_for(t);
            variants.sort_by_key(|(label, p)| (*p != d, p.measure != d.measure, label.clone()));
            for (label, params) in variants {
                out.push(Scoring {
                    technique: t,
                    preparation: prep,
                    tweak,
                    default: pi == 0 && params == d,
                    params,
                    label,
                });
            }
        }
    }
    out
}

pub fn build_library(seed: &Path, t: Technique, tweak: fn(&mut Recipe)) -> Library {
    let mut recipes: Recipes = default_recipes();
    tweak(recipes.get_mut(&t).unwrap());
    let mut lib = Library::in_memory_with("evaluate", recipes).expect("library");
    let rows: Vec<_> = read_manifest(&seed.join("manifest.csv"), "evaluate")
        .expect("manifest")
        .into_iter()
        .filter(|r| r.submission.as_ref().is_ok_and(|s| s.technique == t))
        .collect();
    let n = rows.len();
    let report = import_rows(&mut lib, rows, "evaluate", true, &|_| {}).expect("import");
    assert_eq!(report.imported(), n, "every seed spectrum imports");
    lib
}
