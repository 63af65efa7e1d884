//! Savitzky-Golay derivatives and the derivative correlation of optical spectra.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// Window and polynomial order of the Savitzky-Golay first derivative.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct DerivativeParams {
    /// Points in the moving window (odd). The default, 11 points, spans 20 cm-1 on a 2 cm-1
    /// grid: about the half-width of a condensed-phase vibrational band (common practice),
    /// so the derivative smooths noise without flattening the bands.
    pub window: usize,
    /// Order of the fitted polynomial. The default, 2 (quadratic), is the lowest order that
    /// has a first derivative varying within the window (Savitzky & Golay 1964 tabulate
    /// quadratic/cubic fits first).
    pub order: usize,
}

impl Default for DerivativeParams {
    fn default() -> DerivativeParams {
        DerivativeParams {
            window: 11,
            order: 2,
        }
    }
}

impl DerivativeParams {
    /// Checks the window and order can give a first derivative.
    pub fn validate(&self) -> Result<()> {
        if self.window < 3 || self.window.is_multiple_of(2) || self.window > 101 {
            return Err(Error::invalid(
                format!(
                    "Savitzky-Golay window {} is not an odd number of points from 3 to 101",
                    self.window
                ),
                "use an odd window such as 5, 11 or 21",
            ));
        }
        if self.order < 1 || self.order >= self.window || self.order > 6 {
            return Err(Error::invalid(
                format!(
                    "Savitzky-Golay order {} does not fit a {}-point window",
                    self.order, self.window
                ),
                "use an order from 1 to 6 that is smaller than the window, e.g. 2",
            ));
        }
        Ok(())
    }
}

/// Savitzky-Golay convolution coefficients for the `deriv`-th derivative at the centre of a
/// `window`-point window, from a least-squares polynomial of degree `order` (in units of the
/// sample spacing; divide by spacing^deriv for x units).
///
/// Savitzky, A.; Golay, M. J. E. "Smoothing and Differentiation of Data by Simplified Least
/// Squares Procedures", Anal. Chem. 1964, 36, 1627-1639. The coefficients are the row
/// `deriv` of (A'A)^-1 A' times deriv!, where A is the Vandermonde matrix of the window
/// positions; positions are scaled to -1..1 before solving to keep A'A well conditioned.
/// The result is applied as `sum_k c[k] * y[i + k - half]` (correlation order, so a rising
/// signal has a positive first derivative).
///
/// Panics if `order >= window`, `deriv > order` or `window` is even; callers validate with
/// [`DerivativeParams::validate`].
pub fn savgol_coefficients(window: usize, order: usize, deriv: usize) -> Vec<f64> {
    assert!(window % 2 == 1 && order < window && deriv <= order);
    let half = (window / 2) as f64;
    let scale = if half > 0.0 { half } else { 1.0 };
    let u: Vec<f64> = (0..window).map(|i| (i as f64 - half) / scale).collect();
    let p = order + 1;
    // Normal matrix A'A (p x p) and the right-hand side unit vector e_deriv.
    let mut m = vec![vec![0.0f64; p]; p];
    for (r, row) in m.iter_mut().enumerate() {
        for (c, cell) in row.iter_mut().enumerate() {
            *cell = u.iter().map(|&x| x.powi((r + c) as i32)).sum();
        }
    }
    // Solve (A'A) g = e_deriv; then c_i = deriv! * sum_k g_k u_i^k.
    let mut rhs = vec![0.0f64; p];
    rhs[deriv] = 1.0;
    let g = solve(m, rhs);
    let factorial: f64 = (1..=deriv).map(|k| k as f64).product();
    u.iter()
        .map(|&x| {
            let v: f64 = g
                .iter()
                .enumerate()
                .map(|(k, gk)| gk * x.powi(k as i32))
                .sum();
            factorial * v / scale.powi(deriv as i32)
        })
        .collect()
}

/// Gaussian elimination with partial pivoting for a small dense system.
fn solve(mut a: Vec<Vec<f64>>, mut b: Vec<f64>) -> Vec<f64> {
    let n = b.len();
    for col in 0..n {
        let pivot = (col..n)
            .max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))
            .unwrap_or(col);
        a.swap(col, pivot);
        b.swap(col, pivot);
        let pivot_row = a[col].clone();
        let pivot_b = b[col];
        for (row, rhs) in a.iter_mut().zip(b.iter_mut()).skip(col + 1) {
            let f = row[col] / pivot_row[col];
            for (x, p) in row[col..].iter_mut().zip(&pivot_row[col..]) {
                *x -= f * p;
            }
            *rhs -= f * pivot_b;
        }
    }
    let mut x = vec![0.0; n];
    for row in (0..n).rev() {
        let s: f64 = (row + 1..n).map(|k| a[row][k] * x[k]).sum();
        x[row] = (b[row] - s) / a[row][row];
    }
    x
}

/// The Savitzky-Golay first derivative of `y` at every point whose whole window lies inside
/// the data and outside the `skip` bins (masked regions); `None` elsewhere. Masked bins are
/// zero in a prepared vector, and a window that straddles a mask edge would see a step that
/// is not in the spectrum.
pub fn first_derivative(y: &[f32], params: &DerivativeParams, skip: &[bool]) -> Vec<Option<f64>> {
    let c = savgol_coefficients(params.window, params.order, 1);
    let half = params.window / 2;
    let n = y.len();
    let mut out = vec![None; n];
    if n < params.window {
        return out;
    }
    // Running count of skipped bins, so each window's check is O(1).
    let mut skipped_before = vec![0usize; n + 1];
    for i in 0..n {
        skipped_before[i + 1] =
            skipped_before[i] + usize::from(skip.get(i).copied().unwrap_or(false));
    }
    for (i, slot) in out.iter_mut().enumerate().take(n - half).skip(half) {
        let (lo, hi) = (i - half, i + half + 1);
        if skipped_before[hi] - skipped_before[lo] > 0 {
            continue;
        }
        *slot = Some(
            c.iter()
                .zip(&y[lo..hi])
                .map(|(ck, &v)| ck * f64::from(v))
                .sum(),
        );
    }
    out
}

/// Derivative correlation: Pearson's r between the Savitzky-Golay first derivatives of two
/// spectra (Savitzky & Golay, Anal. Chem. 1964, 36, 1627), over the points where both are
/// defined. A sloping or offset baseline adds only a constant to the derivative, so it does
/// not lower the score; negative r counts as 0.
pub fn derivative_correlation(
    a: &[f32],
    b: &[f32],
    params: &DerivativeParams,
    skip: &[bool],
) -> f64 {
    let da = first_derivative(a, params, skip);
    let db = first_derivative(b, params, skip);
    let pairs = da.iter().zip(&db).filter_map(|(x, y)| Some(((*x)?, (*y)?)));
    super::vector::pearson_pairs(pairs).clamp(0.0, 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: &[f64], b: &[f64]) {
        assert_eq!(a.len(), b.len());
        for (x, y) in a.iter().zip(b) {
            assert!((x - y).abs() < 1e-12, "{a:?} vs {b:?}");
        }
    }

    #[test]
    fn coefficients_match_the_1964_tables() {
        // Savitzky & Golay, Anal. Chem. 1964, 36, 1627: 5-point quadratic first derivative
        // (-2, -1, 0, 1, 2) / 10, and 5-point quadratic smoothing (-3, 12, 17, 12, -3) / 35.
        close(&savgol_coefficients(5, 2, 1), &[-0.2, -0.1, 0.0, 0.1, 0.2]);
        close(
            &savgol_coefficients(5, 2, 0),
            &[
                -3.0 / 35.0,
                12.0 / 35.0,
                17.0 / 35.0,
                12.0 / 35.0,
                -3.0 / 35.0,
            ],
        );
        // 7-point quadratic first derivative (-3, -2, -1, 0, 1, 2, 3) / 28 (same tables).
        let seven: Vec<f64> = (-3..=3).map(|k| f64::from(k) / 28.0).collect();
        close(&savgol_coefficients(7, 2, 1), &seven);
        // 5-point cubic first derivative (1, -8, 0, 8, -1) / 12 (same tables): a higher order
        // changes the weights.
        close(
            &savgol_coefficients(5, 3, 1),
            &[1.0 / 12.0, -8.0 / 12.0, 0.0, 8.0 / 12.0, -1.0 / 12.0],
        );
    }

    #[test]
    fn derivative_of_a_line_is_its_slope_and_masks_are_skipped() {
        let y: Vec<f32> = (0..20).map(|i| 0.5 * i as f32 + 3.0).collect();
        let mut skip = vec![false; 20];
        skip[10] = true;
        let d = first_derivative(&y, &DerivativeParams::default(), &skip);
        // Window 11: points 0-4 and 15-19 lack a full window; 5..=15 all contain bin 10.
        assert!(d.iter().all(Option::is_none), "{d:?}");
        let d = first_derivative(
            &y,
            &DerivativeParams {
                window: 5,
                order: 2,
            },
            &skip,
        );
        assert!((d[2].unwrap() - 0.5).abs() < 1e-9, "{:?}", d[2]);
        assert_eq!(d[8], None);
        assert!((d[14].unwrap() - 0.5).abs() < 1e-6);
    }

    #[test]
    fn derivative_correlation_ignores_a_sloping_baseline() {
        let band = |x: f64| {
            (-((x - 60.0) / 6.0).powi(2)).exp() + 0.5 * (-((x - 120.0) / 4.0).powi(2)).exp()
        };
        let a: Vec<f32> = (0..200).map(|i| band(i as f64) as f32).collect();
        let b: Vec<f32> = (0..200)
            .map(|i| (band(i as f64) + 0.01 * i as f64 + 0.3) as f32)
            .collect();
        let skip = vec![false; 200];
        let r = derivative_correlation(&a, &b, &DerivativeParams::default(), &skip);
        assert!(r > 0.99, "{r}");
        let plain = crate::score::pearson(&a, &b, None);
        assert!(plain < r, "{plain} vs {r}");
    }

    #[test]
    fn parameters_are_checked() {
        assert!(DerivativeParams::default().validate().is_ok());
        assert!(
            DerivativeParams {
                window: 10,
                order: 2
            }
            .validate()
            .is_err()
        );
        assert!(
            DerivativeParams {
                window: 5,
                order: 5
            }
            .validate()
            .is_err()
        );
        assert!(
            DerivativeParams {
                window: 5,
                order: 0
            }
            .validate()
            .is_err()
        );
    }
}
