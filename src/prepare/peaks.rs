//! Peak picking by topographic prominence.

use serde::{Deserialize, Serialize};

/// One picked peak.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Peak {
    /// Position in the technique's x unit (cm-1, m/z, ppm).
    pub x: f64,
    /// Height of the peak in the prepared scale.
    pub height: f64,
    /// Full width at half prominence, in x units (0 for MS sticks).
    pub width: f64,
    /// Integral of the peak. IR and Raman: the area under the prepared curve between the
    /// half-prominence crossings (the stretch `width` spans), trapezoidal rule on the grid, in
    /// height units times x units. 1H NMR: the line's integral as a fraction of the spectrum's
    /// total area. EI-MS sticks and 13C lines: 0 (a stick has no extent).
    pub area: f64,
}

/// A local maximum with its prominence and the indices of its bases.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Maximum {
    /// Index of the maximum (the middle of a flat top).
    pub index: usize,
    /// Height above the higher of the two bases.
    pub prominence: f64,
    /// Index of the lowest point between the peak and the next higher point on the left.
    pub left_base: usize,
    /// The same on the right.
    pub right_base: usize,
    /// Interpolated left crossing of the half-prominence line, in fractional samples.
    pub left_half: f64,
    /// Interpolated right crossing of the half-prominence line, in fractional samples.
    pub right_half: f64,
}

/// Finds local maxima of `y` and their prominences, keeping those at least `min_prominence`.
///
/// The definitions follow `scipy.signal.find_peaks`, `peak_prominences` and `peak_widths`
/// (SciPy 1.x documentation): a maximum is a sample higher than its left neighbour and not
/// lower than its right one (a flat top counts once, at its middle); its prominence is its
/// height above the higher of the two minima found walking outward until a higher sample or
/// the edge; its width is measured where the signal crosses half the prominence.
pub fn find_maxima(y: &[f64], min_prominence: f64) -> Vec<Maximum> {
    let n = y.len();
    let mut out = Vec::new();
    let mut i = 1;
    while i + 1 < n {
        if y[i] > y[i - 1] {
            // Walk across a flat top.
            let mut j = i;
            while j + 1 < n && y[j + 1] == y[i] {
                j += 1;
            }
            if j + 1 < n && y[j + 1] < y[i] {
                let index = (i + j) / 2;
                let m = measure(y, index);
                if m.prominence >= min_prominence {
                    out.push(m);
                }
            }
            i = j + 1;
        } else {
            i += 1;
        }
    }
    out
}

fn measure(y: &[f64], index: usize) -> Maximum {
    let top = y[index];
    let (mut left_base, mut left_min) = (index, top);
    let mut k = index;
    while k > 0 {
        k -= 1;
        if y[k] > top {
            break;
        }
        if y[k] < left_min {
            left_min = y[k];
            left_base = k;
        }
    }
    let (mut right_base, mut right_min) = (index, top);
    for (k, &v) in y.iter().enumerate().skip(index + 1) {
        if v > top {
            break;
        }
        if v < right_min {
            right_min = v;
            right_base = k;
        }
    }
    let prominence = top - left_min.max(right_min);
    let half = top - prominence / 2.0;

    let mut left_half = left_base as f64;
    let mut k = index;
    while k > left_base {
        if y[k - 1] <= half {
            left_half = (k - 1) as f64 + (half - y[k - 1]) / (y[k] - y[k - 1]);
            break;
        }
        k -= 1;
    }
    let mut right_half = right_base as f64;
    let mut k = index;
    while k < right_base {
        if y[k + 1] <= half {
            right_half = k as f64 + (y[k] - half) / (y[k] - y[k + 1]);
            break;
        }
        k += 1;
    }
    Maximum {
        index,
        prominence,
        left_base,
        right_base,
        left_half,
        right_half,
    }
}

/// The area under `(x, y)` between two fractional sample indices, by the trapezoidal rule
/// over the samples strictly inside and the two end points interpolated linearly (common
/// practice; equal to `numpy.trapezoid` of the same points for ascending x). Stretches of y
/// below zero count negative, as in `numpy.trapezoid`; descending x gives the same value as
/// ascending.
pub fn area_between(x: &[f64], y: &[f64], from: f64, to: f64) -> f64 {
    let (from, to) = (from.min(to), from.max(to));
    let mut xs = vec![x_at(x, from)];
    let mut ys = vec![x_at(y, from)];
    let first = from.floor() as usize + 1;
    let last = (to.ceil() as usize).min(x.len());
    for i in first..last {
        if (i as f64) < to {
            xs.push(x[i]);
            ys.push(y[i]);
        }
    }
    xs.push(x_at(x, to));
    ys.push(x_at(y, to));
    let area: f64 = xs
        .windows(2)
        .zip(ys.windows(2))
        .map(|(xw, yw)| (xw[1] - xw[0]).abs() * (yw[0] + yw[1]) / 2.0)
        .sum();
    area
}

/// Linear interpolation of `x` at a fractional sample index.
pub fn x_at(x: &[f64], fractional: f64) -> f64 {
    let i = fractional.floor().clamp(0.0, (x.len() - 1) as f64) as usize;
    let t = fractional - i as f64;
    if i + 1 < x.len() {
        x[i] + t * (x[i + 1] - x[i])
    } else {
        x[i]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prominence_follows_the_scipy_definition() {
        // Worked by hand from the definition in the SciPy reference guide
        // (scipy.signal.peak_prominences): the horizontal line from a peak runs until it meets
        // a higher sample, "an intersection with a peak of the same height is ignored", so the
        // second 3 reaches past the first and its prominence is 3, not 2. The Python
        // cross-check (scripts/crosscheck.py) compares with SciPy itself on random signals.
        let y = [0.0, 1.0, 0.0, 3.0, 1.0, 3.0, 0.0, 4.0, 0.0];
        let found = find_maxima(&y, 0.0);
        let idx: Vec<_> = found.iter().map(|m| m.index).collect();
        let prom: Vec<_> = found.iter().map(|m| m.prominence).collect();
        assert_eq!(idx, [1, 3, 5, 7]);
        assert_eq!(prom, [1.0, 3.0, 3.0, 4.0]);
    }

    #[test]
    fn flat_tops_count_once_at_their_middle() {
        // scipy.signal.find_peaks reports the middle of a plateau (left index if even).
        let y = [0.0, 2.0, 2.0, 2.0, 0.0, 1.0, 1.0, 0.0];
        let idx: Vec<_> = find_maxima(&y, 0.0).iter().map(|m| m.index).collect();
        assert_eq!(idx, [2, 5]);
    }

    #[test]
    fn area_between_the_half_height_crossings() {
        // The triangle below on a 2 cm-1 grid crosses half its prominence (2) at samples 2
        // and 6; the trapezoidal rule over [2, 3, 4, 3, 2] at spacing 2 gives
        // 2 x (2/2 + 3 + 4 + 3 + 2/2) = 24, as numpy.trapezoid([2, 3, 4, 3, 2], dx=2) does.
        let y = [0.0, 1.0, 2.0, 3.0, 4.0, 3.0, 2.0, 1.0, 0.0];
        let x: Vec<f64> = (0..9).map(|i| 400.0 + 2.0 * i as f64).collect();
        let m = find_maxima(&y, 0.0)[0];
        assert_eq!((m.left_half, m.right_half), (2.0, 6.0));
        assert_eq!(area_between(&x, &y, m.left_half, m.right_half), 24.0);
        // x descending (a file from 4000 down) gives the same, positive, area.
        let down: Vec<f64> = x.iter().rev().copied().collect();
        assert_eq!(area_between(&down, &y, 2.0, 6.0), 24.0);
        // Fractional ends: from sample 1.5 to 3.25 the points are (403, 1.5), (404, 2),
        // (406, 3), (406.5, 3.25); numpy.trapezoid([1.5, 2, 3, 3.25], [403, 404, 406, 406.5])
        // = 1 x 1.75 + 2 x 2.5 + 0.5 x 3.125 = 8.3125 (numpy 2.4 gives 8.3125).
        assert_eq!(area_between(&x, &y, 1.5, 3.25), 8.3125);
        // Below zero counts negative, as numpy.trapezoid([-2, -3, -4, -3, -2], dx=2) = -24.
        let below: Vec<f64> = y.iter().map(|v| -v).collect();
        assert_eq!(area_between(&x, &below, 2.0, 6.0), -24.0);
    }

    #[test]
    fn half_width_of_a_triangle() {
        // A symmetric triangle of height 4 and base 8 samples has FWHM 4 samples.
        let y = [0.0, 1.0, 2.0, 3.0, 4.0, 3.0, 2.0, 1.0, 0.0];
        let m = find_maxima(&y, 0.0)[0];
        assert_eq!(m.right_half - m.left_half, 4.0);
    }
}
