//! EI mass spectra: nominal-mass binning and the relative abundance threshold.

use super::{Conditions, Peak, Prepared, Recipe};
use crate::error::Result;
use crate::spectrum::YUnit;

/// The nominal mass of an m/z value: floor(m/z + 0.5), so that 43.49 is 43 and 43.5 is 44
/// (common practice at unit resolution).
pub fn nominal_mass(mz: f64) -> i64 {
    (mz + 0.5).floor() as i64
}

pub(super) fn prepare(
    recipe: &Recipe,
    sorted: &[(f64, f64)],
    conditions: &Conditions,
) -> Result<Prepared> {
    let grid = &recipe.grid;
    let mut vector = vec![0f32; grid.len()];
    let mut outside = 0usize;
    let mut best = vec![0f64; grid.len()];
    for &(mz, abundance) in sorted {
        match grid.index_of(nominal_mass(mz) as f64) {
            // Profile data and split centroids: keep the largest abundance within a bin.
            Some(i) => best[i] = best[i].max(abundance),
            None => outside += 1,
        }
    }
    let base = best.iter().copied().fold(0.0, f64::max);
    let mut peaks = Vec::new();
    if base > 0.0 {
        for (i, &a) in best.iter().enumerate() {
            let relative = a / base;
            if a > 0.0 && relative >= recipe.min_relative_abundance {
                vector[i] = relative as f32;
                peaks.push(Peak {
                    x: grid.x(i),
                    height: relative,
                    width: 0.0,
                    area: 0.0,
                });
            }
        }
    }
    let mut warnings = Vec::new();
    if outside > 0 {
        warnings.push(format!(
            "{outside} ion(s) outside the library's m/z range {}..{} were left out",
            grid.start, grid.stop
        ));
    }
    Ok(Prepared {
        technique: recipe.technique,
        vector,
        peaks,
        y_unit: conditions.y_unit.unwrap_or(YUnit::Relative),
        warnings,
        coverage: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::technique::Technique;

    #[test]
    fn nominal_mass_rounds_half_up() {
        assert_eq!(nominal_mass(43.49), 43);
        assert_eq!(nominal_mass(43.5), 44);
        assert_eq!(nominal_mass(91.0542), 91);
    }

    #[test]
    fn binning_keeps_the_largest_and_drops_weak_ions() {
        let recipe = Recipe::default_for(Technique::MsEi);
        // Abundances in percent of the base peak.
        let pts = [
            (42.9, 2.0),
            (43.1, 100.0),
            (58.0, 25.0),
            (59.0, 0.1),
            (60.0, 0.3),
            (1200.0, 1.0),
        ];
        let p = prepare(&recipe, &pts, &Conditions::default()).unwrap();
        let xs: Vec<f64> = p.peaks.iter().map(|p| p.x).collect();
        // 0.1 % of the base peak is under the 0.2 % threshold; 0.3 % is kept.
        assert_eq!(recipe.min_relative_abundance, 0.002);
        assert_eq!(xs, [43.0, 58.0, 60.0]);
        assert_eq!(p.vector[42], 1.0);
        assert_eq!(p.warnings.len(), 1);
    }
}
