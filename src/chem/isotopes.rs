//! The isotope pattern of a formula at unit resolution, by convolution over isotopes.

use serde::Serialize;

use super::elements::resolve;
use super::formula::Formula;
use crate::error::Result;

/// One peak of a predicted isotope pattern.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct IsotopePeak {
    /// Nominal mass shift from M, the isotopologue of the most abundant isotopes.
    pub shift: i64,
    /// Abundance relative to M = 100.
    pub relative: f64,
}

/// A probability distribution over nominal shifts `lo, lo+1, ...`.
#[derive(Debug, Clone)]
struct Shifts {
    lo: i64,
    p: Vec<f64>,
}

impl Shifts {
    fn unit() -> Shifts {
        Shifts {
            lo: 0,
            p: vec![1.0],
        }
    }

    /// The product of two distributions (a convolution), keeping only shifts up to `max`, and
    /// scaled so that its largest kept value is 1 (only ratios matter, and scaling keeps large
    /// atom counts from underflowing).
    fn times(&self, other: &Shifts, max: i64) -> Shifts {
        let lo = self.lo + other.lo;
        let len =
            (self.p.len() + other.p.len() - 1).min(usize::try_from(max - lo + 1).unwrap_or(0));
        let mut p = vec![0.0; len.max(1)];
        for (i, &a) in self.p.iter().enumerate() {
            if a == 0.0 {
                continue;
            }
            for (j, &b) in other.p.iter().enumerate() {
                if let Some(slot) = p.get_mut(i + j) {
                    *slot += a * b;
                }
            }
        }
        let top = p.iter().copied().fold(0.0, f64::max);
        if top > 0.0 {
            p.iter_mut().for_each(|v| *v /= top);
        }
        Shifts { lo, p }
    }

    /// This distribution to the power `n`, by repeated squaring, truncated at `max`.
    fn power(&self, mut n: u64, max: i64) -> Shifts {
        let mut result = Shifts::unit();
        let mut base = self.clone();
        while n > 0 {
            if n & 1 == 1 {
                result = result.times(&base, max);
            }
            n >>= 1;
            if n > 0 {
                base = base.times(&base, max);
            }
        }
        result
    }

    fn at(&self, shift: i64) -> f64 {
        usize::try_from(shift - self.lo)
            .ok()
            .and_then(|i| self.p.get(i))
            .copied()
            .unwrap_or(0.0)
    }
}

/// How far below M the lighter isotopes of a formula can reach (1 for one boron, 12 for two
/// seleniums): the lowest shift of its isotope pattern, negated.
pub fn reach_below(formula: &Formula) -> Result<i64> {
    Ok(resolve(formula)?
        .iter()
        .map(|(e, n)| -e.shift_range().0 * *n as i64)
        .sum())
}

/// The unit-resolution isotope pattern of a formula for nominal shifts `lo..=hi` from M (the
/// isotopologue made of each element's most abundant isotope), relative to M = 100, from the
/// IUPAC 2009 representative isotopic compositions (Berglund & Wieser, Pure Appl. Chem. 83
/// (2011) 397).
///
/// Computed exactly, as the product of one polynomial per element raised to that element's
/// atom count, sum over isotopes of abundance x z^(A - A_most abundant), then the coefficients
/// grouped by shift; nothing is approximated by a closed formula such as 1.1 % per carbon.
/// Shifts above `hi` are dropped as soon as no lighter isotope left in the formula could bring
/// them back into range, so the work stays small for any atom count.
pub fn isotope_pattern(formula: &Formula, lo: i64, hi: i64) -> Result<Vec<IsotopePeak>> {
    let elements = resolve(formula)?;
    // A partial product above `hi + reach_below` can never come back into range.
    let max = hi + reach_below(formula)?;
    let mut total = Shifts::unit();
    for (e, n) in &elements {
        let (first, last) = e.shift_range();
        let top = i64::from(e.most_abundant().mass_number);
        let mut p = vec![0.0; usize::try_from(last - first + 1).unwrap_or(1)];
        for i in &e.isotopes {
            let at = i64::from(i.mass_number) - top - first;
            p[usize::try_from(at).unwrap_or(0)] += i.abundance;
        }
        let one = Shifts { lo: first, p };
        total = total.times(&one.power(*n, max), max);
    }
    let m = total.at(0);
    Ok((lo..=hi)
        .map(|shift| IsotopePeak {
            shift,
            relative: if m > 0.0 {
                100.0 * total.at(shift) / m
            } else {
                0.0
            },
        })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::chem::parse_formula;

    fn pattern(text: &str, lo: i64, hi: i64) -> Vec<f64> {
        isotope_pattern(&parse_formula(text).unwrap(), lo, hi)
            .unwrap()
            .iter()
            .map(|p| p.relative)
            .collect()
    }

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn two_isotope_elements_follow_the_binomial() {
        // One element with two isotopes gives binomial coefficients (arithmetic):
        // Cl2: M+2/M = 2 r, M+4/M = r^2 with r = 0.2424/0.7576 (IUPAC 2009 abundances).
        let r = 0.2424 / 0.7576;
        let p = pattern("Cl2", 0, 4);
        assert!(close(p[1], 0.0, 1e-12));
        assert!(close(p[2], 200.0 * r, 1e-9));
        assert!(close(p[4], 100.0 * r * r, 1e-9));
        // C6: M+1/M = 6 q, M+2/M = 15 q^2 with q = 0.0107/0.9893.
        let q = 0.0107 / 0.9893;
        let p = pattern("C6", 0, 2);
        assert!(close(p[1], 600.0 * q, 1e-9));
        assert!(close(p[2], 1500.0 * q * q, 1e-9));
    }

    #[test]
    fn patterns_of_known_compounds() {
        // Dichloromethane CH2Cl2: two chlorines give about 100 : 65 : 10 (common practice);
        // molmass 2026.1.8 at test-writing time: M+1 1.1046, M+2 63.9918, M+4 10.2375.
        let p = pattern("CH2Cl2", 0, 4);
        assert!(close(p[1], 1.1046, 1e-3), "{p:?}");
        assert!(close(p[2], 63.9918, 1e-3), "{p:?}");
        assert!(close(p[4], 10.2375, 1e-3), "{p:?}");
        // Bromobenzene C6H5Br: M+2 nearly equal to M, 79Br : 81Br about 1 : 1 (common
        // practice); molmass at test-writing time: M+1 6.5469, M+2 97.4568.
        let p = pattern("C6H5Br", 0, 2);
        assert!(close(p[1], 6.5469, 1e-3), "{p:?}");
        assert!(close(p[2], 97.4568, 1e-3), "{p:?}");
        // Toluene C7H8: molmass at test-writing time: M+1 7.6630, M+2 0.2527.
        let p = pattern("C7H8", 0, 2);
        assert!(close(p[1], 7.6630, 1e-3), "{p:?}");
        assert!(close(p[2], 0.2527, 1e-3), "{p:?}");
    }

    #[test]
    fn atom_by_atom_convolution_agrees() {
        // An independent, naive check: multiply in one atom at a time, no truncation.
        let formula = parse_formula("C12H9SSeBCl2").unwrap();
        let elements = resolve(&formula).unwrap();
        let mut dist: std::collections::BTreeMap<i64, f64> = [(0, 1.0)].into();
        for (e, n) in &elements {
            let top = i64::from(e.most_abundant().mass_number);
            for _ in 0..*n {
                let mut next = std::collections::BTreeMap::new();
                for (&s, &p) in &dist {
                    for i in &e.isotopes {
                        *next
                            .entry(s + i64::from(i.mass_number) - top)
                            .or_insert(0.0) += p * i.abundance;
                    }
                }
                dist = next;
            }
        }
        let fast = isotope_pattern(&formula, -7, 4).unwrap();
        for peak in fast {
            let naive = 100.0 * dist.get(&peak.shift).copied().unwrap_or(0.0) / dist[&0];
            assert!(
                (peak.relative - naive).abs() <= 1e-9 * naive.max(1.0),
                "shift {}: {} vs {naive}",
                peak.shift,
                peak.relative
            );
        }
    }

    #[test]
    fn huge_counts_stay_finite() {
        let p = pattern("C100000H200000", 0, 2);
        assert!(p.iter().all(|v| v.is_finite() && *v > 0.0), "{p:?}");
    }
}
