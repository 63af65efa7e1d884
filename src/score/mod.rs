//! Similarity measures between prepared spectra. Every measure is a pure function of its
//! inputs and documented parameters, and lies in 0..1 with 1 for identical spectra.

mod composite;
mod overlap;
mod vector;

pub use composite::{Composite, CompositeParams, stein_scott};
pub use overlap::{Overlap, peak_overlap};
pub use vector::{cosine, pearson};

use serde::{Deserialize, Serialize};

use crate::prepare::Prepared;
use crate::technique::{Grid, Technique};

/// The spectral measure a technique ranks by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Measure {
    /// Cosine of the prepared vectors.
    Cosine,
    /// Pearson correlation over unmasked bins, negative values counted as 0.
    Correlation,
    /// Stein & Scott composite (EI-MS).
    Composite,
}

impl Measure {
    /// The measure a technique uses unless told otherwise. IR and Raman rank by correlation,
    /// which ignores a constant offset of the baseline; 1H NMR by cosine of the area-normalised
    /// bins; EI-MS by the Stein & Scott composite.
    pub fn default_for(technique: Technique) -> Measure {
        match technique {
            Technique::Ir | Technique::Raman => Measure::Correlation,
            Technique::MsEi => Measure::Composite,
            Technique::Nmr1h => Measure::Cosine,
        }
    }
}

/// Everything that decides a score, reported with every hit list.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScoreParams {
    /// The spectral measure.
    pub measure: Measure,
    /// Weight of the spectral measure in the combined score; peak overlap (Jaccard) has the rest.
    pub spectral_weight: f64,
    /// One-to-one peak matching tolerance in x units.
    pub peak_tolerance: f64,
    /// EI-MS weighting and search direction.
    pub composite: CompositeParams,
}

impl ScoreParams {
    /// The defaults for a technique. The 0.8 / 0.2 split keeps the whole-spectrum measure in
    /// charge and lets agreement of peak positions break near-ties.
    pub fn default_for(technique: Technique) -> ScoreParams {
        ScoreParams {
            measure: Measure::default_for(technique),
            spectral_weight: 0.8,
            peak_tolerance: technique.peak_tolerance(),
            composite: CompositeParams::default(),
        }
    }
}

/// One library spectrum's scores against an unknown.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Scores {
    /// The combined score: `spectral_weight * spectral + (1 - spectral_weight) * overlap.jaccard`.
    pub combined: f64,
    /// The value of the ranking measure.
    pub spectral: f64,
    /// Cosine of the prepared vectors.
    pub cosine: f64,
    /// Pearson r over unmasked bins, clipped to 0..1 (IR, Raman, NMR).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub correlation: Option<f64>,
    /// The Stein & Scott terms (EI-MS).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub composite: Option<Composite>,
    /// One-to-one peak matching.
    pub peak_overlap: Overlap,
}

/// Scores a library spectrum against an unknown prepared with the same recipe.
pub fn score(
    unknown: &Prepared,
    reference: &Prepared,
    grid: &Grid,
    params: &ScoreParams,
) -> Scores {
    let cos = cosine(&unknown.vector, &reference.vector).clamp(0.0, 1.0);
    let (correlation, composite) = if unknown.technique == Technique::MsEi {
        let u: Vec<(f64, f64)> = unknown.peaks.iter().map(|p| (p.x, p.height)).collect();
        let r: Vec<(f64, f64)> = reference.peaks.iter().map(|p| (p.x, p.height)).collect();
        (None, Some(stein_scott(&u, &r, &params.composite)))
    } else {
        let active: Vec<bool> = (0..grid.len()).map(|i| !grid.masked(grid.x(i))).collect();
        (
            Some(pearson(&unknown.vector, &reference.vector, Some(&active)).clamp(0.0, 1.0)),
            None,
        )
    };
    let spectral = match params.measure {
        Measure::Cosine => cos,
        Measure::Correlation => correlation.unwrap_or(cos),
        Measure::Composite => composite.as_ref().map_or(cos, |c| c.composite),
    };
    let xs = |p: &Prepared| p.peaks.iter().map(|p| p.x).collect::<Vec<f64>>();
    let peak_overlap = peak_overlap(&xs(unknown), &xs(reference), params.peak_tolerance);
    let w = params.spectral_weight.clamp(0.0, 1.0);
    let combined = (w * spectral + (1.0 - w) * peak_overlap.jaccard).clamp(0.0, 1.0);
    Scores {
        combined,
        spectral,
        cosine: cos,
        correlation,
        composite,
        peak_overlap,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prepare::{Peak, Recipe};
    use crate::spectrum::YUnit;
    use proptest::prelude::*;

    fn optical(values: &[f32], peaks: &[f64]) -> Prepared {
        let mut vector = values.to_vec();
        crate::prepare::l2_normalise(&mut vector);
        Prepared {
            technique: Technique::Ir,
            vector,
            peaks: peaks
                .iter()
                .map(|&x| Peak {
                    x,
                    height: 1.0,
                    width: 0.0,
                    area: 0.0,
                })
                .collect(),
            y_unit: YUnit::Absorbance,
            warnings: vec![],
        }
    }

    fn mass(ions: &[(u16, f32)]) -> Prepared {
        let grid = Technique::MsEi.default_grid();
        let mut vector = vec![0f32; grid.len()];
        let mut peaks = Vec::new();
        for &(mz, a) in ions {
            vector[usize::from(mz) - 1] = a;
        }
        for (i, &a) in vector.iter().enumerate() {
            if a > 0.0 {
                peaks.push(Peak {
                    x: grid.x(i),
                    height: f64::from(a),
                    width: 0.0,
                    area: 0.0,
                });
            }
        }
        Prepared {
            technique: Technique::MsEi,
            vector,
            peaks,
            y_unit: YUnit::Relative,
            warnings: vec![],
        }
    }

    fn in_unit(x: f64) -> bool {
        (0.0..=1.0).contains(&x)
    }

    fn grid(n: usize) -> Grid {
        Grid {
            start: 0.0,
            stop: (n - 1) as f64,
            step: 1.0,
            masks: vec![],
        }
    }

    proptest! {
        #[test]
        fn optical_scores_lie_in_0_1(
            a in prop::collection::vec(-1.0f32..10.0, 32),
            b in prop::collection::vec(-1.0f32..10.0, 32),
            pa in prop::collection::vec(0.0f64..31.0, 0..8),
            pb in prop::collection::vec(0.0f64..31.0, 0..8),
        ) {
            let s = score(&optical(&a, &pa), &optical(&b, &pb), &grid(32), &ScoreParams::default_for(Technique::Ir));
            prop_assert!(in_unit(s.combined) && in_unit(s.spectral) && in_unit(s.cosine));
            prop_assert!(in_unit(s.correlation.unwrap()));
            let o = s.peak_overlap;
            prop_assert!(in_unit(o.forward) && in_unit(o.reverse) && in_unit(o.jaccard));
        }

        #[test]
        fn mass_scores_lie_in_0_1(
            a in prop::collection::vec((1u16..400, 0.01f32..1.0), 1..20),
            b in prop::collection::vec((1u16..400, 0.01f32..1.0), 1..20),
            reverse in any::<bool>(),
        ) {
            let mut params = ScoreParams::default_for(Technique::MsEi);
            params.composite.reverse = reverse;
            let s = score(&mass(&a), &mass(&b), &Technique::MsEi.default_grid(), &params);
            let c = s.composite.unwrap();
            prop_assert!(in_unit(s.combined) && in_unit(c.dot) && in_unit(c.ratio) && in_unit(c.composite));
        }

        #[test]
        fn a_spectrum_compared_with_itself_scores_1(
            a in prop::collection::vec(0.0f32..10.0, 32).prop_filter("not constant", |v| v.iter().any(|&x| (x - v[0]).abs() > 1e-3)),
            peaks in prop::collection::vec(0.0f64..31.0, 1..8),
            ions in prop::collection::vec((1u16..400, 0.01f32..1.0), 1..20),
        ) {
            let p = optical(&a, &peaks);
            let s = score(&p, &p, &grid(32), &ScoreParams::default_for(Technique::Ir));
            prop_assert!((s.combined - 1.0).abs() < 1e-6, "{s:?}");
            let m = mass(&ions);
            let s = score(&m, &m, &Technique::MsEi.default_grid(), &ScoreParams::default_for(Technique::MsEi));
            prop_assert!((s.combined - 1.0).abs() < 1e-6, "{s:?}");
        }

        #[test]
        fn cosine_ignores_y_scale_and_is_symmetric(
            a in prop::collection::vec(0.0f32..10.0, 16),
            b in prop::collection::vec(0.0f32..10.0, 16),
            k in 0.001f32..1000.0,
        ) {
            let scaled: Vec<f32> = a.iter().map(|x| x * k).collect();
            prop_assert!((cosine(&a, &b) - cosine(&scaled, &b)).abs() < 1e-5);
            prop_assert!((cosine(&a, &b) - cosine(&b, &a)).abs() < 1e-12);
            prop_assert!((pearson(&a, &b, None) - pearson(&b, &a, None)).abs() < 1e-12);
        }

        #[test]
        fn preparation_then_cosine_ignores_y_scale(k in 0.01f64..100.0) {
            // Scaling the raw y of an absorbance spectrum leaves the prepared vector's direction,
            // and so every cosine against it, unchanged.
            let recipe = Recipe::default_for(Technique::Ir);
            let pts: Vec<(f64, f64)> = (0..=900).map(|i| {
                let x = 400.0 + 4.0 * f64::from(i);
                (x, 0.02 + (-((x - 1715.0) / 12.0).powi(2)).exp() + 0.4 * (-((x - 2950.0) / 20.0).powi(2)).exp())
            }).collect();
            let scaled: Vec<(f64, f64)> = pts.iter().map(|&(x, y)| (x, y * k)).collect();
            let cond = crate::prepare::Conditions { y_unit: Some(YUnit::Absorbance), solvent: None };
            let a = crate::prepare::prepare(std::path::Path::new("a"), &recipe, &pts, &cond).unwrap();
            let b = crate::prepare::prepare(std::path::Path::new("b"), &recipe, &scaled, &cond).unwrap();
            prop_assert!((cosine(&a.vector, &b.vector) - 1.0).abs() < 1e-6);
        }
    }
}
