//! Peak overlap: one-to-one matching of peak positions within a tolerance.

use serde::{Deserialize, Serialize};

/// How well two peak lists agree.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Overlap {
    /// Peaks matched one to one.
    pub matched: usize,
    /// Peaks in the unknown.
    pub unknown_peaks: usize,
    /// Peaks in the reference.
    pub reference_peaks: usize,
    /// matched / unknown peaks.
    pub forward: f64,
    /// matched / reference peaks.
    pub reverse: f64,
    /// matched / (unknown + reference - matched).
    pub jaccard: f64,
}

/// Matches peak positions one to one within `tolerance` (inclusive) and reports the
/// fractions. Both lists need not be sorted. The sweep over the two sorted lists (match when
/// within tolerance, else advance the smaller) finds a largest possible matching, because
/// in one dimension an unmatched smaller peak can never match anything further right.
pub fn peak_overlap(unknown: &[f64], reference: &[f64], tolerance: f64) -> Overlap {
    let mut u = unknown.to_vec();
    let mut r = reference.to_vec();
    u.sort_by(f64::total_cmp);
    r.sort_by(f64::total_cmp);
    let (mut i, mut j, mut matched) = (0, 0, 0);
    while i < u.len() && j < r.len() {
        if (u[i] - r[j]).abs() <= tolerance {
            matched += 1;
            i += 1;
            j += 1;
        } else if u[i] < r[j] {
            i += 1;
        } else {
            j += 1;
        }
    }
    let frac = |num: usize, den: usize| {
        if den == 0 {
            0.0
        } else {
            num as f64 / den as f64
        }
    };
    Overlap {
        matched,
        unknown_peaks: u.len(),
        reference_peaks: r.len(),
        forward: frac(matched, u.len()),
        reverse: frac(matched, r.len()),
        jaccard: frac(matched, u.len() + r.len() - matched),
    }
}

/// Shift match: a tolerance-weighted Jaccard index of two peak-position lists, the ranking
/// measure for 13C peak lists.
///
/// Peaks are paired one to one without crossing (both lists sorted); a pair at distance d
/// within `tolerance` counts w = 1 - (d / tolerance)^2 (the Epanechnikov kernel), so a pair
/// counts fully when the shifts agree and fades to nothing at the tolerance, with no jump
/// when a peak drifts across it. Of all such pairings the one with the largest total weight
/// W is used (dynamic programming over the two sorted lists), and the score is
/// W / (N_U + N_R - k) for k pairs: the plain Jaccard index when every pair agrees exactly.
/// Symmetric, within 0..1, 0 when either list is empty.
pub fn shift_match(unknown: &[f64], reference: &[f64], tolerance: f64) -> f64 {
    let mut u = unknown.to_vec();
    let mut r = reference.to_vec();
    u.sort_by(f64::total_cmp);
    r.sort_by(f64::total_cmp);
    let (n, m) = (u.len(), r.len());
    if n == 0 || m == 0 || tolerance <= 0.0 {
        return 0.0;
    }
    // best[i][j] = (total weight, pairs) over the first i unknown and j reference peaks.
    let mut best = vec![(0.0f64, 0usize); (n + 1) * (m + 1)];
    let at = |i: usize, j: usize| i * (m + 1) + j;
    for i in 1..=n {
        for j in 1..=m {
            let mut cell = best[at(i - 1, j)];
            let left = best[at(i, j - 1)];
            if left.0 > cell.0 || (left.0 == cell.0 && left.1 > cell.1) {
                cell = left;
            }
            let d = (u[i - 1] - r[j - 1]).abs();
            if d <= tolerance {
                let w = 1.0 - (d / tolerance).powi(2);
                let diag = best[at(i - 1, j - 1)];
                let paired = (diag.0 + w, diag.1 + 1);
                if paired.0 > cell.0 || (paired.0 == cell.0 && paired.1 > cell.1) {
                    cell = paired;
                }
            }
            best[at(i, j)] = cell;
        }
    }
    let (weight, pairs) = best[at(n, m)];
    (weight / (n + m - pairs) as f64).clamp(0.0, 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fractions() {
        let o = peak_overlap(
            &[1000.0, 1600.0, 1715.0],
            &[1003.0, 1712.0, 2950.0, 3300.0],
            6.0,
        );
        assert_eq!(o.matched, 2);
        assert_eq!(
            (o.forward, o.reverse, o.jaccard),
            (2.0 / 3.0, 0.5, 2.0 / 5.0)
        );
    }

    #[test]
    fn shift_match_weights_by_distance() {
        // Exact agreement: the plain Jaccard index, 2 / (3 + 2 - 2).
        assert!((shift_match(&[20.0, 30.0, 170.0], &[20.0, 30.0], 1.0) - 2.0 / 3.0).abs() < 1e-12);
        // Half the tolerance away counts 1 - 0.25 = 0.75; at the tolerance, 0.
        assert!((shift_match(&[20.5], &[20.0], 1.0) - 0.75).abs() < 1e-12);
        assert_eq!(shift_match(&[21.0], &[20.0], 1.0), 0.0);
        assert_eq!(shift_match(&[21.5], &[20.0], 1.0), 0.0);
        // The heavier pairing wins: 20.9 pairs with 21.0 (w 0.99), not with 20.0 (w 0.19).
        let s = shift_match(&[20.9], &[20.0, 21.0], 1.0);
        assert!((s - 0.99 / 2.0).abs() < 1e-9, "{s}");
        // Symmetric.
        let (a, b) = ([12.1, 45.3, 77.0, 128.4], [12.0, 45.9, 128.0, 200.0]);
        assert!((shift_match(&a, &b, 1.0) - shift_match(&b, &a, 1.0)).abs() < 1e-12);
        assert_eq!(shift_match(&[], &[1.0], 1.0), 0.0);
    }

    #[test]
    fn one_to_one_not_many_to_one() {
        // Two unknown peaks near one reference peak match it only once.
        let o = peak_overlap(&[100.0, 101.0], &[100.5], 1.0);
        assert_eq!(o.matched, 1);
        assert_eq!(peak_overlap(&[], &[], 1.0).jaccard, 0.0);
    }
}
