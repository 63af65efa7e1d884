//! Gas-chromatographic retention indices.

use crate::error::{Error, Result};

/// The linear retention index of a peak eluting at `t` between two n-alkanes, given as
/// `(carbon number, retention time)`:
///
/// I = 100 [n + (N - n) (t - t_n) / (t_N - t_n)]
///
/// van den Dool, H.; Kratz, P. D. "A generalization of the retention index system including
/// linear temperature programmed gas-liquid partition chromatography", J. Chromatogr. 1963,
/// 11, 463-471. The paper brackets the peak with consecutive alkanes (N = n + 1); the same
/// interpolation serves any two alkanes, with less accuracy the further apart they are.
/// Times may be in any one unit. `t` must lie between the two alkanes (inclusive).
pub fn linear_retention_index(t: f64, lower: (u32, f64), upper: (u32, f64)) -> Result<f64> {
    let ((n, tn), (big_n, t_big)) = (lower, upper);
    if !(big_n > n && t_big > tn && tn.is_finite() && t_big.is_finite() && t.is_finite()) {
        return Err(Error::invalid(
            format!("alkanes C{n} at {tn} and C{big_n} at {t_big} do not bracket anything"),
            "give the smaller alkane first, with the earlier retention time",
        ));
    }
    if t < tn || t > t_big {
        return Err(Error::invalid(
            format!("retention time {t} lies outside C{n} ({tn}) .. C{big_n} ({t_big})"),
            "run alkanes that elute before and after the peak; the index is not extrapolated",
        ));
    }
    let span = f64::from(big_n - n);
    Ok(100.0 * (f64::from(n) + span * (t - tn) / (t_big - tn)))
}

/// The linear retention index of a peak at `t` from a series of n-alkane retention times
/// `(carbon number, time)` in any order: the two alkanes adjacent in elution order that
/// bracket `t` are used ([`linear_retention_index`]).
pub fn retention_index(t: f64, alkanes: &[(u32, f64)]) -> Result<f64> {
    let mut sorted = alkanes.to_vec();
    sorted.sort_by(|a, b| a.1.total_cmp(&b.1));
    for w in sorted.windows(2) {
        if w[1].0 <= w[0].0 {
            return Err(Error::invalid(
                format!(
                    "C{} elutes at {} but C{} at {}: longer alkanes must elute later",
                    w[0].0, w[0].1, w[1].0, w[1].1
                ),
                "check the alkane carbon numbers and times",
            ));
        }
    }
    match sorted.windows(2).find(|w| t >= w[0].1 && t <= w[1].1) {
        Some(w) => linear_retention_index(t, w[0], w[1]),
        None => Err(Error::invalid(
            format!(
                "retention time {t} is outside the alkane series ({} alkanes given)",
                sorted.len()
            ),
            "give alkanes that elute before and after the peak, e.g. --alkanes 9:8.20,10:10.60",
        )),
    }
}

/// Reads an alkane series written as `9:8.20,10:10.60` or `C9=8.20,C10=10.60`.
pub fn parse_alkanes(text: &str) -> Result<Vec<(u32, f64)>> {
    let bad = |part: &str| {
        Error::invalid(
            format!("'{part}' is not an alkane retention time"),
            "write carbon number and time pairs, e.g. 9:8.20,10:10.60 (C9 at 8.20 min, C10 at 10.60 min)",
        )
    };
    let mut out = Vec::new();
    for part in text.split(',').map(str::trim).filter(|p| !p.is_empty()) {
        let (c, t) = part.split_once([':', '=']).ok_or_else(|| bad(part))?;
        let c = c.trim().trim_start_matches(['C', 'c']);
        let n: u32 = c.parse().map_err(|_| bad(part))?;
        let t: f64 = t.trim().parse().map_err(|_| bad(part))?;
        if n == 0 || !t.is_finite() {
            return Err(bad(part));
        }
        out.push((n, t));
    }
    if out.len() < 2 {
        return Err(bad(text));
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn worked_example_by_hand() {
        // Worked by hand from van den Dool & Kratz 1963's formula: C9 elutes at 8.20 min,
        // C10 at 10.60 min, the peak at 9.82 min.
        // I = 100 * (9 + (9.82 - 8.20) / (10.60 - 8.20)) = 100 * (9 + 1.62 / 2.40)
        //   = 100 * (9 + 0.675) = 967.5
        let i = linear_retention_index(9.82, (9, 8.20), (10, 10.60)).unwrap();
        assert!((i - 967.5).abs() < 1e-9, "{i}");
        // An alkane itself has the index 100 n.
        assert_eq!(
            linear_retention_index(8.20, (9, 8.20), (10, 10.60)).unwrap(),
            900.0
        );
        // Non-consecutive alkanes: C8 at 6.0, C10 at 10.0, peak at 7.0:
        // 100 * (8 + 2 * 1.0 / 4.0) = 850.
        assert_eq!(
            linear_retention_index(7.0, (8, 6.0), (10, 10.0)).unwrap(),
            850.0
        );
    }

    #[test]
    fn a_series_picks_the_bracketing_pair() {
        let series = parse_alkanes("C10=10.60, C9=8.20, 11:12.85").unwrap();
        let i = retention_index(9.82, &series).unwrap();
        assert!((i - 967.5).abs() < 1e-9);
        // 100 * (10 + (11.5 - 10.60) / (12.85 - 10.60)) = 100 * (10 + 0.9 / 2.25) = 1040.
        assert!((retention_index(11.5, &series).unwrap() - 1040.0).abs() < 1e-9);
        assert!(retention_index(13.0, &series).is_err());
        assert!(retention_index(9.0, &[(10, 8.0), (9, 10.0)]).is_err());
        assert!(parse_alkanes("9:8.2").is_err());
        assert!(parse_alkanes("nine:8.2,10:9").is_err());
    }
}
