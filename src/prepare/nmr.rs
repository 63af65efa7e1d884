//! 1H NMR: solvent masks, area binning, normalisation to total area, peaks with integrals.

use super::{Binning, Conditions, Picking, Prepared, Recipe, Solvent, nmr_masks, noise_sd, pick};
use crate::error::Result;
use crate::spectrum::YUnit;

/// Tetramethylsilane, the 0 ppm reference, is masked within this half-width: it is added
/// to the sample, not part of the analyte (common practice).
const TMS_HALF_WIDTH: f64 = 0.05;

pub(super) fn prepare(
    recipe: &Recipe,
    sorted: &[(f64, f64)],
    conditions: &Conditions,
) -> Result<Prepared> {
    let grid = &recipe.grid;
    let (masks, warnings) = nmr_masks(
        TMS_HALF_WIDTH,
        conditions.solvent,
        Solvent::masks,
        grid,
        "residual solvent and water signals",
    );
    let masked = |x: f64| masks.iter().any(|&(lo, hi)| x >= lo && x <= hi);

    // Negative points (baseline noise, phase error) carry no area; masked points carry none either.
    let xs: Vec<f64> = sorted.iter().map(|p| p.0).collect();
    let ys: Vec<f64> = sorted
        .iter()
        .map(|&(x, y)| if masked(x) { 0.0 } else { y.max(0.0) })
        .collect();

    // Each point stands for the area of its Voronoi cell: y times half the distance between
    // its neighbours. Points fall into the bin whose centre is nearest.
    let n = xs.len();
    let areas: Vec<f64> = (0..n)
        .map(|i| {
            let left = if i > 0 { xs[i] - xs[i - 1] } else { 0.0 };
            let right = if i + 1 < n { xs[i + 1] - xs[i] } else { 0.0 };
            ys[i] * (left + right) / 2.0
        })
        .collect();
    let total: f64 = areas.iter().sum();
    let mut vector = vec![0f32; grid.len()];
    if total > 0.0 {
        let mut bins = vec![0f64; grid.len()];
        for (i, &a) in areas.iter().enumerate() {
            match recipe.binning {
                Binning::Nearest => {
                    if let Some(b) = grid.index_of(xs[i]) {
                        bins[b] += a;
                    }
                }
                Binning::Linear => {
                    // Shared between the bin centres on either side, by closeness.
                    let f = (xs[i] - grid.start) / grid.step;
                    let lo = f.floor();
                    let w = f - lo;
                    for (k, share) in [(lo, 1.0 - w), (lo + 1.0, w)] {
                        if k >= 0.0 && (k as usize) < bins.len() && share > 0.0 {
                            bins[k as usize] += a * share;
                        }
                    }
                }
            }
        }
        let on_grid: f64 = bins.iter().sum();
        if on_grid > 0.0 {
            for (v, b) in vector.iter_mut().zip(&bins) {
                *v = (b / on_grid) as f32;
            }
        }
    }

    let mut peaks = Vec::new();
    if total > 0.0 {
        // Noise from the unclipped, unmasked points: clipping the negative half of the
        // baseline to zero would hide half the noise.
        let raw: Vec<f64> = sorted
            .iter()
            .filter(|p| !masked(p.0))
            .map(|p| p.1)
            .collect();
        let measured: Vec<bool> = xs.iter().map(|&x| !masked(x)).collect();
        let measured = (recipe.picking == Picking::Measured).then_some(&measured[..]);
        for (m, mut peak) in pick(&xs, &ys, recipe, noise_sd(&raw), measured) {
            let (lo, hi) = valley_bounds(&ys, m.index);
            peak.area = areas[lo..=hi].iter().sum::<f64>() / total;
            peaks.push(peak);
        }
    }
    Ok(Prepared {
        technique: recipe.technique,
        vector,
        peaks,
        y_unit: conditions.y_unit.unwrap_or(YUnit::Intensity),
        warnings,
        coverage: None,
    })
}

/// The nearest local minima on each side of a maximum: the stretch a line's integral covers.
fn valley_bounds(y: &[f64], index: usize) -> (usize, usize) {
    let mut lo = index;
    while lo > 0 && y[lo - 1] <= y[lo] {
        lo -= 1;
    }
    let mut hi = index;
    while hi + 1 < y.len() && y[hi + 1] <= y[hi] {
        hi += 1;
    }
    (lo, hi)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prepare::Solvent;
    use crate::technique::Technique;

    fn lorentzian(x: f64, centre: f64, fwhm: f64) -> f64 {
        let h = fwhm / 2.0;
        h * h / ((x - centre).powi(2) + h * h)
    }

    #[test]
    fn solvent_residual_is_masked_and_area_sums_to_one() {
        let recipe = Recipe::default_for(Technique::Nmr1h);
        let pts: Vec<(f64, f64)> = (0..3000)
            .map(|i| {
                let x = -0.5 + i as f64 * 0.004;
                (
                    x,
                    lorentzian(x, 7.26, 0.006) * 50.0
                        + lorentzian(x, 0.90, 0.006) * 3.0
                        + lorentzian(x, 2.30, 0.006) * 2.0,
                )
            })
            .collect();
        let cond = Conditions {
            solvent: Some(Solvent::Cdcl3),
            ..Conditions::default()
        };
        let p = prepare(&recipe, &pts, &cond).unwrap();
        let sum: f64 = p.vector.iter().map(|&v| f64::from(v)).sum();
        assert!((sum - 1.0).abs() < 1e-5, "{sum}");
        // The residual line is 50 times the others; masked, its bin keeps only what linear
        // binning shares into it from the line's tails outside the mask (under 1 %).
        let bin_726 = recipe.grid.index_of(7.26).unwrap();
        assert!(p.vector[bin_726] < 0.01, "{}", p.vector[bin_726]);
        let xs: Vec<f64> = p.peaks.iter().map(|p| p.x).collect();
        assert!(
            xs.iter().any(|x| (x - 0.90).abs() < 0.005)
                && xs.iter().any(|x| (x - 2.30).abs() < 0.005),
            "{xs:?}"
        );
        // Integrals follow the 3:2 ratio of the two signals (within the truncated Lorentzian tails).
        let big = p
            .peaks
            .iter()
            .find(|p| (p.x - 0.9).abs() < 0.01)
            .unwrap()
            .area;
        let small = p
            .peaks
            .iter()
            .find(|p| (p.x - 2.3).abs() < 0.01)
            .unwrap()
            .area;
        assert!((big / small - 1.5).abs() < 0.1, "{big} {small}");
    }

    #[test]
    fn a_line_cut_by_the_solvent_mask_leaves_no_peak_at_the_mask_edge() {
        // A broad analyte line at 7.30 ppm under the CDCl3 residual mask (7.21..7.31): its
        // flank rises towards the mask from above 7.31, so the first point past the mask is
        // higher than the next one. It is not a peak: the line's top is inside the mask.
        let recipe = Recipe::default_for(Technique::Nmr1h);
        let pts: Vec<(f64, f64)> = (0..3000)
            .map(|i| {
                let x = -0.5 + i as f64 * 0.004;
                (
                    x,
                    lorentzian(x, 7.30, 0.03) * 5.0 + lorentzian(x, 2.10, 0.006) * 3.0,
                )
            })
            .collect();
        let cond = Conditions {
            solvent: Some(Solvent::Cdcl3),
            ..Conditions::default()
        };
        let edge = |p: &Prepared| p.peaks.iter().any(|q| (q.x - 7.31).abs() < 0.01);
        let p = prepare(&recipe, &pts, &cond).unwrap();
        assert!(!edge(&p), "{:?}", p.peaks);
        assert!(
            p.peaks.iter().any(|q| (q.x - 2.10).abs() < 0.005),
            "{:?}",
            p.peaks
        );
        // The old picking lists the mask's edge.
        let whole = Recipe {
            picking: Picking::Whole,
            ..recipe
        };
        assert!(edge(&prepare(&whole, &pts, &cond).unwrap()));
    }
}
