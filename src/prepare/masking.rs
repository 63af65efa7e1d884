//! Masks shared at comparison time: a 1H NMR unknown and a reference measured in different
//! solvents each had only their own solvent's signals masked when they were prepared, so a
//! comparison masks the regions of both solvents in both spectra.

use super::{Prepared, Solvent, l2_normalise};
use crate::technique::{Grid, Technique};

/// The 1H regions, `(lo, hi)` in ppm, that a comparison of an unknown in `unknown` with a
/// reference in `reference` masks in both spectra: the union of both solvents' residual
/// and water windows ([`Solvent::masks`]). Empty when the two solvents are the same (both
/// spectra were prepared with the same masks) or neither is known.
pub fn shared_solvent_regions(
    unknown: Option<Solvent>,
    reference: Option<Solvent>,
) -> Vec<(f64, f64)> {
    if unknown == reference {
        return Vec::new();
    }
    let mut regions: Vec<(f64, f64)> = unknown
        .into_iter()
        .chain(reference)
        .flat_map(Solvent::masks)
        .collect();
    regions.sort_by(|a, b| a.0.total_cmp(&b.0));
    regions.dedup();
    regions
}

/// `p` with the grid bins that `regions` reach set to zero and its peaks there left out,
/// normalised again as its technique normalises (1H NMR: area fractions summing to 1, and
/// peak integrals rescaled by the same factor; IR and Raman: unit length).
///
/// A bin is zeroed when any of its support lies in a region: one grid step either side of
/// its centre, because linear binning shares a point between the two nearest bin centres,
/// so a point up to a step away reaches a bin. Masking both spectra of a comparison with the
/// same regions therefore leaves no part of a masked signal in either, whichever way each
/// was prepared; peaks within a step of a region go too (the edge of a masked line is not a
/// peak of either spectrum).
pub fn mask_prepared(p: &Prepared, grid: &Grid, regions: &[(f64, f64)]) -> Prepared {
    let reached = |x: f64| {
        regions
            .iter()
            .any(|&(lo, hi)| x + grid.step > lo && x - grid.step < hi)
    };
    let mut out = p.clone();
    if regions.is_empty() {
        return out;
    }
    for (i, v) in out.vector.iter_mut().enumerate() {
        if reached(grid.x(i)) {
            *v = 0.0;
        }
    }
    out.peaks.retain(|q| !reached(q.x));
    if p.technique == Technique::Nmr1h {
        let before: f64 = p.vector.iter().map(|&v| f64::from(v)).sum();
        let after: f64 = out.vector.iter().map(|&v| f64::from(v)).sum();
        if after > 0.0 {
            let scale = before / after;
            for v in out.vector.iter_mut() {
                *v = (f64::from(*v) * scale) as f32;
            }
            for q in out.peaks.iter_mut() {
                q.area *= scale;
            }
        }
    } else {
        l2_normalise(&mut out.vector);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prepare::{Conditions, Recipe, prepare};

    /// a.b / (|a| |b|), the cosine of two vectors.
    fn cosine(a: &[f32], b: &[f32]) -> f64 {
        let dot = |x: &[f32], y: &[f32]| -> f64 {
            x.iter()
                .zip(y)
                .map(|(&p, &q)| f64::from(p) * f64::from(q))
                .sum()
        };
        dot(a, b) / (dot(a, a) * dot(b, b)).sqrt()
    }

    fn lorentzian(x: f64, centre: f64, fwhm: f64) -> f64 {
        let h = fwhm / 2.0;
        h * h / ((x - centre).powi(2) + h * h)
    }

    /// A 1H spectrum with lines at 1.20, 2.50 (where DMSO-d6's residual sits), 3.70 and
    /// 7.26 (where CDCl3's does), and the CDCl3 residual itself.
    fn points() -> Vec<(f64, f64)> {
        (0..3500)
            .map(|i| {
                let x = -0.5 + i as f64 * 0.004;
                let y = [(1.20, 3.0), (2.50, 2.0), (3.70, 2.0), (7.26, 1.0)]
                    .iter()
                    .map(|&(c, h)| h * lorentzian(x, c, 0.008))
                    .sum::<f64>();
                (x, y)
            })
            .collect()
    }

    #[test]
    fn same_or_unknown_solvents_share_nothing() {
        assert!(shared_solvent_regions(None, None).is_empty());
        assert!(shared_solvent_regions(Some(Solvent::Cdcl3), Some(Solvent::Cdcl3)).is_empty());
        // Gottlieb et al. 1997: CDCl3 7.26 / water 1.56; DMSO-d6 2.50 / water 3.33.
        let both = shared_solvent_regions(Some(Solvent::DmsoD6), Some(Solvent::Cdcl3));
        assert_eq!(both.len(), 4);
        for ppm in [1.56, 2.50, 3.33, 7.26] {
            assert!(both.iter().any(|&(lo, hi)| lo < ppm && ppm < hi), "{ppm}");
        }
    }

    #[test]
    fn masking_both_sides_makes_two_preparations_of_one_spectrum_agree() {
        // The same file prepared as a reference in CDCl3 and as an unknown in DMSO-d6: each
        // masks only its own solvent, so they differ at 1.56, 2.50, 3.33 and 7.26 ppm. With
        // the union masked in both they are the same vector again.
        let recipe = Recipe::default_for(Technique::Nmr1h);
        let grid = &recipe.grid;
        let in_ = |s| Conditions {
            solvent: Some(s),
            ..Conditions::default()
        };
        let path = std::path::Path::new("t");
        let reference = prepare(path, &recipe, &points(), &in_(Solvent::Cdcl3)).unwrap();
        let unknown = prepare(path, &recipe, &points(), &in_(Solvent::DmsoD6)).unwrap();
        let plain = cosine(&unknown.vector, &reference.vector);
        assert!(plain < 0.95, "{plain}");
        let regions = shared_solvent_regions(Some(Solvent::DmsoD6), Some(Solvent::Cdcl3));
        let (u, r) = (
            mask_prepared(&unknown, grid, &regions),
            mask_prepared(&reference, grid, &regions),
        );
        let shared = cosine(&u.vector, &r.vector);
        assert!(shared > 0.9999, "{shared}");
        // Area fractions still sum to 1; the lines at 2.50 and 7.26 are gone from both peak
        // lists, those at 1.20 and 3.70 kept.
        let sum: f64 = u.vector.iter().map(|&v| f64::from(v)).sum();
        assert!((sum - 1.0).abs() < 1e-5, "{sum}");
        let xs = |p: &Prepared| {
            p.peaks
                .iter()
                .map(|q| (q.x * 100.0).round() / 100.0)
                .collect::<Vec<_>>()
        };
        assert_eq!(xs(&u), xs(&r));
        assert_eq!(xs(&u), [1.2, 3.7]);
        // Nothing to mask: the prepared spectrum comes back as it was.
        assert_eq!(mask_prepared(&unknown, grid, &[]), unknown);
    }
}
