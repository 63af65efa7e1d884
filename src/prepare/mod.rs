//! Preparation: from raw points to a vector on the library's grid plus a peak list.
//!
//! Every library spectrum and every unknown passes through [`prepare`] with the library's
//! [`Recipe`] for its technique, so that vectors are comparable bin for bin.

mod baseline;
mod nmr;
mod optical;
mod peaks;
mod solvent;
mod spectrometry;

pub use baseline::{Baseline, asls, rubber_band};
pub use optical::{absorbance_from, detect_optical_y_unit, resample};
pub use peaks::{Maximum, Peak, find_maxima};
pub use solvent::Solvent;
pub use spectrometry::nominal_mass as nominal_mz;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Location, Result};
use crate::spectrum::YUnit;
use crate::technique::{Grid, Technique};

/// How one technique's spectra are prepared in one library: the grid and the few
/// parameters that change the prepared vector. Stored in the database at `init`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Recipe {
    /// The technique this recipe is for.
    pub technique: Technique,
    /// The grid every vector is laid on.
    pub grid: Grid,
    /// Peaks below this fraction of the strongest peak's prominence are not listed.
    pub min_peak_prominence: f64,
    /// EI-MS: ions below this fraction of the base peak are dropped (DESIGN: 0.5 %).
    pub min_relative_abundance: f64,
    /// IR, Raman: baseline removed on the grid before masking and normalisation.
    #[serde(default)]
    pub baseline: Option<Baseline>,
}

impl Recipe {
    /// The default recipe for a technique (DESIGN.md).
    pub fn default_for(technique: Technique) -> Recipe {
        Recipe {
            technique,
            grid: technique.default_grid(),
            min_peak_prominence: match technique {
                Technique::Nmr1h => 0.02,
                _ => 0.05,
            },
            min_relative_abundance: 0.005,
            // Raman spectra ride on fluorescence backgrounds far larger than their bands, so
            // a Raman library removes the baseline by default (DESIGN: ALS with lambda ~1e5,
            // p ~0.01 on the grid). IR keeps its baseline unless the library asks otherwise.
            baseline: match technique {
                Technique::Raman => Some(Baseline::Als {
                    lambda: 1e5,
                    p: 0.01,
                }),
                _ => None,
            },
        }
    }
}

/// Per-spectrum facts that change how it is prepared.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Conditions {
    /// The y unit as declared; `None` lets the preparer detect it (IR) or assume the usual one.
    pub y_unit: Option<YUnit>,
    /// The NMR solvent whose residual and water signals are masked.
    pub solvent: Option<Solvent>,
}

/// A spectrum made ready for comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Prepared {
    /// The technique.
    pub technique: Technique,
    /// Values on the recipe's grid: L2-normalised absorbance or counts (IR, Raman),
    /// abundance relative to the base peak (EI-MS), area fraction per bin (1H NMR).
    pub vector: Vec<f32>,
    /// Picked peaks, ascending in x.
    pub peaks: Vec<Peak>,
    /// The y unit that was used, declared or detected.
    pub y_unit: YUnit,
    /// Things the analyst should know about this preparation.
    pub warnings: Vec<String>,
}

/// Prepares checked points (x already in the technique's unit) with a library's recipe.
/// `path` is used only to name the file in errors.
pub fn prepare(
    path: &std::path::Path,
    recipe: &Recipe,
    points: &[(f64, f64)],
    conditions: &Conditions,
) -> Result<Prepared> {
    let mut sorted = points.to_vec();
    sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
    let prepared = match recipe.technique {
        Technique::Ir | Technique::Raman => optical::prepare(recipe, &sorted, conditions),
        Technique::MsEi => spectrometry::prepare(recipe, &sorted, conditions),
        Technique::Nmr1h => nmr::prepare(recipe, &sorted, conditions),
    }?;
    if prepared.vector.iter().all(|&v| v == 0.0) {
        return Err(Error::input(
            Location::file(path),
            format!(
                "no signal is left on the library's {} grid ({}..{}) after masking",
                recipe.technique, recipe.grid.start, recipe.grid.stop
            ),
            "check the technique, the x unit and the solvent; the spectrum must overlap the grid",
        ));
    }
    Ok(prepared)
}

/// Scales `v` to unit Euclidean length in place; leaves an all-zero vector unchanged.
pub fn l2_normalise(v: &mut [f32]) {
    let norm = v
        .iter()
        .map(|&a| f64::from(a) * f64::from(a))
        .sum::<f64>()
        .sqrt();
    if norm > 0.0 {
        for a in v.iter_mut() {
            *a = (f64::from(*a) / norm) as f32;
        }
    }
}

/// Picks peaks from a sampled curve and reports them in x units.
fn pick(x: &[f64], y: &[f64], min_prominence_fraction: f64) -> Vec<(Maximum, Peak)> {
    let all = find_maxima(y, 0.0);
    let strongest = all.iter().map(|m| m.prominence).fold(0.0, f64::max);
    all.into_iter()
        .filter(|m| m.prominence >= min_prominence_fraction * strongest && m.prominence > 0.0)
        .map(|m| {
            let width = (peaks::x_at(x, m.right_half) - peaks::x_at(x, m.left_half)).abs();
            (
                m,
                Peak {
                    x: x[m.index],
                    height: y[m.index],
                    width,
                    area: 0.0,
                },
            )
        })
        .collect()
}
