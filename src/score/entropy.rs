//! Spectral entropy similarity for EI mass spectra.
//!
//! Y. Li, T. Kind, J. Folz, A. Vaniya, S. S. Mehta and O. Fiehn, "Spectral entropy outperforms
//! MS/MS dot product similarity for small-molecule compound identification", Nature Methods
//! 18 (2021) 1524-1531.
//!
//! Each spectrum's intensities are scaled to sum 1 (a probability distribution over its
//! ions) and its Shannon entropy S = -sum p ln p taken. A spectrum with S below 3 has its
//! intensities raised to the power 0.25 + 0.25 S and scaled to sum 1 again (the paper's
//! "weighted" entropy: few dominant ions are flattened, many ions are left alone). The
//! similarity of A and B is 1 - (2 S_AB - S_A - S_B) / ln 4, where S_AB is the entropy of the
//! merged spectrum (A + B) / 2; it lies in 0..1, 1 for identical spectra and 0 for spectra
//! without a common ion.
//!
//! Expanding the entropies, every ion that only one spectrum has cancels out, and the
//! similarity is a sum over the common ions alone:
//! sum over common m/z of [(a + b) ln(a + b) - a ln a - b ln b] / ln 4. [`common_term`] is
//! that term; the cached scan sums it through the inverted index, exactly as this module does.

use std::f64::consts::LN_2;

/// The entropy below which intensities are reweighted, and the exponent's intercept and
/// slope: 0.25 + 0.25 S (Li et al. 2021).
const WEIGHT_BELOW: f64 = 3.0;
const WEIGHT_INTERCEPT: f64 = 0.25;
const WEIGHT_SLOPE: f64 = 0.25;

/// Shannon entropy (natural logarithm) of intensities that sum to 1; zeros contribute 0.
pub fn spectral_entropy(p: &[f64]) -> f64 {
    p.iter().filter(|&&x| x > 0.0).map(|&x| -x * x.ln()).sum()
}

/// The weighted probabilities of one spectrum's intensities (any scale; zeros and negative
/// values count as absent): scaled to sum 1, reweighted by 0.25 + 0.25 S when the entropy S
/// is below 3, scaled to sum 1 again. All zeros when nothing is positive.
pub fn entropy_weights(intensities: &[f64]) -> Vec<f64> {
    let scaled = |v: &[f64]| -> Vec<f64> {
        let total: f64 = v.iter().filter(|&&x| x > 0.0).sum();
        v.iter()
            .map(|&x| {
                if x > 0.0 && total > 0.0 {
                    x / total
                } else {
                    0.0
                }
            })
            .collect()
    };
    let p = scaled(intensities);
    let s = spectral_entropy(&p);
    if s >= WEIGHT_BELOW {
        return p;
    }
    let exponent = WEIGHT_INTERCEPT + WEIGHT_SLOPE * s;
    let reweighted: Vec<f64> = p
        .iter()
        .map(|&x| if x > 0.0 { x.powf(exponent) } else { 0.0 })
        .collect();
    scaled(&reweighted)
}

/// One common ion's share of the similarity, before division by ln 4:
/// (a + b) ln(a + b) - a ln a - b ln b, for weighted probabilities a and b. It is 0 when
/// either is 0, never negative, and at most (a + b) ln 2.
#[inline]
pub fn common_term(a: f64, b: f64) -> f64 {
    if a <= 0.0 || b <= 0.0 {
        return 0.0;
    }
    let s = a + b;
    (s * s.ln() - a * a.ln() - b * b.ln()).max(0.0)
}

/// The denominator of the similarity: ln 4.
pub const LN_4: f64 = 2.0 * LN_2;

/// Entropy similarity of two peak lists `(m/z, intensity)`, matched at equal m/z (the
/// prepared EI peaks sit on nominal masses). Symmetric, in 0..1.
pub fn entropy_similarity(unknown: &[(f64, f64)], reference: &[(f64, f64)]) -> f64 {
    let sorted = |peaks: &[(f64, f64)]| -> (Vec<f64>, Vec<f64>) {
        let mut v: Vec<(f64, f64)> = peaks.iter().copied().filter(|p| p.1 > 0.0).collect();
        v.sort_by(|a, b| a.0.total_cmp(&b.0));
        let xs = v.iter().map(|p| p.0).collect();
        let w = entropy_weights(&v.iter().map(|p| p.1).collect::<Vec<_>>());
        (xs, w)
    };
    let (ux, uw) = sorted(unknown);
    let (rx, rw) = sorted(reference);
    let (mut i, mut j, mut sum) = (0, 0, 0f64);
    while i < ux.len() && j < rx.len() {
        match ux[i].total_cmp(&rx[j]) {
            std::cmp::Ordering::Equal => {
                sum += common_term(uw[i], rw[j]);
                i += 1;
                j += 1;
            }
            std::cmp::Ordering::Less => i += 1,
            std::cmp::Ordering::Greater => j += 1,
        }
    }
    (sum / LN_4).clamp(0.0, 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// The paper's definition, computed the long way: 1 - (2 S_AB - S_A - S_B) / ln 4 over
    /// the union of the m/z (Li et al. 2021, eq. in Methods).
    fn by_definition(a: &[(f64, f64)], b: &[(f64, f64)]) -> f64 {
        let mut mzs: Vec<f64> = a.iter().chain(b).map(|p| p.0).collect();
        mzs.sort_by(f64::total_cmp);
        mzs.dedup();
        let on = |s: &[(f64, f64)]| -> Vec<f64> {
            let v: Vec<f64> = mzs
                .iter()
                .map(|m| s.iter().filter(|p| p.0 == *m).map(|p| p.1).sum())
                .collect();
            entropy_weights(&v)
        };
        let (pa, pb) = (on(a), on(b));
        let merged: Vec<f64> = pa.iter().zip(&pb).map(|(x, y)| (x + y) / 2.0).collect();
        let (sa, sb, sab) = (
            spectral_entropy(&pa),
            spectral_entropy(&pb),
            spectral_entropy(&merged),
        );
        1.0 - (2.0 * sab - sa - sb) / LN_4
    }

    #[test]
    fn identical_spectra_score_one_and_disjoint_ones_zero() {
        let a = [(41.0, 30.0), (43.0, 100.0), (58.0, 12.0)];
        assert!((entropy_similarity(&a, &a) - 1.0).abs() < 1e-12);
        let b = [(44.0, 100.0), (59.0, 5.0)];
        assert_eq!(entropy_similarity(&a, &b), 0.0);
    }

    #[test]
    fn two_equal_ions_against_one_of_them() {
        // Hand-worked: A = {1/2, 1/2} has S = ln 2 < 3, exponent 0.25 + 0.25 ln 2, which keeps
        // two equal intensities equal; B = {1} has S = 0, exponent 0.25, still {1}. The one
        // common ion: (1/2 + 1) ln(3/2) - (1/2) ln(1/2) - 0 = 1.5 ln 1.5 + 0.5 ln 2.
        let a = [(50.0, 7.0), (60.0, 7.0)];
        let b = [(50.0, 3.0)];
        let want = (1.5 * 1.5f64.ln() + 0.5 * 2f64.ln()) / (4f64).ln();
        assert!((entropy_similarity(&a, &b) - want).abs() < 1e-12);
    }

    #[test]
    fn low_entropy_spectra_are_flattened() {
        // Li et al. 2021: below S = 3 the exponent 0.25 + 0.25 S < 1 raises the small ions.
        let w = entropy_weights(&[100.0, 1.0]);
        let plain = 1.0 / 101.0;
        assert!(w[1] > plain, "{} should exceed {plain}", w[1]);
        // At or above S = 3 (here 30 equal ions: S = ln 30 = 3.4) nothing changes.
        let flat = entropy_weights(&[1.0; 30]);
        assert!(flat.iter().all(|&x| (x - 1.0 / 30.0).abs() < 1e-15));
    }

    proptest! {
        #[test]
        fn common_ion_sum_equals_the_definition(
            a in proptest::collection::btree_map(1u16..80, 0.01f64..1000.0, 1..25),
            b in proptest::collection::btree_map(1u16..80, 0.01f64..1000.0, 1..25),
        ) {
            let a: Vec<(f64, f64)> = a.into_iter().map(|(m, y)| (f64::from(m), y)).collect();
            let b: Vec<(f64, f64)> = b.into_iter().map(|(m, y)| (f64::from(m), y)).collect();
            let fast = entropy_similarity(&a, &b);
            let slow = by_definition(&a, &b).clamp(0.0, 1.0);
            prop_assert!((fast - slow).abs() < 1e-9, "{fast} vs {slow}");
            prop_assert!((0.0..=1.0).contains(&fast));
            prop_assert!((fast - entropy_similarity(&b, &a)).abs() < 1e-12);
        }

        #[test]
        fn common_term_is_bounded(a in 0.0f64..1.0, b in 0.0f64..1.0) {
            let t = common_term(a, b);
            prop_assert!(t >= 0.0 && t <= (a + b) * LN_2 + 1e-12);
        }
    }
}
