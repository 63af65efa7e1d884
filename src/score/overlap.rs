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
    shift_match_costed(unknown, &full_cost(reference), tolerance, false).0
}

fn full_cost(reference: &[f64]) -> Vec<(f64, f64)> {
    reference.iter().map(|&x| (x, 1.0)).collect()
}

/// How much each reference line counts against a match when the unknown lacks it, from the
/// reference's line heights: min(1, height / median height).
///
/// Carbons without attached hydrogen give weak lines in a broadband-decoupled 13C spectrum
/// (no NOE enhancement from attached protons, long relaxation times), and they are the lines
/// a measured list most often lacks (common practice). A line the reference itself records
/// as weak is therefore weaker evidence against a match when it is missing than a line of
/// typical height: it costs its height relative to the median line, at most 1. A list
/// without intensities (all heights equal) costs 1 per line, the plain shift match.
pub fn weak_line_costs(heights: &[f64]) -> Vec<f64> {
    let mut sorted: Vec<f64> = heights.iter().map(|h| h.abs()).collect();
    sorted.sort_by(f64::total_cmp);
    let n = sorted.len();
    if n == 0 {
        return Vec::new();
    }
    let median = if n % 2 == 1 {
        sorted[n / 2]
    } else {
        (sorted[n / 2 - 1] + sorted[n / 2]) / 2.0
    };
    heights
        .iter()
        .map(|h| {
            if median > 0.0 {
                (h.abs() / median).min(1.0)
            } else {
                1.0
            }
        })
        .collect()
}

/// [`shift_match`] after removing a common referencing offset of the unknown's shifts.
///
/// A 13C list referenced differently from the library (TMS against a solvent line, or a
/// solvent line taken at another value) has all its shifts moved by the same few tenths of
/// a ppm (common practice). The offset is estimated from the unknown itself: the mean of the
/// differences (unknown - reference) of the pairs of the plain shift match, which is the
/// least-squares estimate of a common offset. It is estimated only from two or more pairs
/// (with one pair an offset cannot be told apart from a compound whose line lies elsewhere,
/// and removing it would make every single-line match perfect), the unknown is moved by it
/// and matched again, and the better of the two scores is kept, so the correction never
/// lowers a score. Returns the score and the offset removed (0 when none was). Swapping the
/// two lists changes the offset's sign, not the score.
pub fn shift_match_referenced(unknown: &[f64], reference: &[f64], tolerance: f64) -> (f64, f64) {
    shift_match_costed(unknown, &full_cost(reference), tolerance, true)
}

/// The shift match of `unknown` against reference lines `(shift, cost)`, where a reference
/// line the pairing leaves out adds its cost (see [`weak_line_costs`]) to the denominator
/// instead of 1: W / (N_U + sum of the unpaired reference lines' costs), which is
/// [`shift_match`] when every cost is 1. With `referencing`, as [`shift_match_referenced`].
/// Returns the score and the offset removed.
pub fn shift_match_costed(
    unknown: &[f64],
    reference: &[(f64, f64)],
    tolerance: f64,
    referencing: bool,
) -> (f64, f64) {
    let mut u = unknown.to_vec();
    let mut r = reference.to_vec();
    u.sort_by(f64::total_cmp);
    r.sort_by(|a, b| a.0.total_cmp(&b.0));
    let Some(plain) = best_pairing(&u, &r, tolerance) else {
        return (0.0, 0.0);
    };
    if !referencing || plain.differences.len() < 2 {
        return (plain.score, 0.0);
    }
    let offset = plain.differences.iter().sum::<f64>() / plain.differences.len() as f64;
    let moved: Vec<f64> = u.iter().map(|x| x - offset).collect();
    match best_pairing(&moved, &r, tolerance) {
        Some(c) if c.score > plain.score => (c.score, offset),
        _ => (plain.score, 0.0),
    }
}

/// The heaviest non-crossing pairing of two sorted lists (see [`shift_match`]).
struct Pairing {
    /// W / (N_U + the costs of the unpaired reference lines), W / (N_U + N_R - k) when
    /// every cost is 1.
    score: f64,
    /// unknown - reference of every pair, ascending.
    differences: Vec<f64>,
}

fn best_pairing(u: &[f64], r: &[(f64, f64)], tolerance: f64) -> Option<Pairing> {
    let (n, m) = (u.len(), r.len());
    if n == 0 || m == 0 || tolerance <= 0.0 {
        return None;
    }
    // best[i][j] = (total weight, pairs) over the first i unknown and j reference peaks;
    // step[i][j] says which move reached it (0: skip an unknown peak, 1: skip a reference
    // peak, 2: pair the two), for recovering the pairs.
    let mut best = vec![(0.0f64, 0usize); (n + 1) * (m + 1)];
    let mut step = vec![0u8; (n + 1) * (m + 1)];
    let at = |i: usize, j: usize| i * (m + 1) + j;
    for i in 1..=n {
        for j in 1..=m {
            let mut cell = best[at(i - 1, j)];
            let mut how = 0;
            let left = best[at(i, j - 1)];
            if left.0 > cell.0 || (left.0 == cell.0 && left.1 > cell.1) {
                cell = left;
                how = 1;
            }
            let d = (u[i - 1] - r[j - 1].0).abs();
            if d <= tolerance {
                let w = 1.0 - (d / tolerance).powi(2);
                let diag = best[at(i - 1, j - 1)];
                let paired = (diag.0 + w, diag.1 + 1);
                if paired.0 > cell.0 || (paired.0 == cell.0 && paired.1 > cell.1) {
                    cell = paired;
                    how = 2;
                }
            }
            best[at(i, j)] = cell;
            step[at(i, j)] = how;
        }
    }
    let (weight, pairs) = best[at(n, m)];
    let mut differences = Vec::with_capacity(pairs);
    let mut unpaired_cost: f64 = r.iter().map(|l| l.1).sum();
    let (mut i, mut j) = (n, m);
    while i > 0 && j > 0 {
        match step[at(i, j)] {
            2 => {
                differences.push(u[i - 1] - r[j - 1].0);
                unpaired_cost -= r[j - 1].1;
                i -= 1;
                j -= 1;
            }
            1 => j -= 1,
            _ => i -= 1,
        }
    }
    differences.reverse();
    // N_U + N_R - k with every cost 1.
    let denominator = n as f64 + unpaired_cost.max(0.0);
    Some(Pairing {
        score: (weight / denominator).clamp(0.0, 1.0),
        differences,
    })
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

    #[test]
    fn referencing_correction_hand_worked() {
        // Worked by hand (the correction is whorl's own, described in its doc comment).
        // Unknown 20.5, 30.5, 170.0 against reference 20.0, 30.0, tolerance 1:
        //   plain: pairs (20.5, 20.0) and (30.5, 30.0), each w = 1 - 0.5^2 = 0.75; 170.0 unpaired.
        //          score = (0.75 + 0.75) / (3 + 2 - 2) = 0.5
        //   offset = mean(0.5, 0.5) = 0.5; moved unknown 20.0, 30.0, 169.5: both pairs w = 1,
        //          score = 2 / 3 = 0.6667 > 0.5, so it is kept with the offset 0.5.
        let (s, off) = shift_match_referenced(&[20.5, 30.5, 170.0], &[20.0, 30.0], 1.0);
        assert!((shift_match(&[20.5, 30.5, 170.0], &[20.0, 30.0], 1.0) - 0.5).abs() < 1e-12);
        assert!((s - 2.0 / 3.0).abs() < 1e-12, "{s}");
        assert!((off - 0.5).abs() < 1e-12, "{off}");
        // Offsets that disagree: 20.4 vs 20.0 (+0.4), 29.6 vs 30.0 (-0.4). Mean 0: the moved
        // list is the same list, no better, so the plain score stays with offset 0:
        //   w = 1 - 0.16 = 0.84 each, score = 1.68 / (2 + 2 - 2) = 0.84.
        let (s, off) = shift_match_referenced(&[20.4, 29.6], &[20.0, 30.0], 1.0);
        assert!((s - 0.84).abs() < 1e-12 && off.abs() < 1e-9, "{s} {off}");
        // One pair only: no offset is estimated (0.6 away: 1 - 0.36 = 0.64, over 1 + 1 - 1).
        let (s, off) = shift_match_referenced(&[67.8], &[67.2], 1.0);
        assert!((s - 0.64).abs() < 1e-12 && off == 0.0, "{s} {off}");
        assert_eq!(shift_match_referenced(&[], &[1.0], 1.0), (0.0, 0.0));
    }

    #[test]
    fn weak_line_discount_hand_worked() {
        // Worked by hand (the discount is whorl's own, described in weak_line_costs).
        // Heights 1, 0.5, 0.3, 1 (sorted 0.3, 0.5, 1, 1): median (0.5 + 1) / 2 = 0.75;
        // costs min(1, h / 0.75) = 1, 0.6667, 0.4, 1.
        let c = weak_line_costs(&[1.0, 0.5, 0.3, 1.0]);
        let want = [1.0, 0.5 / 0.75, 0.3 / 0.75, 1.0];
        assert!(
            c.iter().zip(want).all(|(a, b)| (a - b).abs() < 1e-12),
            "{c:?}"
        );
        assert_eq!(weak_line_costs(&[1.0, 1.0, 1.0]), [1.0, 1.0, 1.0]);
        // Unknown 20.0, 30.0 against 20.0 (cost 1), 30.0 (cost 1), 140.0 (cost 0.3), all
        // pairs exact: W = 2, denominator N_U + unpaired cost = 2 + 0.3, score 2 / 2.3;
        // without the discount 2 / (2 + 3 - 2) = 2 / 3.
        let r = [(20.0, 1.0), (30.0, 1.0), (140.0, 0.3)];
        let (s, _) = shift_match_costed(&[30.0, 20.0], &r, 1.0, false);
        assert!((s - 2.0 / 2.3).abs() < 1e-12, "{s}");
        assert!((shift_match(&[20.0, 30.0], &[20.0, 30.0, 140.0], 1.0) - 2.0 / 3.0).abs() < 1e-12);
        // A missing strong line costs in full: 20.0, 140.0 against the same list pairs two
        // (W = 2) and leaves 30.0 (cost 1) out: 2 / (2 + 1).
        let (s, _) = shift_match_costed(&[20.0, 140.0], &r, 1.0, false);
        assert!((s - 2.0 / 3.0).abs() < 1e-12, "{s}");
    }
}
