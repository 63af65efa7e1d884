//! Non-negative least squares: the non-negative combination of given columns closest to a
//! target, for fitting an unknown as a mixture of references.

/// The solution of a non-negative least-squares problem.
#[derive(Debug, Clone, PartialEq)]
pub struct Nnls {
    /// The coefficients, one per column, each >= 0.
    pub x: Vec<f64>,
    /// The Euclidean norm of the residual, |b - A x|.
    pub residual_norm: f64,
    /// Outer iterations taken (columns moved into the passive set).
    pub iterations: usize,
    /// False when the iteration limit stopped the solver first; `x` is then feasible
    /// (non-negative) but may not be optimal.
    pub converged: bool,
}

/// Solves min |A x - b| subject to x >= 0, where A's columns are `columns` (each as long as
/// `b`), by the active-set algorithm of C. L. Lawson and R. J. Hanson, *Solving Least Squares
/// Problems*, Prentice-Hall 1974, chapter 23 (algorithm NNLS).
///
/// The columns are split into a passive set P (free to be positive) and an active set Z (held
/// at zero). Each outer iteration moves into P the column of Z whose dual value
/// w = A^T (b - A x) is largest and positive; the inner loop solves the unconstrained
/// least-squares problem on P (Householder QR here) and, while that solution has a component
/// <= 0, steps from x towards it as far as feasibility allows and moves the columns that reach
/// zero back to Z. It stops when no column of Z has w_j above the tolerance
/// 10 eps |A|_1 max(m, n) (the tolerance MATLAB's `lsqnonneg` uses, from memory), which is the
/// Kuhn-Tucker condition of the problem: x >= 0, w_j <= 0 where x_j = 0, w_j = 0 where
/// x_j > 0. As in the book, a column whose own coefficient comes out <= 0 right after it
/// entered P (possible only through rounding) is set aside until another column enters.
///
/// The outer iterations are limited to 3 n (SciPy's default for `scipy.optimize.nnls`);
/// [`Nnls::converged`] says whether the limit was reached first. Accumulates in f64.
///
/// # Panics
///
/// When a column's length differs from `b`'s.
pub fn nnls<C: AsRef<[f64]>>(columns: &[C], b: &[f64]) -> Nnls {
    let n = columns.len();
    let m = b.len();
    let cols: Vec<&[f64]> = columns.iter().map(|c| c.as_ref()).collect();
    for (j, c) in cols.iter().enumerate() {
        assert_eq!(c.len(), m, "column {j} has {} rows, b has {m}", c.len());
    }
    let norm1 = cols
        .iter()
        .map(|c| c.iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0, f64::max);
    let tol = 10.0 * f64::EPSILON * norm1 * m.max(n) as f64;
    let mut x = vec![0.0; n];
    let mut passive = vec![false; n];
    let mut set_aside = vec![false; n];
    let max_iter = 3 * n;
    let mut iterations = 0;
    let mut converged = true;
    loop {
        let w = dual(&cols, b, &x);
        let entering = (0..n)
            .filter(|&j| !passive[j] && !set_aside[j] && w[j] > tol)
            .max_by(|&a, &c| w[a].total_cmp(&w[c]).then(c.cmp(&a)));
        let Some(t) = entering else { break };
        if iterations == max_iter {
            converged = false;
            break;
        }
        iterations += 1;
        passive[t] = true;
        let mut first = true;
        loop {
            let p: Vec<usize> = (0..n).filter(|&j| passive[j]).collect();
            let sub: Vec<&[f64]> = p.iter().map(|&j| cols[j]).collect();
            let s = least_squares(&sub, b);
            if s.iter().all(|&v| v > 0.0) {
                for (&j, &v) in p.iter().zip(&s) {
                    x[j] = v;
                }
                set_aside.iter_mut().for_each(|a| *a = false);
                break;
            }
            let t_at = p.iter().position(|&j| j == t);
            if first && t_at.is_some_and(|k| s[k] <= 0.0) {
                // Rounding made the entering column's coefficient non-positive, although its
                // dual value was positive: leave x as it was and try another column.
                passive[t] = false;
                set_aside[t] = true;
                break;
            }
            first = false;
            // The longest step from x towards s that keeps every coefficient >= 0; the
            // column that sets it, and any other that reaches zero, go back to Z.
            let (alpha, stop) = p
                .iter()
                .zip(&s)
                .filter(|&(_, &v)| v <= 0.0)
                .map(|(&j, &v)| (x[j] / (x[j] - v), j))
                .fold((f64::INFINITY, t), |a, b| if b.0 < a.0 { b } else { a });
            for (&j, &v) in p.iter().zip(&s) {
                x[j] += alpha * (v - x[j]);
            }
            x[stop] = 0.0;
            for &j in &p {
                if x[j] <= 0.0 {
                    x[j] = 0.0;
                    passive[j] = false;
                }
            }
            if !passive.iter().any(|&q| q) {
                break;
            }
        }
    }
    let residual_norm = residual(&cols, b, &x)
        .iter()
        .map(|r| r * r)
        .sum::<f64>()
        .sqrt();
    Nnls {
        x,
        residual_norm,
        iterations,
        converged,
    }
}

/// b - A x.
fn residual(cols: &[&[f64]], b: &[f64], x: &[f64]) -> Vec<f64> {
    let mut r = b.to_vec();
    for (c, &xj) in cols.iter().zip(x) {
        if xj != 0.0 {
            for (ri, &a) in r.iter_mut().zip(c.iter()) {
                *ri -= xj * a;
            }
        }
    }
    r
}

/// The dual vector w = A^T (b - A x), the negative gradient of |A x - b|^2 / 2.
pub(crate) fn dual(cols: &[&[f64]], b: &[f64], x: &[f64]) -> Vec<f64> {
    let r = residual(cols, b, x);
    cols.iter()
        .map(|c| c.iter().zip(&r).map(|(a, r)| a * r).sum())
        .collect()
}

/// The unconstrained least-squares solution of A s = b for A's `cols` (independent), by
/// Householder QR: A = QR, s = R^-1 Q^T b. A column that is numerically dependent on the ones
/// before it gets coefficient 0.
fn least_squares(cols: &[&[f64]], b: &[f64]) -> Vec<f64> {
    let k = cols.len();
    let m = b.len();
    let mut a: Vec<Vec<f64>> = cols.iter().map(|c| c.to_vec()).collect();
    let mut rhs = b.to_vec();
    let scale = a
        .iter()
        .map(|c| c.iter().map(|v| v * v).sum::<f64>().sqrt())
        .fold(0.0, f64::max);
    let mut diag = vec![0.0; k];
    for j in 0..k.min(m) {
        let norm = a[j][j..].iter().map(|v| v * v).sum::<f64>().sqrt();
        if norm == 0.0 {
            continue;
        }
        // v = a_j[j..] + sign(a_jj) |a_j[j..]| e_1, H = I - 2 v v^T / v^T v.
        let alpha = if a[j][j] >= 0.0 { -norm } else { norm };
        let mut v = a[j][j..].to_vec();
        v[0] -= alpha;
        let vv: f64 = v.iter().map(|x| x * x).sum();
        diag[j] = alpha;
        if vv == 0.0 {
            continue;
        }
        let reflect = |col: &mut [f64]| {
            let d: f64 = col.iter().zip(&v).map(|(c, v)| c * v).sum();
            let f = 2.0 * d / vv;
            for (c, v) in col.iter_mut().zip(&v) {
                *c -= f * v;
            }
        };
        for col in a.iter_mut().skip(j + 1) {
            reflect(&mut col[j..]);
        }
        reflect(&mut rhs[j..]);
    }
    // Back substitution on R (diagonal in `diag`, above it in a[l][j], j < l).
    let mut s = vec![0.0; k];
    for j in (0..k.min(m)).rev() {
        if diag[j].abs() <= 1e3 * f64::EPSILON * scale {
            continue;
        }
        let mut v = rhs[j];
        for l in j + 1..k {
            v -= a[l][j] * s[l];
        }
        s[j] = v / diag[j];
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn an_exact_non_negative_combination_is_recovered() {
        // Worked by hand: b = 2 a1 + 3 a2 with a1 = (1, 0, 1), a2 = (0, 1, 1) gives
        // b = (2, 3, 5), and the residual is zero.
        let a = [vec![1.0, 0.0, 1.0], vec![0.0, 1.0, 1.0]];
        let r = nnls(&a, &[2.0, 3.0, 5.0]);
        assert!(
            close(r.x[0], 2.0, 1e-12) && close(r.x[1], 3.0, 1e-12),
            "{r:?}"
        );
        assert!(r.residual_norm < 1e-12);
        assert!(r.converged);
    }

    #[test]
    fn a_negative_unconstrained_coefficient_is_held_at_zero() {
        // Worked by hand: a1 = (1, 0), a2 = (1, 1), b = (2, -1). Unconstrained, b = 3 a1 - a2;
        // with x >= 0, a2 is held at 0 and x1 = a1.b / a1.a1 = 2, residual (0, -1), norm 1.
        // Check the alternative by hand: a2 alone gives x2 = 1/2, residual (1.5, -1.5),
        // norm 2.12, worse.
        let a = [vec![1.0, 0.0], vec![1.0, 1.0]];
        let r = nnls(&a, &[2.0, -1.0]);
        assert_eq!(r.x[1], 0.0);
        assert!(close(r.x[0], 2.0, 1e-12), "{r:?}");
        assert!(close(r.residual_norm, 1.0, 1e-12));
    }

    #[test]
    fn a_target_opposite_to_every_column_gives_zero() {
        // Worked by hand: every a_j . b < 0, so w <= 0 at x = 0 and x = 0 is optimal.
        let a = [vec![1.0, 0.0], vec![0.0, 1.0]];
        let r = nnls(&a, &[-1.0, -2.0]);
        assert_eq!(r.x, vec![0.0, 0.0]);
        assert_eq!(r.iterations, 0);
        assert!(close(r.residual_norm, 5f64.sqrt(), 1e-12));
    }

    #[test]
    fn a_column_that_enters_and_leaves_is_handled() {
        // Worked by hand: a1 = (1, 0, 0), a2 = (1, 1, 0), a3 = (0, 1, 1), b = (1, 2, -1).
        // At x = 0, w = A^T b = (1, 3, 1): a2 enters, x2 = a2.b / a2.a2 = 3/2. Then
        // w = A^T (b - 1.5 a2) = A^T (-0.5, 0.5, -1) = (-0.5, 0, -0.5): optimal, x = (0, 1.5, 0),
        // residual norm sqrt(0.25 + 0.25 + 1) = sqrt(1.5).
        let a = [
            vec![1.0, 0.0, 0.0],
            vec![1.0, 1.0, 0.0],
            vec![0.0, 1.0, 1.0],
        ];
        let r = nnls(&a, &[1.0, 2.0, -1.0]);
        assert_eq!(r.x[0], 0.0);
        assert_eq!(r.x[2], 0.0);
        assert!(close(r.x[1], 1.5, 1e-12), "{r:?}");
        assert!(close(r.residual_norm, 1.5f64.sqrt(), 1e-12));
    }

    #[test]
    fn the_inner_loop_steps_back_to_feasibility() {
        // Worked by hand: a1 = (1, 0), a2 = (0, 1), a3 = (2, 2), b = (-0.2, 1).
        // At x = 0, w = A^T b = (-0.2, 1, 1.6): a3 enters, x3 = 1.6 / 8 = 0.2, residual
        // (-0.6, 0.6), w = (-0.6, 0.6, 0): a2 enters. Unconstrained on {a3, a2}: 2 s3 = -0.2,
        // s3 = -0.1 < 0, s2 = 1.2. Step alpha = 0.2 / (0.2 + 0.1) = 2/3 to x3 = 0, x2 = 0.8; a3
        // leaves, a2 alone gives 1. Then w = A^T (-0.2, 0) = (-0.2, 0, -0.4): optimal,
        // x = (0, 1, 0), residual norm 0.2.
        let a = [vec![1.0, 0.0], vec![0.0, 1.0], vec![2.0, 2.0]];
        let r = nnls(&a, &[-0.2, 1.0]);
        assert!(
            r.x[0] == 0.0 && r.x[2] == 0.0 && close(r.x[1], 1.0, 1e-12),
            "{r:?}"
        );
        assert!(close(r.residual_norm, 0.2, 1e-12));
        assert_eq!(r.iterations, 2);
        // And b = (2.1, 2) = 0.1 a1 + a3 needs two columns without a step back.
        let r = nnls(&a, &[2.1, 2.0]);
        assert!(
            close(r.x[0], 0.1, 1e-9) && close(r.x[2], 1.0, 1e-9) && r.x[1] == 0.0,
            "{r:?}"
        );
    }

    #[test]
    fn no_columns_or_zero_columns_give_zero() {
        let none: [Vec<f64>; 0] = [];
        let r = nnls(&none, &[3.0, 4.0]);
        assert!(r.x.is_empty() && close(r.residual_norm, 5.0, 1e-12));
        let r = nnls(&[vec![0.0, 0.0]], &[3.0, 4.0]);
        assert_eq!(r.x, vec![0.0]);
    }

    #[test]
    fn repeated_columns_share_without_going_negative() {
        // Two equal columns: any split of the coefficient is optimal; both stay >= 0 and the
        // fit is exact.
        let a = [
            vec![1.0, 2.0, 0.0],
            vec![1.0, 2.0, 0.0],
            vec![0.0, 0.0, 1.0],
        ];
        let r = nnls(&a, &[2.0, 4.0, 1.0]);
        assert!(r.x.iter().all(|&v| v >= 0.0));
        assert!(close(r.x[0] + r.x[1], 2.0, 1e-9) && close(r.x[2], 1.0, 1e-9));
        assert!(r.residual_norm < 1e-9);
    }

    #[test]
    fn least_squares_solves_an_overdetermined_system() {
        // Worked by hand: the line through (0, 1), (1, 2), (2, 4) by least squares:
        // A = [1 0; 1 1; 1 2], normal equations [3 3; 3 5] s = (7, 10), s = (5/6, 3/2).
        let s = least_squares(&[&[1.0, 1.0, 1.0], &[0.0, 1.0, 2.0]], &[1.0, 2.0, 4.0]);
        assert!(
            close(s[0], 5.0 / 6.0, 1e-12) && close(s[1], 1.5, 1e-12),
            "{s:?}"
        );
    }

    fn problem() -> impl Strategy<Value = (Vec<Vec<f64>>, Vec<f64>)> {
        (1usize..12, 1usize..7).prop_flat_map(|(m, n)| {
            (
                prop::collection::vec(prop::collection::vec(-5.0f64..5.0, m), n),
                prop::collection::vec(-5.0f64..5.0, m),
            )
        })
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(400))]

        #[test]
        fn the_solution_meets_the_kuhn_tucker_conditions((a, b) in problem()) {
            // Lawson & Hanson 1974, ch. 23, theorem 23.4 (the conditions at a solution):
            // x >= 0; w = A^T (b - A x) <= 0 where x_j = 0; w = 0 where x_j > 0.
            let r = nnls(&a, &b);
            prop_assert!(r.converged);
            let cols: Vec<&[f64]> = a.iter().map(|c| c.as_slice()).collect();
            let w = dual(&cols, &b, &r.x);
            let scale = 1e-8 * (1.0 + b.iter().map(|v| v.abs()).sum::<f64>())
                * (1.0 + a.iter().flatten().map(|v| v.abs()).fold(0.0, f64::max));
            for (j, (&xj, &wj)) in r.x.iter().zip(&w).enumerate() {
                prop_assert!(xj >= 0.0, "x{} = {}", j, xj);
                if xj > 0.0 {
                    prop_assert!(wj.abs() <= scale, "w{} = {} with x{} = {}", j, wj, j, xj);
                } else {
                    prop_assert!(wj <= scale, "w{} = {} with x{} = 0", j, wj, j);
                }
            }
        }

        #[test]
        fn the_fit_is_never_worse_than_one_column_alone((a, b) in problem()) {
            // For one column, the best c >= 0 is max(0, a.b / a.a) (calculus); the joint fit
            // includes every such choice, so its residual can be no larger.
            let r = nnls(&a, &b);
            for col in &a {
                let aa: f64 = col.iter().map(|v| v * v).sum();
                let ab: f64 = col.iter().zip(&b).map(|(x, y)| x * y).sum();
                let c = if aa > 0.0 { (ab / aa).max(0.0) } else { 0.0 };
                let single: f64 = col.iter().zip(&b).map(|(x, y)| (y - c * x).powi(2)).sum::<f64>().sqrt();
                prop_assert!(r.residual_norm <= single + 1e-9 * (1.0 + single), "{} > {}", r.residual_norm, single);
            }
            let zero = b.iter().map(|v| v * v).sum::<f64>().sqrt();
            prop_assert!(r.residual_norm <= zero + 1e-12);
        }

        #[test]
        fn an_exact_positive_mixture_is_recovered(
            m in 8usize..30,
            seed_cols in prop::collection::vec(prop::collection::vec(0.0f64..1.0, 30), 2..4),
            coef in prop::collection::vec(0.1f64..3.0, 3),
        ) {
            // Non-negative, generic columns (more rows than columns: independent almost
            // surely) and positive coefficients: the mixture itself is the unique solution.
            let a: Vec<Vec<f64>> = seed_cols.iter().map(|c| c[..m].to_vec()).collect();
            let mut b = vec![0.0; m];
            for (c, &k) in a.iter().zip(&coef) {
                for (bi, &v) in b.iter_mut().zip(c) {
                    *bi += k * v;
                }
            }
            let r = nnls(&a, &b);
            prop_assert!(r.residual_norm < 1e-8);
            let gram_ok = least_squares(&a.iter().map(|c| c.as_slice()).collect::<Vec<_>>(), &b)
                .iter().zip(&coef).all(|(s, k)| (s - k).abs() < 1e-6);
            if gram_ok {
                for (x, k) in r.x.iter().zip(&coef) {
                    prop_assert!((x - k).abs() < 1e-6, "{:?} vs {:?}", r.x, coef);
                }
            }
        }
    }
}
