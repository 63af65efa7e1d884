//! Masses and counting rules of a formula: average, monoisotopic and nominal mass, the index
//! of hydrogen deficiency and the nitrogen rule.

use serde::Serialize;

use super::elements::resolve;
use super::formula::Formula;
use super::isotopes::{IsotopePeak, isotope_pattern, reach_below};
use crate::error::Result;

/// The average molar mass in g/mol: the sum of standard atomic weights, CIAAW 2021 (for
/// elements whose standard atomic weight is an interval, IUPAC/CIAAW's conventional value,
/// e.g. H 1.008, C 12.011, Cl 35.45; see [`super::elements::CIAAW_2021_WEIGHTS`]).
pub fn average_mass(formula: &Formula) -> Result<f64> {
    Ok(resolve(formula)?
        .iter()
        .map(|(e, n)| e.atomic_weight * *n as f64)
        .sum())
}

/// The monoisotopic mass in u: every atom as its element's most abundant isotope, with AME2016
/// atomic masses (Wang et al., Chinese Physics C 41 (2017) 030003).
pub fn monoisotopic_mass(formula: &Formula) -> Result<f64> {
    Ok(resolve(formula)?
        .iter()
        .map(|(e, n)| e.most_abundant().mass * *n as f64)
        .sum())
}

/// The nominal mass: the sum of the mass numbers of each element's most abundant isotope
/// (common practice; 11B, 80Se and 7Li rather than the lightest isotopes).
pub fn nominal_mass(formula: &Formula) -> Result<u64> {
    Ok(resolve(formula)?
        .iter()
        .map(|(e, n)| u64::from(e.most_abundant().mass_number) * n)
        .sum())
}

/// The index of hydrogen deficiency (rings plus double bonds), IHD = C - (H + X)/2 + N/2 + 1
/// (common practice), generalised as 1 + sum of n(v - 2)/2 over the atoms with the valences of
/// [`super::elements::IHD_VALENCE`]: halogens and alkali metals count like H, trivalent P, As,
/// B and Al like N, tetravalent Si like C, and divalent O, S, Se, Mg and Ca not at all.
///
/// A half-integer result means the formula cannot be an even-electron neutral molecule (a
/// radical, or an ion such as the even-electron cation CH3+ with IHD 0.5); a negative one means
/// no structure with these valences exists.
pub fn ihd(formula: &Formula) -> Result<f64> {
    let twice: i64 = resolve(formula)?
        .iter()
        .map(|(e, n)| (i64::from(e.valence) - 2) * *n as i64)
        .sum();
    Ok(1.0 + twice as f64 / 2.0)
}

/// What the nitrogen rule says about a formula.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct NitrogenRule {
    /// Number of nitrogen atoms.
    pub nitrogens: u64,
    /// "even" or "odd".
    pub nominal_mass_parity: &'static str,
    /// True when the parity of the nominal mass equals the parity of the nitrogen count, as it
    /// must for an even-electron neutral molecule.
    pub consistent: bool,
}

/// The nitrogen rule (common practice): an even-electron neutral molecule has an odd nominal
/// mass exactly when it has an odd number of nitrogen atoms. It holds because every other
/// element whorl covers has a most abundant isotope whose mass number has the parity of its
/// valence (a unit test checks this), so for these elements an inconsistent formula is exactly
/// one with a half-integer [`ihd`].
pub fn nitrogen_rule(formula: &Formula) -> Result<NitrogenRule> {
    let nominal = nominal_mass(formula)?;
    let nitrogens = u64::from(formula.count("N"));
    Ok(NitrogenRule {
        nitrogens,
        nominal_mass_parity: if nominal % 2 == 0 { "even" } else { "odd" },
        consistent: nominal % 2 == nitrogens % 2,
    })
}

/// Everything `whorl formula` reports about one formula.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FormulaSummary {
    /// The formula in Hill order.
    pub formula: String,
    /// Average molar mass, g/mol (CIAAW 2021 weights), rounded to 0.000001.
    pub average_mass: f64,
    /// Elements of the formula whose weight is CIAAW's conventional value for an interval.
    pub conventional_weights: Vec<String>,
    /// Monoisotopic mass, u (AME2016), rounded to 0.000001.
    pub monoisotopic_mass: f64,
    /// Nominal mass.
    pub nominal_mass: u64,
    /// Rings plus double bonds.
    pub ihd: f64,
    /// The nitrogen rule.
    pub nitrogen_rule: NitrogenRule,
    /// The predicted isotope pattern relative to M = 100: shifts 0, 1 and 2, preceded by any
    /// lighter isotopologues (shift below 0) of at least 0.01 % of M, as boron, lithium or
    /// selenium give.
    pub isotopes: Vec<IsotopePeak>,
}

/// Rounds to a number of decimals, for printing and JSON.
pub(crate) fn round_to(x: f64, decimals: i32) -> f64 {
    let f = 10f64.powi(decimals);
    (x * f).round() / f
}

/// Lighter isotopologues below this share of M (percent) are not reported.
const MIN_LIGHTER_RELATIVE: f64 = 0.01;

/// Computes the [`FormulaSummary`] of a formula.
pub fn summarize(formula: &Formula) -> Result<FormulaSummary> {
    let elements = resolve(formula)?;
    let pattern = isotope_pattern(formula, -reach_below(formula)?, 2)?;
    let isotopes = pattern
        .into_iter()
        .filter(|p| p.shift >= 0 || p.relative >= MIN_LIGHTER_RELATIVE)
        .map(|p| IsotopePeak {
            shift: p.shift,
            relative: round_to(p.relative, 4),
        })
        .collect();
    Ok(FormulaSummary {
        formula: formula.to_string(),
        average_mass: round_to(average_mass(formula)?, 6),
        conventional_weights: elements
            .iter()
            .filter(|(e, _)| e.conventional)
            .map(|(e, _)| e.symbol.to_string())
            .collect(),
        monoisotopic_mass: round_to(monoisotopic_mass(formula)?, 6),
        nominal_mass: nominal_mass(formula)?,
        ihd: ihd(formula)?,
        nitrogen_rule: nitrogen_rule(formula)?,
        isotopes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::chem::parse_formula;

    fn f(text: &str) -> Formula {
        parse_formula(text).unwrap()
    }

    #[test]
    fn ihd_of_common_rings_and_chains() {
        // Common practice: benzene 4 (one ring, three C=C), cyclohexene 2, hexane 0.
        assert_eq!(ihd(&f("C6H6")).unwrap(), 4.0);
        assert_eq!(ihd(&f("C6H10")).unwrap(), 2.0);
        assert_eq!(ihd(&f("C6H14")).unwrap(), 0.0);
        // Pyridine C5H5N: 4 (N counts +1/2); chlorobenzene C6H5Cl: 4 (Cl counts like H);
        // acetone C3H6O: 1 (O ignored) (common practice).
        assert_eq!(ihd(&f("C5H5N")).unwrap(), 4.0);
        assert_eq!(ihd(&f("C6H5Cl")).unwrap(), 4.0);
        assert_eq!(ihd(&f("C3H6O")).unwrap(), 1.0);
        // Trimethylphosphine C3H9P: 0 (P like N); tetramethylsilane C4H12Si: 0 (Si like C)
        // (common practice).
        assert_eq!(ihd(&f("C3H9P")).unwrap(), 0.0);
        assert_eq!(ihd(&f("C4H12Si")).unwrap(), 0.0);
        // The methyl cation CH3+ has IHD 0.5, as every even-electron cation's is a half-integer.
        assert_eq!(ihd(&f("CH3")).unwrap(), 0.5);
    }

    #[test]
    fn nitrogen_rule_parities() {
        // Common practice: pyridine C5H5N, nominal mass 79 (odd), one N; benzene C6H6, 78 (even).
        let pyridine = nitrogen_rule(&f("C5H5N")).unwrap();
        assert_eq!(nominal_mass(&f("C5H5N")).unwrap(), 79);
        assert_eq!(pyridine.nominal_mass_parity, "odd");
        assert_eq!(pyridine.nitrogens, 1);
        assert!(pyridine.consistent);
        let benzene = nitrogen_rule(&f("C6H6")).unwrap();
        assert_eq!(nominal_mass(&f("C6H6")).unwrap(), 78);
        assert_eq!(benzene.nominal_mass_parity, "even");
        assert!(benzene.consistent);
        // The ethyl radical C2H5 (29, no N) cannot be an even-electron neutral molecule.
        assert!(!nitrogen_rule(&f("C2H5")).unwrap().consistent);
    }

    #[test]
    fn masses_of_known_compounds() {
        // Caffeine C8H10N4O2: monoisotopic mass 194.0803755792 (molmass 2026.1.8 at
        // test-writing time). Average mass with CIAAW 2021 conventional weights:
        // 8(12.011) + 10(1.008) + 4(14.007) + 2(15.999) = 194.194 (arithmetic).
        let caffeine = f("C8H10N4O2");
        assert!((monoisotopic_mass(&caffeine).unwrap() - 194.0803755792).abs() < 1e-8);
        assert!((average_mass(&caffeine).unwrap() - 194.194).abs() < 1e-9);
        assert_eq!(nominal_mass(&caffeine).unwrap(), 194);
        // Bromine's nominal mass uses 79Br: CH3Br is 94 (common practice).
        assert_eq!(nominal_mass(&f("CH3Br")).unwrap(), 94);
    }

    #[test]
    fn summary_rounds_and_names_conventional_weights() {
        let s = summarize(&f("ClCH3")).unwrap();
        assert_eq!(s.formula, "CH3Cl");
        assert_eq!(s.conventional_weights, ["C", "Cl", "H"]);
        assert_eq!(s.isotopes[0].shift, 0);
        assert_eq!(s.isotopes[0].relative, 100.0);
        assert_eq!(s.isotopes.len(), 3);
        // Boron adds a lighter isotopologue: 10B at 0.199/0.801 = 24.84 % of 11B (IUPAC 2009).
        let b = summarize(&f("BF3")).unwrap();
        assert_eq!(b.isotopes[0].shift, -1);
        assert!((b.isotopes[0].relative - 24.8439).abs() < 1e-3);
    }

    #[test]
    fn unknown_elements_fail_by_name() {
        let err = summarize(&f("C2H6Hg")).unwrap_err();
        assert!(err.to_string().contains("Hg"), "{err}");
    }
}
