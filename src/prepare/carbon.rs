//! 13C NMR: peak lists (or profile spectra reduced to peaks), solvent masks, stick vectors.

use super::{Conditions, Peak, Prepared, Recipe, Solvent, nmr_masks, noise_sd, pick};
use crate::error::Result;
use crate::spectrum::YUnit;

/// Tetramethylsilane's 13C signal, the 0 ppm reference, is masked within this half-width: it
/// is added to the sample, not part of the analyte (common practice).
const TMS_HALF_WIDTH: f64 = 0.5;

/// A file with more points than this is a profile spectrum, not a peak list: a 13C peak list
/// of a small molecule has at most a few dozen lines, an exported spectrum thousands of points.
pub const PROFILE_POINTS: usize = 256;

/// Prepares a 13C spectrum.
///
/// Broadband-decoupled 13C intensities are not quantitative: the nuclear Overhauser effect
/// and relaxation times differ from carbon to carbon, so a quaternary carbon may be a tenth as
/// tall as a CH3 (common practice). whorl therefore compares 13C spectra by peak positions
/// only: the vector holds a 1 in the grid bin of every peak (then L2-normalised) and serves
/// the cosine column; ranking uses the shift match of the peak positions
/// ([`crate::score::shift_match`]). Heights are kept, relative to the strongest peak, for
/// display and, in a reference, to tell weak lines (often carbons without H) from typical
/// ones for the shift match's weak-line discount ([`crate::score::weak_line_costs`]). The
/// declared solvent's own signals and TMS are masked.
pub(super) fn prepare(
    recipe: &Recipe,
    sorted: &[(f64, f64)],
    conditions: &Conditions,
) -> Result<Prepared> {
    let grid = &recipe.grid;
    let (masks, mut warnings) = nmr_masks(
        TMS_HALF_WIDTH,
        conditions.solvent,
        Solvent::carbon_masks,
        grid,
        "the solvent's own 13C signals",
    );
    let masked = |x: f64| masks.iter().any(|&(lo, hi)| x >= lo && x <= hi);

    let lines: Vec<(f64, f64)> = if sorted.len() > PROFILE_POINTS {
        let xs: Vec<f64> = sorted.iter().map(|p| p.0).collect();
        let ys: Vec<f64> = sorted.iter().map(|p| p.1.max(0.0)).collect();
        let raw: Vec<f64> = sorted.iter().map(|p| p.1).collect();
        let picked: Vec<(f64, f64)> = pick(&xs, &ys, recipe, noise_sd(&raw), None)
            .into_iter()
            .map(|(_, p)| (p.x, p.height))
            .collect();
        warnings.push(format!(
            "{} points read as a profile spectrum; {} peaks picked",
            sorted.len(),
            picked.len()
        ));
        picked
    } else {
        // A peak list: every line is a peak. Negative lines (a DEPT-135 CH2) count by their
        // size; only the position is compared.
        sorted.iter().map(|&(x, y)| (x, y.abs())).collect()
    };
    let dropped = lines.iter().filter(|l| masked(l.0)).count();
    if dropped > 0 {
        warnings.push(format!(
            "{dropped} peak(s) at the solvent's or TMS's position left out"
        ));
    }
    let kept: Vec<(f64, f64)> = lines.into_iter().filter(|l| !masked(l.0)).collect();
    let strongest = kept.iter().map(|l| l.1).fold(0.0, f64::max);
    let mut vector = vec![0f32; grid.len()];
    let mut peaks = Vec::with_capacity(kept.len());
    let mut outside = 0usize;
    for &(x, y) in &kept {
        match grid.index_of(x) {
            Some(i) => vector[i] = 1.0,
            None => {
                outside += 1;
                continue;
            }
        }
        peaks.push(Peak {
            x,
            height: if strongest > 0.0 { y / strongest } else { 1.0 },
            width: 0.0,
            area: 0.0,
        });
    }
    if outside > 0 {
        warnings.push(format!(
            "{outside} peak(s) outside the library's {}..{} ppm range left out",
            grid.start, grid.stop
        ));
    }
    super::l2_normalise(&mut vector);
    Ok(Prepared {
        technique: recipe.technique,
        vector,
        peaks,
        y_unit: conditions.y_unit.unwrap_or(YUnit::Intensity),
        warnings,
        coverage: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prepare::Solvent;
    use crate::technique::Technique;

    #[test]
    fn peak_list_becomes_sticks_with_the_solvent_masked() {
        let recipe = Recipe::default_for(Technique::Nmr13c);
        // Toluene-like list in CDCl3 with the solvent triplet and TMS present.
        let pts = [
            (0.0, 5.0),
            (21.4, 80.0),
            (76.84, 30.0),
            (77.16, 31.0),
            (77.48, 30.0),
            (125.3, 60.0),
            (128.2, 100.0),
            (129.0, 95.0),
            (137.8, 20.0),
        ];
        let cond = Conditions {
            solvent: Some(Solvent::Cdcl3),
            ..Conditions::default()
        };
        let p = prepare(&recipe, &pts, &cond).unwrap();
        let xs: Vec<f64> = p.peaks.iter().map(|p| p.x).collect();
        assert_eq!(xs, [21.4, 125.3, 128.2, 129.0, 137.8]);
        assert_eq!(p.peaks[2].height, 1.0);
        let nonzero = p.vector.iter().filter(|&&v| v > 0.0).count();
        assert_eq!(nonzero, 5);
        assert!(p.warnings[0].contains("4 peak(s)"), "{:?}", p.warnings);
        // Without a solvent the triplet stays, with a warning.
        let p = prepare(&recipe, &pts, &Conditions::default()).unwrap();
        assert_eq!(p.peaks.len(), 8);
        assert!(p.warnings[0].contains("no solvent"));
    }

    #[test]
    fn a_profile_spectrum_is_reduced_to_its_peaks() {
        let recipe = Recipe::default_for(Technique::Nmr13c);
        let line = |x: f64, c: f64| 1.0 / (1.0 + ((x - c) / 0.05).powi(2));
        let pts: Vec<(f64, f64)> = (0..4000)
            .map(|i| {
                let x = 220.0 - i as f64 * 0.05;
                (x, 100.0 * line(x, 30.9) + 40.0 * line(x, 207.0))
            })
            .collect();
        let mut sorted = pts.clone();
        sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
        let p = prepare(&recipe, &sorted, &Conditions::default()).unwrap();
        let xs: Vec<f64> = p.peaks.iter().map(|p| p.x).collect();
        assert_eq!(xs.len(), 2, "{xs:?}");
        assert!(
            (xs[0] - 30.9).abs() < 0.03 && (xs[1] - 207.0).abs() < 0.03,
            "{xs:?}"
        );
    }
}
