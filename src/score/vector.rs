//! Whole-vector measures.

/// Cosine similarity: the dot product of the two vectors divided by the product of their
/// Euclidean norms (for L2-normalised vectors, 1 - d^2/2 with d their Euclidean distance).
/// Accumulates in f64; 0 when either vector is all zero.
pub fn cosine(a: &[f32], b: &[f32]) -> f64 {
    let (mut ab, mut aa, mut bb) = (0f64, 0f64, 0f64);
    for (&x, &y) in a.iter().zip(b) {
        let (x, y) = (f64::from(x), f64::from(y));
        ab += x * y;
        aa += x * x;
        bb += y * y;
    }
    if aa == 0.0 || bb == 0.0 {
        0.0
    } else {
        ab / (aa.sqrt() * bb.sqrt())
    }
}

/// Pearson's correlation coefficient r over the bins where `active` is true (all bins when
/// `None`); 0 when either side is constant. Scale- and offset-free.
pub fn pearson(a: &[f32], b: &[f32], active: Option<&[bool]>) -> f64 {
    let use_bin = |i: &usize| active.is_none_or(|m| m[*i]);
    pearson_pairs(
        (0..a.len().min(b.len()))
            .filter(use_bin)
            .map(|i| (f64::from(a[i]), f64::from(b[i]))),
    )
}

/// Pearson's r of paired values, accumulated in f64 about the means; 0 with fewer than two
/// pairs or when either side is constant.
pub(crate) fn pearson_pairs(pairs: impl Iterator<Item = (f64, f64)> + Clone) -> f64 {
    let (mut n, mut sa, mut sb) = (0f64, 0f64, 0f64);
    for (x, y) in pairs.clone() {
        n += 1.0;
        sa += x;
        sb += y;
    }
    if n < 2.0 {
        return 0.0;
    }
    let (ma, mb) = (sa / n, sb / n);
    let (mut ab, mut aa, mut bb) = (0f64, 0f64, 0f64);
    for (x, y) in pairs {
        let (x, y) = (x - ma, y - mb);
        ab += x * y;
        aa += x * x;
        bb += y * y;
    }
    if aa == 0.0 || bb == 0.0 {
        0.0
    } else {
        (ab / (aa.sqrt() * bb.sqrt())).clamp(-1.0, 1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn textbook_values() {
        // cos of 45 degrees between (1, 0) and (1, 1) is 1/sqrt(2) (common practice).
        assert!((cosine(&[1.0, 0.0], &[1.0, 1.0]) - std::f64::consts::FRAC_1_SQRT_2).abs() < 1e-12);
        // Perfectly anti-correlated and perfectly correlated series (definition of r).
        assert!((pearson(&[1.0, 2.0, 3.0], &[3.0, 2.0, 1.0], None) + 1.0).abs() < 1e-12);
        assert!((pearson(&[1.0, 2.0, 3.0], &[10.0, 20.0, 30.0], None) - 1.0).abs() < 1e-12);
        assert_eq!(cosine(&[0.0, 0.0], &[1.0, 1.0]), 0.0);
        assert_eq!(pearson(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0], None), 0.0);
    }

    #[test]
    fn inactive_bins_are_ignored() {
        let mask = [true, true, true, false];
        assert!(
            (pearson(
                &[1.0, 2.0, 3.0, 100.0],
                &[2.0, 4.0, 6.0, -50.0],
                Some(&mask)
            ) - 1.0)
                .abs()
                < 1e-12
        );
    }
}
