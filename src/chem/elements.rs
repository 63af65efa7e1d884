//! Element data: one table per published source, joined into [`ElementData`] on first use.
//!
//! whorl covers the elements an analytical lab meets in organic reference compounds and their
//! salts. An element outside these tables is refused by name (see [`element`]) rather than
//! guessed at; adding one means adding a row to each table below from the cited source.

use std::collections::BTreeMap;
use std::sync::OnceLock;

use super::formula::Formula;
use crate::error::{Error, Result};

/// Standard atomic weights, CIAAW 2021: T. Prohaska et al., "Standard atomic weights of the
/// elements 2021 (IUPAC Technical Report)", Pure Appl. Chem. 94 (2022) 573-600.
///
/// For the elements whose standard atomic weight is an interval (H, Li, B, C, N, O, Mg, Si,
/// S, Cl, Br), the value here is the IUPAC/CIAAW *conventional* atomic weight published with
/// that table (for example H 1.008 for the interval [1.00784, 1.00811]); the third column marks
/// those rows. The other values are the standard atomic weights without their uncertainties.
///
/// Transcribed from memory and compared with a public CIAAW-2021-based table; the molar masses
/// they give are compared with the `molmass` package in `scripts/crosscheck_formula.py`, which
/// explains the small systematic differences (molmass uses NIST's single values, not the
/// conventional ones).
pub(crate) const CIAAW_2021_WEIGHTS: &[(&str, f64, Conventional)] = &[
    ("H", 1.008, Conventional::Yes),
    ("Li", 6.94, Conventional::Yes),
    ("B", 10.81, Conventional::Yes),
    ("C", 12.011, Conventional::Yes),
    ("N", 14.007, Conventional::Yes),
    ("O", 15.999, Conventional::Yes),
    ("F", 18.998403162, Conventional::No),
    ("Na", 22.98976928, Conventional::No),
    ("Mg", 24.305, Conventional::Yes),
    ("Al", 26.9815384, Conventional::No),
    ("Si", 28.085, Conventional::Yes),
    ("P", 30.973761998, Conventional::No),
    ("S", 32.06, Conventional::Yes),
    ("Cl", 35.45, Conventional::Yes),
    ("K", 39.0983, Conventional::No),
    ("Ca", 40.078, Conventional::No),
    ("As", 74.921595, Conventional::No),
    ("Se", 78.971, Conventional::No),
    ("Br", 79.904, Conventional::Yes),
    ("I", 126.90447, Conventional::No),
];

/// Whether a weight in [`CIAAW_2021_WEIGHTS`] is a conventional value standing in for an interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Conventional {
    /// The standard atomic weight is an interval; this is CIAAW's conventional value.
    Yes,
    /// The standard atomic weight is a single value (uncertainty not carried).
    No,
}

/// Atomic masses of the stable (and primordial) isotopes, in u, from AME2016: M. Wang,
/// G. Audi, F. G. Kondev, W. J. Huang, S. Naimi and X. Xu, "The AME2016 atomic mass evaluation
/// (II). Tables, graphs and references", Chinese Physics C 41 (2017) 030003.
///
/// Rows are (symbol, mass number, atomic mass). Transcribed from NIST's "Atomic Weights and
/// Isotopic Compositions with Relative Atomic Masses" as shipped in `molmass` 2026.1.8
/// (`molmass/elements.py`), whose masses are the AME2016 values; 12C = 12 exactly by definition
/// of the unified atomic mass unit, and 1H = 1.00782503223 agrees with AME2016 from memory.
pub(crate) const AME2016_MASSES: &[(&str, u32, f64)] = &[
    ("H", 1, 1.00782503223),
    ("H", 2, 2.01410177812),
    ("Li", 6, 6.0151228874),
    ("Li", 7, 7.0160034366),
    ("B", 10, 10.01293695),
    ("B", 11, 11.00930536),
    ("C", 12, 12.0),
    ("C", 13, 13.00335483507),
    ("N", 14, 14.00307400443),
    ("N", 15, 15.00010889888),
    ("O", 16, 15.99491461957),
    ("O", 17, 16.9991317565),
    ("O", 18, 17.99915961286),
    ("F", 19, 18.99840316273),
    ("Na", 23, 22.989769282),
    ("Mg", 24, 23.985041697),
    ("Mg", 25, 24.985836976),
    ("Mg", 26, 25.982592968),
    ("Al", 27, 26.98153853),
    ("Si", 28, 27.97692653465),
    ("Si", 29, 28.9764946649),
    ("Si", 30, 29.973770136),
    ("P", 31, 30.97376199842),
    ("S", 32, 31.9720711744),
    ("S", 33, 32.9714589098),
    ("S", 34, 33.967867004),
    ("S", 36, 35.96708071),
    ("Cl", 35, 34.968852682),
    ("Cl", 37, 36.965902602),
    ("K", 39, 38.9637064864),
    ("K", 40, 39.963998166),
    ("K", 41, 40.9618252579),
    ("Ca", 40, 39.962590863),
    ("Ca", 42, 41.95861783),
    ("Ca", 43, 42.95876644),
    ("Ca", 44, 43.95548156),
    ("Ca", 46, 45.953689),
    ("Ca", 48, 47.95252276),
    ("As", 75, 74.92159457),
    ("Se", 74, 73.922475934),
    ("Se", 76, 75.919213704),
    ("Se", 77, 76.919914154),
    ("Se", 78, 77.91730928),
    ("Se", 80, 79.9165218),
    ("Se", 82, 81.9166995),
    ("Br", 79, 78.9183376),
    ("Br", 81, 80.9162897),
    ("I", 127, 126.9044719),
];

/// Representative isotopic compositions (amount fractions) in normal terrestrial materials,
/// IUPAC 2009: M. Berglund and M. E. Wieser, "Isotopic compositions of the elements 2009
/// (IUPAC Technical Report)", Pure Appl. Chem. 83 (2011) 397-410.
///
/// Rows are (symbol, mass number, fraction); uncertainties are not carried. Transcribed from
/// NIST's table as shipped in `molmass` 2026.1.8, which carries these representative values
/// (for example S 0.9499 / 0.0075 / 0.0425 / 0.0001 and Cl 0.7576 / 0.2424, which are the 2009
/// values, not the 1997 ones). Each element's fractions sum to 1 within rounding (unit test).
pub(crate) const IUPAC_2009_ABUNDANCES: &[(&str, u32, f64)] = &[
    ("H", 1, 0.999885),
    ("H", 2, 0.000115),
    ("Li", 6, 0.0759),
    ("Li", 7, 0.9241),
    ("B", 10, 0.199),
    ("B", 11, 0.801),
    ("C", 12, 0.9893),
    ("C", 13, 0.0107),
    ("N", 14, 0.99636),
    ("N", 15, 0.00364),
    ("O", 16, 0.99757),
    ("O", 17, 0.00038),
    ("O", 18, 0.00205),
    ("F", 19, 1.0),
    ("Na", 23, 1.0),
    ("Mg", 24, 0.7899),
    ("Mg", 25, 0.1),
    ("Mg", 26, 0.1101),
    ("Al", 27, 1.0),
    ("Si", 28, 0.92223),
    ("Si", 29, 0.04685),
    ("Si", 30, 0.03092),
    ("P", 31, 1.0),
    ("S", 32, 0.9499),
    ("S", 33, 0.0075),
    ("S", 34, 0.0425),
    ("S", 36, 0.0001),
    ("Cl", 35, 0.7576),
    ("Cl", 37, 0.2424),
    ("K", 39, 0.932581),
    ("K", 40, 0.000117),
    ("K", 41, 0.067302),
    ("Ca", 40, 0.96941),
    ("Ca", 42, 0.00647),
    ("Ca", 43, 0.00135),
    ("Ca", 44, 0.02086),
    ("Ca", 46, 0.00004),
    ("Ca", 48, 0.00187),
    ("As", 75, 1.0),
    ("Se", 74, 0.0089),
    ("Se", 76, 0.0937),
    ("Se", 77, 0.0763),
    ("Se", 78, 0.2377),
    ("Se", 80, 0.4961),
    ("Se", 82, 0.0873),
    ("Br", 79, 0.5069),
    ("Br", 81, 0.4931),
    ("I", 127, 1.0),
];

/// The valence each element is counted with in the index of hydrogen deficiency (common
/// practice): monovalent like H (H, the halogens, the alkali metals), divalent and so ignored
/// (O, S, Se, Mg, Ca), trivalent like N (N, P, As, B, Al), tetravalent like C (C, Si).
///
/// Sulfur and phosphorus in higher oxidation states (sulfones, phosphates) are still counted as
/// S(II) and P(III), so their S=O and P=O bonds do not add to the index; that is the usual
/// convention, and the reason an IHD is a count of rings plus double bonds "as drawn with the
/// lowest valences".
pub(crate) const IHD_VALENCE: &[(&str, u32)] = &[
    ("H", 1),
    ("Li", 1),
    ("B", 3),
    ("C", 4),
    ("N", 3),
    ("O", 2),
    ("F", 1),
    ("Na", 1),
    ("Mg", 2),
    ("Al", 3),
    ("Si", 4),
    ("P", 3),
    ("S", 2),
    ("Cl", 1),
    ("K", 1),
    ("Ca", 2),
    ("As", 3),
    ("Se", 2),
    ("Br", 1),
    ("I", 1),
];

/// One isotope of an element: mass number, atomic mass (u) and natural amount fraction.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Isotope {
    /// Mass number A.
    pub mass_number: u32,
    /// Atomic mass in u (AME2016).
    pub mass: f64,
    /// Amount fraction in normal terrestrial material (IUPAC 2009).
    pub abundance: f64,
}

/// Everything whorl knows about one element, joined from the tables above.
#[derive(Debug, Clone, PartialEq)]
pub struct ElementData {
    /// Element symbol.
    pub symbol: &'static str,
    /// Standard (or conventional) atomic weight, CIAAW 2021.
    pub atomic_weight: f64,
    /// True when `atomic_weight` is CIAAW's conventional value for an interval.
    pub conventional: bool,
    /// Naturally occurring isotopes, ascending in mass number.
    pub isotopes: Vec<Isotope>,
    /// Valence counted in the IHD.
    pub valence: u32,
}

impl ElementData {
    /// The most abundant isotope, whose mass and mass number give the monoisotopic and
    /// nominal masses.
    pub fn most_abundant(&self) -> &Isotope {
        self.isotopes
            .iter()
            .max_by(|a, b| a.abundance.total_cmp(&b.abundance))
            .expect("every element in the tables has an isotope")
    }

    /// The nominal shifts of the lightest and the heaviest isotope from the most abundant one
    /// (-1 and 0 for boron, -6 and +2 for selenium).
    pub fn shift_range(&self) -> (i64, i64) {
        let top = i64::from(self.most_abundant().mass_number);
        let shifts = self.isotopes.iter().map(|i| i64::from(i.mass_number) - top);
        (shifts.clone().min().unwrap_or(0), shifts.max().unwrap_or(0))
    }
}

fn table() -> &'static BTreeMap<&'static str, ElementData> {
    static TABLE: OnceLock<BTreeMap<&'static str, ElementData>> = OnceLock::new();
    TABLE.get_or_init(|| {
        CIAAW_2021_WEIGHTS
            .iter()
            .map(|&(symbol, atomic_weight, conventional)| {
                let isotopes = IUPAC_2009_ABUNDANCES
                    .iter()
                    .filter(|r| r.0 == symbol)
                    .map(|&(_, mass_number, abundance)| Isotope {
                        mass_number,
                        mass: AME2016_MASSES
                            .iter()
                            .find(|m| m.0 == symbol && m.1 == mass_number)
                            .map(|m| m.2)
                            .unwrap_or(f64::NAN),
                        abundance,
                    })
                    .collect();
                let valence = IHD_VALENCE
                    .iter()
                    .find(|v| v.0 == symbol)
                    .map(|v| v.1)
                    .unwrap_or(0);
                let data = ElementData {
                    symbol,
                    atomic_weight,
                    conventional: conventional == Conventional::Yes,
                    isotopes,
                    valence,
                };
                (symbol, data)
            })
            .collect()
    })
}

/// The symbols whorl has data for, in the order of the tables (by atomic number).
pub fn supported_elements() -> Vec<&'static str> {
    CIAAW_2021_WEIGHTS.iter().map(|r| r.0).collect()
}

/// The data for one element, or an error that names it and says how to proceed.
pub fn element(symbol: &str) -> Result<&'static ElementData> {
    table().get(symbol).ok_or_else(|| {
        Error::invalid(
            format!("whorl has no atomic data for the element {symbol}"),
            format!(
                "the mass and isotope tables cover {}; leave {symbol} out of the formula, or add \
                 it to src/chem/elements.rs (CIAAW 2021 weight, AME2016 isotope masses, IUPAC 2009 \
                 abundances, IHD valence)",
                supported_elements().join(" ")
            ),
        )
    })
}

/// Each element of a formula with its count and its data; fails on the first element without data.
pub(crate) fn resolve(formula: &Formula) -> Result<Vec<(&'static ElementData, u64)>> {
    formula
        .counts
        .iter()
        .map(|(symbol, &n)| Ok((element(symbol)?, u64::from(n))))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_tables_cover_the_same_elements() {
        for &(symbol, ..) in CIAAW_2021_WEIGHTS {
            let e = element(symbol).unwrap();
            assert!(!e.isotopes.is_empty(), "{symbol} has no abundances");
            assert!(e.valence > 0, "{symbol} has no IHD valence");
            for i in &e.isotopes {
                assert!(i.mass.is_finite(), "{symbol}-{} has no mass", i.mass_number);
                // An atomic mass lies within 0.1 u of its mass number for these light nuclides.
                assert!((i.mass - f64::from(i.mass_number)).abs() < 0.1);
            }
        }
        for &(symbol, a, _) in AME2016_MASSES {
            assert!(
                IUPAC_2009_ABUNDANCES
                    .iter()
                    .any(|r| r.0 == symbol && r.1 == a),
                "{symbol}-{a} has a mass but no abundance"
            );
        }
        assert_eq!(IHD_VALENCE.len(), CIAAW_2021_WEIGHTS.len());
    }

    #[test]
    fn abundances_sum_to_one_and_weights_agree_with_them() {
        for symbol in supported_elements() {
            let e = element(symbol).unwrap();
            let sum: f64 = e.isotopes.iter().map(|i| i.abundance).sum();
            assert!((sum - 1.0).abs() < 2e-4, "{symbol}: fractions sum to {sum}");
            // The weight computed from the isotopic composition lies close to the tabulated
            // weight: both describe normal terrestrial material (CIAAW, internal consistency).
            let from_isotopes: f64 = e.isotopes.iter().map(|i| i.mass * i.abundance).sum();
            let rel = (from_isotopes - e.atomic_weight).abs() / e.atomic_weight;
            assert!(
                rel < 2e-4,
                "{symbol}: {from_isotopes} vs {}",
                e.atomic_weight
            );
        }
    }

    #[test]
    fn ciaaw_2021_values() {
        // CIAAW 2021 conventional atomic weights (Prohaska et al. 2022), from memory.
        for (symbol, expected) in [
            ("C", 12.011),
            ("H", 1.008),
            ("O", 15.999),
            ("N", 14.007),
            ("Cl", 35.45),
            ("Br", 79.904),
            ("S", 32.06),
        ] {
            let e = element(symbol).unwrap();
            assert_eq!(e.atomic_weight, expected, "{symbol}");
            assert!(e.conventional, "{symbol} has an interval weight");
        }
        // Single-valued standard atomic weights, CIAAW 2021, from memory.
        assert_eq!(element("I").unwrap().atomic_weight, 126.90447);
        assert_eq!(element("Na").unwrap().atomic_weight, 22.98976928);
        assert!(!element("Na").unwrap().conventional);
    }

    #[test]
    fn ame2016_masses() {
        // 12C = 12 u exactly, by definition of the unified atomic mass unit.
        assert_eq!(element("C").unwrap().most_abundant().mass, 12.0);
        // AME2016 (Wang et al. 2017), from memory.
        assert_eq!(element("H").unwrap().most_abundant().mass, 1.00782503223);
        assert_eq!(element("Cl").unwrap().most_abundant().mass, 34.968852682);
    }

    #[test]
    fn most_abundant_isotopes() {
        // Common practice: nominal masses use 11B, 80Se and 7Li, not the lightest isotopes.
        assert_eq!(element("B").unwrap().most_abundant().mass_number, 11);
        assert_eq!(element("Se").unwrap().most_abundant().mass_number, 80);
        assert_eq!(element("Li").unwrap().most_abundant().mass_number, 7);
        assert_eq!(element("Br").unwrap().most_abundant().mass_number, 79);
        // 10B lies one below 11B; 74Se six below and 82Se two above 80Se (IUPAC 2009 isotopes).
        assert_eq!(element("B").unwrap().shift_range(), (-1, 0));
        assert_eq!(element("Se").unwrap().shift_range(), (-6, 2));
        assert_eq!(element("F").unwrap().shift_range(), (0, 0));
    }

    #[test]
    fn only_nitrogen_breaks_the_parity_of_mass_and_valence() {
        // The nitrogen rule holds because every element whorl covers except N has a most
        // abundant isotope whose mass number has the parity of its valence (common practice).
        for symbol in supported_elements() {
            let e = element(symbol).unwrap();
            let same = e.most_abundant().mass_number % 2 == e.valence % 2;
            assert_eq!(same, symbol != "N", "{symbol}");
        }
    }

    #[test]
    fn an_unknown_element_is_named_with_the_fix() {
        let err = element("Hg").unwrap_err();
        assert!(err.to_string().contains("Hg"), "{err}");
        assert!(err.hint().unwrap().contains("src/chem/elements.rs"));
        assert!(err.is_input());
    }
}
