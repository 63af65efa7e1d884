//! Coverage: the part of the grid a spectrum was measured on.
//!
//! A reference measured 650-4000 cm-1 and laid on a 400-4000 grid has no data below 650;
//! the resampler leaves those bins at zero, and zeros there are not a measurement. Scores
//! compare two spectra over the bins both cover ([`shared_bins`]), so a spectrum measured
//! over a shorter range is neither penalised nor favoured for what it lacks.

use std::ops::Range;

use serde::{Deserialize, Serialize};

use crate::technique::Grid;

/// The x range a spectrum covers on its grid: its measured range intersected with the
/// grid's, in x units. The covered bins are those whose grid x lies in `lo..=hi`, the bins
/// the resampler fills ([`super::resample`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Coverage {
    /// Lowest x covered.
    pub lo: f64,
    /// Highest x covered.
    pub hi: f64,
}

impl Coverage {
    /// The coverage of a spectrum measured from `first` to `last` (x units, any order) on
    /// `grid`; `None` when it covers every bin of the grid (then nothing is left out).
    pub fn measured(first: f64, last: f64, grid: &Grid) -> Option<Coverage> {
        let (first, last) = (first.min(last), first.max(last));
        let c = Coverage {
            lo: first.max(grid.start),
            hi: last.min(grid.stop),
        };
        (c.bins(grid) != (0..grid.len())).then_some(c)
    }

    /// The covered bins, `a..b` (empty when the spectrum lies off the grid).
    pub fn bins(&self, grid: &Grid) -> Range<usize> {
        let n = grid.len();
        let index = |v: f64| {
            let i = ((v - grid.start) / grid.step).floor();
            if i.is_nan() || i < 0.0 {
                0
            } else {
                (i as usize).min(n)
            }
        };
        // From a first guess, step until the predicate `lo <= x(i) <= hi` of the resampler
        // decides, so rounding in the division never moves an end.
        let mut a = index(self.lo);
        while a > 0 && grid.x(a - 1) >= self.lo {
            a -= 1;
        }
        while a < n && grid.x(a) < self.lo {
            a += 1;
        }
        let mut b = index(self.hi).max(a);
        while b < n && grid.x(b) <= self.hi {
            b += 1;
        }
        while b > a && grid.x(b - 1) > self.hi {
            b -= 1;
        }
        a..b
    }
}

/// The bins a spectrum of coverage `c` covers on `grid` (`None`: the whole grid).
pub fn covered_bins(c: Option<&Coverage>, grid: &Grid) -> Range<usize> {
    c.map_or(0..grid.len(), |c| c.bins(grid))
}

/// The bins two spectra both cover: where scores compare them.
pub fn shared_bins(a: Option<&Coverage>, b: Option<&Coverage>, grid: &Grid) -> Range<usize> {
    let (a, b) = (covered_bins(a, grid), covered_bins(b, grid));
    let lo = a.start.max(b.start);
    lo..a.end.min(b.end).max(lo)
}

/// Whether a peak at `x` lies in the bins `range` of `grid`: its nearest grid point does.
/// Optical peaks sit on grid points, so the decision does not depend on rounding.
pub fn peak_in(x: f64, grid: &Grid, range: &Range<usize>) -> bool {
    grid.index_of(x).is_some_and(|i| range.contains(&i))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid() -> Grid {
        Grid {
            start: 400.0,
            stop: 4000.0,
            step: 2.0,
            masks: vec![],
        }
    }

    #[test]
    fn covered_bins_are_the_ones_the_resampler_fills() {
        let g = grid();
        // 650-4000 cm-1 on the 400-4000 grid: bins from x = 650 (index 125) to the end.
        let c = Coverage::measured(650.0, 4000.0, &g).unwrap();
        assert_eq!(c.bins(&g), 125..1801);
        // Ends between grid points: 650.5 leaves 650 out, 3999.9 leaves 4000 out.
        let c = Coverage::measured(3999.9, 650.5, &g).unwrap();
        assert_eq!(c.bins(&g), 126..1800);
        // A file wider than the grid covers all of it: nothing to record.
        assert_eq!(Coverage::measured(350.0, 4100.0, &g), None);
        assert_eq!(Coverage::measured(400.0, 4000.0, &g), None);
        // Off the grid: no bins.
        assert!(
            Coverage::measured(4100.0, 4200.0, &g)
                .unwrap()
                .bins(&g)
                .is_empty()
        );
        // The same bins as `resample` fills: the bins it leaves at zero are the ones left out.
        let points: Vec<(f64, f64)> = (0..=300).map(|i| (651.3 + 3.1 * i as f64, 1.0)).collect();
        let filled: Vec<usize> = super::super::resample(&points, &g)
            .iter()
            .enumerate()
            .filter(|(_, v)| **v != 0.0)
            .map(|(i, _)| i)
            .collect();
        let c = Coverage::measured(points[0].0, points[300].0, &g).unwrap();
        assert_eq!(c.bins(&g), filled[0]..filled[filled.len() - 1] + 1);
    }

    #[test]
    fn shared_bins_are_the_intersection() {
        let g = grid();
        let a = Coverage::measured(650.0, 4000.0, &g);
        let b = Coverage::measured(400.0, 3000.0, &g);
        assert_eq!(shared_bins(a.as_ref(), b.as_ref(), &g), 125..1301);
        assert_eq!(shared_bins(None, None, &g), 0..1801);
        let c = Coverage::measured(3500.0, 4000.0, &g);
        assert!(shared_bins(b.as_ref(), c.as_ref(), &g).is_empty());
        assert!(peak_in(650.0, &g, &(125..1301)) && !peak_in(648.0, &g, &(125..1301)));
    }
}
