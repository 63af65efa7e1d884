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
