//! The weighted composite score for EI mass spectra.

use serde::{Deserialize, Serialize};

/// Parameters of the Stein & Scott composite score.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CompositeParams {
    /// Exponent of the abundance in the peak weight (default 0.6).
    pub intensity_exponent: f64,
    /// Exponent of m/z in the peak weight (default 3).
    pub mass_exponent: f64,
    /// Reverse search: only m/z present in the reference count, so that extra ions in the
    /// unknown (co-elution, background) do not lower the score. Reverse search is
    /// Abramson's: F. P. Abramson, "Automated identification of mass spectra by the reverse
    /// search", Anal. Chem. 1975, 47, 45-49 (from memory). Its known weakness: a reference
    /// whose few ions are all present in the unknown (for example a co-eluting compound's)
    /// matches perfectly; the peak-overlap Jaccard in the combined score, which counts the
    /// unknown's unmatched ions, is what holds such a reference back.
    ///
    /// The default since the evaluation (docs/evaluation.md): with a 15 % co-eluting
    /// contaminant, forward search with the (m/z)^3 weight lets the contaminant's heavier
    /// ions dominate. Results saved with forward search record `reverse: false` and replay
    /// as forward searches.
    pub reverse: bool,
}

impl Default for CompositeParams {
    fn default() -> CompositeParams {
        CompositeParams {
            intensity_exponent: 0.6,
            mass_exponent: 3.0,
            reverse: true,
        }
    }
}

/// The terms of the composite score.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Composite {
    /// The weighted dot-product term F_D (a squared cosine of the weighted spectra).
    pub dot: f64,
    /// The ratio-of-adjacent-peaks term F_R.
    pub ratio: f64,
    /// (N_U F_D + N_common F_R) / (N_U + N_common).
    pub composite: f64,
    /// Peaks of the unknown taken into account (N_U).
    pub unknown_peaks: usize,
    /// Peaks present in both (N_common).
    pub common_peaks: usize,
}

/// Stein & Scott composite score: Stein, S. E.; Scott, D. R. "Optimization and Testing of
/// Mass Spectral Library Search Algorithms for Compound Identification", J. Am. Soc. Mass
/// Spectrom. 1994, 5, 859-866.
///
/// Each peak is weighted W = I^m (m/z)^n. F_D = (sum W_U W_L)^2 / (sum W_U^2 sum W_L^2) over
/// all m/z. F_R averages, over adjacent pairs of common peaks, the ratio
/// (W_L,i W_U,i-1 / (W_L,i-1 W_U,i))^k, with k = +-1 chosen so each ratio is at most 1.
/// Composite = (N_U F_D + N_common F_R) / (N_U + N_common). Peaks are `(m/z, abundance)`.
///
/// One deliberate difference from the paper: the paper divides the sum of the N_common - 1
/// ratios by N_common, so that even a spectrum compared with itself scores below 1. We divide
/// by the number of ratios summed, so identical spectra score exactly 1, and with fewer than
/// two common peaks (no ratio to take) the composite is F_D alone.
pub fn stein_scott(
    unknown: &[(f64, f64)],
    reference: &[(f64, f64)],
    params: &CompositeParams,
) -> Composite {
    let weight = |&(mz, i): &(f64, f64)| {
        i.max(0.0).powf(params.intensity_exponent) * mz.powf(params.mass_exponent)
    };
    let mut u: Vec<(f64, f64)> = unknown
        .iter()
        .filter(|p| p.1 > 0.0)
        .map(|p| (p.0, weight(p)))
        .collect();
    let mut r: Vec<(f64, f64)> = reference
        .iter()
        .filter(|p| p.1 > 0.0)
        .map(|p| (p.0, weight(p)))
        .collect();
    u.sort_by(|a, b| a.0.total_cmp(&b.0));
    r.sort_by(|a, b| a.0.total_cmp(&b.0));
    if params.reverse {
        u.retain(|p| r.iter().any(|q| q.0 == p.0));
    }

    let (mut uu, mut rr) = (0f64, 0f64);
    for p in &u {
        uu += p.1 * p.1;
    }
    for q in &r {
        rr += q.1 * q.1;
    }
    let mut common: Vec<(f64, f64)> = Vec::new(); // (W_U, W_L) at shared m/z, ascending
    let (mut i, mut j) = (0, 0);
    while i < u.len() && j < r.len() {
        match u[i].0.total_cmp(&r[j].0) {
            std::cmp::Ordering::Equal => {
                common.push((u[i].1, r[j].1));
                i += 1;
                j += 1;
            }
            std::cmp::Ordering::Less => i += 1,
            std::cmp::Ordering::Greater => j += 1,
        }
    }
    let ur: f64 = common.iter().map(|&(a, b)| a * b).sum();
    let dot = if uu > 0.0 && rr > 0.0 {
        (ur * ur / (uu * rr)).clamp(0.0, 1.0)
    } else {
        0.0
    };
    if common.len() < 2 {
        return Composite {
            dot,
            ratio: 0.0,
            composite: dot,
            unknown_peaks: u.len(),
            common_peaks: common.len(),
        };
    }
    let ratio = {
        let sum: f64 = common
            .windows(2)
            .map(|w| {
                let q = (w[1].1 * w[0].0) / (w[0].1 * w[1].0);
                if q <= 1.0 { q } else { 1.0 / q }
            })
            .sum();
        sum / (common.len() - 1) as f64
    };
    let (nu, nc) = (u.len() as f64, common.len() as f64);
    let composite = ((nu * dot + nc * ratio) / (nu + nc)).clamp(0.0, 1.0);
    Composite {
        dot,
        ratio,
        composite,
        unknown_peaks: u.len(),
        common_peaks: common.len(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The composite with the default exponents, in forward search.
    const FORWARD: CompositeParams = CompositeParams {
        intensity_exponent: 0.6,
        mass_exponent: 3.0,
        reverse: false,
    };

    #[test]
    fn identical_spectra_score_near_one() {
        let s = [(15.0, 10.0), (43.0, 100.0), (58.0, 30.0)];
        let c = stein_scott(&s, &s, &FORWARD);
        assert!((c.dot - 1.0).abs() < 1e-12);
        // Every adjacent ratio is 1, so F_R = 1 and the composite is 1 (see the doc comment
        // for how the normalisation differs from the paper's).
        assert!((c.ratio - 1.0).abs() < 1e-12);
        assert!((c.composite - 1.0).abs() < 1e-12);
    }

    #[test]
    fn hand_worked_example_with_the_default_exponents() {
        // Worked by hand from Stein & Scott 1994's definitions, weights I^0.6 (m/z)^3.
        // Intensities 1, 32, 243 have 0.6th powers 1, 8, 27 (2^5^0.6 = 2^3, 3^5^0.6 = 3^3);
        // m/z 10, 20, 30 have cubes 1000, 8000, 27000. Weights divided by 1000 (every term
        // is a ratio, so a common factor cancels):
        //   unknown   m/z 10: I 32 -> 8 x 1 = 8;  m/z 20: I 1 -> 1 x 8 = 8;   m/z 30: I 243 -> 27 x 27 = 729
        //   reference m/z 10: I 1  -> 1 x 1 = 1;  m/z 20: I 32 -> 8 x 8 = 64; m/z 30: I 243 -> 729
        // F_D = (8x1 + 8x64 + 729x729)^2 / ((8^2 + 8^2 + 729^2)(1^2 + 64^2 + 729^2))
        //     = 531961^2 / (531569 x 535538) = 282982505521 / 284675399122 = 0.9940532...
        // F_R: pairs (10, 20): (64 x 8) / (1 x 8) = 64 -> 1/64; (20, 30): (729 x 8) / (64 x 729)
        //      = 1/8; mean over the two ratios (see stein_scott's doc) = (1/64 + 1/8) / 2 = 0.0703125
        // composite = (N_U F_D + N_common F_R) / (N_U + N_common) = (3 F_D + 3 F_R) / 6
        //           = (0.9940532 + 0.0703125) / 2 = 0.5321829
        let unknown = [(10.0, 32.0), (20.0, 1.0), (30.0, 243.0)];
        let reference = [(10.0, 1.0), (20.0, 32.0), (30.0, 243.0)];
        let c = stein_scott(&unknown, &reference, &FORWARD);
        assert!(
            (c.dot - 282_982_505_521.0 / 284_675_399_122.0).abs() < 1e-12,
            "{c:?}"
        );
        assert!((c.ratio - 0.0703125).abs() < 1e-12, "{c:?}");
        assert!((c.composite - 0.532_182_874_7).abs() < 1e-9, "{c:?}");
        assert_eq!((c.unknown_peaks, c.common_peaks), (3, 3));
    }

    #[test]
    fn reverse_search_ignores_extra_ions_in_the_unknown() {
        let reference = [(43.0, 100.0), (58.0, 30.0)];
        let unknown = [(43.0, 100.0), (58.0, 30.0), (207.0, 40.0)];
        let fwd = stein_scott(&unknown, &reference, &FORWARD);
        let rev = stein_scott(&unknown, &reference, &CompositeParams::default());
        assert!(fwd.dot < 0.5, "{fwd:?}");
        assert!((rev.dot - 1.0).abs() < 1e-12);
    }

    #[test]
    fn weights_follow_the_exponents() {
        // With m = 1, n = 0 the dot term is the squared plain cosine: (1*1 + 0)^2 / (2 * 1) = 0.5.
        let p = CompositeParams {
            intensity_exponent: 1.0,
            mass_exponent: 0.0,
            reverse: false,
        };
        let c = stein_scott(&[(10.0, 1.0), (20.0, 1.0)], &[(10.0, 1.0)], &p);
        assert!((c.dot - 0.5).abs() < 1e-12);
    }

    #[test]
    fn hand_worked_reverse_example_with_the_default_exponents() {
        // Worked by hand from Stein & Scott 1994's definitions and Abramson 1975's reverse
        // search (only the reference's m/z count), weights I^0.6 (m/z)^3 divided by 1000:
        //   reference m/z 10: I 1  -> 1 x 1 = 1;   m/z 20: I 32 -> 8 x 8 = 64
        //   unknown   m/z 10: I 32 -> 8 x 1 = 8;   m/z 20: I 1  -> 1 x 8 = 8;
        //             m/z 30: I 243 -> 27 x 27 = 729 (not in the reference: left out)
        // Reverse: F_D = (8x1 + 8x64)^2 / ((8^2 + 8^2)(1^2 + 64^2)) = 520^2 / (128 x 4097)
        //              = 270400 / 524416 = 0.5156170...
        //          F_R: one pair (10, 20): (64 x 8) / (1 x 8) = 64 -> 1/64 = 0.015625
        //          composite = (2 F_D + 2 F_R) / 4 = (0.5156170 + 0.015625) / 2 = 0.2656210
        // Forward keeps m/z 30 in the unknown: F_D = 520^2 / ((128 + 531441) x 4097)
        //          = 270400 / 2177838193 = 0.000124160..., composite (3 F_D + 2 F_R) / 5.
        let unknown = [(10.0, 32.0), (20.0, 1.0), (30.0, 243.0)];
        let reference = [(10.0, 1.0), (20.0, 32.0)];
        let rev = stein_scott(&unknown, &reference, &CompositeParams::default());
        assert!((rev.dot - 270_400.0 / 524_416.0).abs() < 1e-12, "{rev:?}");
        assert!((rev.ratio - 0.015625).abs() < 1e-12, "{rev:?}");
        assert!(
            (rev.composite - (270_400.0 / 524_416.0 + 0.015625) / 2.0).abs() < 1e-12,
            "{rev:?}"
        );
        assert_eq!((rev.unknown_peaks, rev.common_peaks), (2, 2));
        let fwd = stein_scott(&unknown, &reference, &FORWARD);
        let fd = 270_400.0 / 2_177_838_193.0;
        assert!((fwd.dot - fd).abs() < 1e-15, "{fwd:?}");
        assert!(
            (fwd.composite - (3.0 * fd + 2.0 * 0.015625) / 5.0).abs() < 1e-12,
            "{fwd:?}"
        );
    }
}
