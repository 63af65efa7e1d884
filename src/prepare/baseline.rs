//! Baseline estimation for optical spectra.

use serde::{Deserialize, Serialize};

/// A baseline method, applied on the library grid before masking and normalisation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "method", rename_all = "kebab-case")]
pub enum Baseline {
    /// Asymmetric least squares (Eilers & Boelens 2005).
    Als {
        /// Smoothness penalty lambda (in grid points).
        lambda: f64,
        /// Asymmetry p: weight of points above the baseline.
        p: f64,
    },
    /// Lower convex hull ("rubber band").
    RubberBand,
}

/// The ALS parameters a library uses unless told otherwise (DESIGN: lambda ~1e5, p ~0.01 on
/// the library grid; Eilers & Boelens 2005 suggest 10^2..10^9 and 0.001..0.1).
pub const ALS_DEFAULT: Baseline = Baseline::Als {
    lambda: 1e5,
    p: 0.01,
};

impl Baseline {
    /// Reads a baseline choice: `none`, `als` (with [`ALS_DEFAULT`]'s parameters) or
    /// `rubber-band`.
    pub fn parse_choice(s: &str) -> crate::Result<Option<Baseline>> {
        match s.trim().to_ascii_lowercase().replace('_', "-").as_str() {
            "none" | "off" => Ok(None),
            "als" | "asls" => Ok(Some(ALS_DEFAULT)),
            "rubber-band" | "rubberband" => Ok(Some(Baseline::RubberBand)),
            _ => Err(crate::Error::invalid(
                format!("unknown baseline method '{s}'"),
                "use none, als or rubber-band",
            )),
        }
    }

    /// The short name: `als` or `rubber-band`.
    pub fn name(self) -> &'static str {
        match self {
            Baseline::Als { .. } => "als",
            Baseline::RubberBand => "rubber-band",
        }
    }

    /// Estimates the baseline of `y`.
    pub fn estimate(self, y: &[f64]) -> Vec<f64> {
        match self {
            Baseline::Als { lambda, p } => asls(y, lambda, p, ALS_MAX_ITER, ALS_TOL),
            Baseline::RubberBand => rubber_band(y),
        }
    }
}

/// Iteration limit and convergence tolerance of [`asls`], the values pybaselines uses by
/// default (pybaselines documentation, `Baseline.asls`: max_iter=50, tol=1e-3).
pub const ALS_MAX_ITER: usize = 50;
/// See [`ALS_MAX_ITER`].
pub const ALS_TOL: f64 = 1e-3;

/// Asymmetric least squares baseline: Eilers, P. H. C.; Boelens, H. F. M. "Baseline
/// Correction with Asymmetric Least Squares Smoothing", Leiden University Medical Centre
/// report, 2005.
///
/// Minimises sum w_i (y_i - z_i)^2 + lambda sum (second difference of z)^2, with w_i = p
/// where y_i lies above z_i and 1 - p elsewhere, re-solving until the weights settle. The
/// stopping rule follows pybaselines' `asls`: stop when ||w_new - w_old|| / ||w_old|| < tol.
/// Each solve is a banded (pentadiagonal) Cholesky factorisation, O(n).
pub fn asls(y: &[f64], lambda: f64, p: f64, max_iter: usize, tol: f64) -> Vec<f64> {
    let n = y.len();
    if n < 3 {
        return y.to_vec();
    }
    // D'D for the second-difference matrix D ((n-2) x n): three bands.
    let mut d0 = vec![6.0; n];
    let mut d1 = vec![-4.0; n - 1];
    let d2 = vec![1.0; n - 2];
    d0[0] = 1.0;
    d0[n - 1] = 1.0;
    if n > 3 {
        d0[1] = 5.0;
        d0[n - 2] = 5.0;
    } else {
        d0[1] = 4.0;
    }
    d1[0] = -2.0;
    d1[n - 2] = -2.0;

    let mut w = vec![1.0; n];
    let mut z = vec![0.0; n];
    for _ in 0..=max_iter {
        z = solve_penta(&w, lambda, &d0, &d1, &d2, y);
        let new_w: Vec<f64> = y
            .iter()
            .zip(&z)
            .map(|(&yi, &zi)| if yi > zi { p } else { 1.0 - p })
            .collect();
        let diff: f64 = w
            .iter()
            .zip(&new_w)
            .map(|(a, b)| (a - b) * (a - b))
            .sum::<f64>()
            .sqrt();
        let norm: f64 = w.iter().map(|a| a * a).sum::<f64>().sqrt();
        if diff / norm < tol {
            break;
        }
        w = new_w;
    }
    z
}

/// Solves (diag(w) + lambda D'D) z = w .* y by banded Cholesky.
fn solve_penta(w: &[f64], lambda: f64, d0: &[f64], d1: &[f64], d2: &[f64], y: &[f64]) -> Vec<f64> {
    let n = y.len();
    let (mut l0, mut l1, mut l2) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    for i in 0..n {
        let a0 = w[i] + lambda * d0[i];
        let mut s = a0;
        if i >= 1 {
            s -= l1[i - 1] * l1[i - 1];
        }
        if i >= 2 {
            s -= l2[i - 2] * l2[i - 2];
        }
        l0[i] = s.sqrt();
        if i + 1 < n {
            let a1 = lambda * d1[i];
            let prev = if i >= 1 { l2[i - 1] * l1[i - 1] } else { 0.0 };
            l1[i] = (a1 - prev) / l0[i];
        }
        if i + 2 < n {
            l2[i] = lambda * d2[i] / l0[i];
        }
    }
    let mut u = vec![0.0; n];
    for i in 0..n {
        let mut s = w[i] * y[i];
        if i >= 1 {
            s -= l1[i - 1] * u[i - 1];
        }
        if i >= 2 {
            s -= l2[i - 2] * u[i - 2];
        }
        u[i] = s / l0[i];
    }
    let mut z = vec![0.0; n];
    for i in (0..n).rev() {
        let mut s = u[i];
        if i + 1 < n {
            s -= l1[i] * z[i + 1];
        }
        if i + 2 < n {
            s -= l2[i] * z[i + 2];
        }
        z[i] = s / l0[i];
    }
    z
}

/// Rubber-band baseline: the lower convex hull of the points (Andrew's monotone chain),
/// interpolated linearly between hull vertices (common practice in vibrational spectroscopy).
pub fn rubber_band(y: &[f64]) -> Vec<f64> {
    let n = y.len();
    let mut hull: Vec<usize> = Vec::new();
    for i in 0..n {
        while hull.len() >= 2 {
            let (a, b) = (hull[hull.len() - 2], hull[hull.len() - 1]);
            // Remove b when it lies on or above the segment a -> i.
            let cross =
                (b as f64 - a as f64) * (y[i] - y[a]) - (y[b] - y[a]) * (i as f64 - a as f64);
            if cross <= 0.0 {
                hull.pop();
            } else {
                break;
            }
        }
        hull.push(i);
    }
    let mut out = vec![0.0; n];
    for seg in hull.windows(2) {
        let (a, b) = (seg[0], seg[1]);
        for (i, slot) in out.iter_mut().enumerate().take(b + 1).skip(a) {
            *slot = y[a] + (y[b] - y[a]) * (i - a) as f64 / (b - a) as f64;
        }
    }
    if hull.len() == 1 {
        out[0] = y[0];
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn als_reproduces_a_straight_line_under_peaks() {
        // A straight line has zero second difference, so with the peaks carrying weight p the
        // baseline converges to (nearly) the line itself (Eilers & Boelens 2005, section 2).
        let y: Vec<f64> = (0..400)
            .map(|i| {
                let x = i as f64;
                0.5 + 0.002 * x
                    + 3.0 * (-((x - 150.0) / 5.0).powi(2)).exp()
                    + 2.0 * (-((x - 300.0) / 8.0).powi(2)).exp()
            })
            .collect();
        let z = asls(&y, 1e5, 0.001, 50, 1e-3);
        for (i, zi) in z.iter().enumerate() {
            let line = 0.5 + 0.002 * i as f64;
            assert!((zi - line).abs() < 0.02, "point {i}: {zi} vs {line}");
        }
    }

    #[test]
    fn rubber_band_follows_the_lower_hull() {
        let y = [1.0, 3.0, 0.0, 4.0, 2.0];
        // Hull vertices 0 (1.0), 2 (0.0), 4 (2.0).
        assert_eq!(rubber_band(&y), vec![1.0, 0.5, 0.0, 1.0, 2.0]);
    }
}
