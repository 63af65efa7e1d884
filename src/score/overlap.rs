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
    fn one_to_one_not_many_to_one() {
        // Two unknown peaks near one reference peak match it only once.
        let o = peak_overlap(&[100.0, 101.0], &[100.5], 1.0);
        assert_eq!(o.matched, 1);
        assert_eq!(peak_overlap(&[], &[], 1.0).jaccard, 0.0);
    }
}
