//! Molecular formulas in Hill-like notation (C7H8, C2H4O2, CH2Cl2).

use std::collections::BTreeMap;
use std::fmt;

use crate::error::{Error, Result};

/// Element symbols, H to Og (IUPAC periodic table).
const ELEMENTS: [&str; 118] = [
    "H", "He", "Li", "Be", "B", "C", "N", "O", "F", "Ne", "Na", "Mg", "Al", "Si", "P", "S", "Cl",
    "Ar", "K", "Ca", "Sc", "Ti", "V", "Cr", "Mn", "Fe", "Co", "Ni", "Cu", "Zn", "Ga", "Ge", "As",
    "Se", "Br", "Kr", "Rb", "Sr", "Y", "Zr", "Nb", "Mo", "Tc", "Ru", "Rh", "Pd", "Ag", "Cd", "In",
    "Sn", "Sb", "Te", "I", "Xe", "Cs", "Ba", "La", "Ce", "Pr", "Nd", "Pm", "Sm", "Eu", "Gd", "Tb",
    "Dy", "Ho", "Er", "Tm", "Yb", "Lu", "Hf", "Ta", "W", "Re", "Os", "Ir", "Pt", "Au", "Hg", "Tl",
    "Pb", "Bi", "Po", "At", "Rn", "Fr", "Ra", "Ac", "Th", "Pa", "U", "Np", "Pu", "Am", "Cm", "Bk",
    "Cf", "Es", "Fm", "Md", "No", "Lr", "Rf", "Db", "Sg", "Bh", "Hs", "Mt", "Ds", "Rg", "Cn", "Nh",
    "Fl", "Mc", "Lv", "Ts", "Og",
];

/// A parsed formula: element counts.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Formula {
    /// Count per element symbol.
    pub counts: BTreeMap<String, u32>,
}

impl Formula {
    /// The count of one element (0 when absent).
    pub fn count(&self, element: &str) -> u32 {
        self.counts.get(element).copied().unwrap_or(0)
    }
}

impl fmt::Display for Formula {
    /// Hill order: C first, then H, then the rest alphabetically; without carbon, all alphabetically.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut order: Vec<&String> = self.counts.keys().collect();
        if self.counts.contains_key("C") {
            order.sort_by_key(|e| (e.as_str() != "C", e.as_str() != "H", e.as_str().to_string()));
        }
        for e in order {
            match self.counts[e] {
                1 => write!(f, "{e}")?,
                n => write!(f, "{e}{n}")?,
            }
        }
        Ok(())
    }
}

/// Parses a formula such as `C7H8` or `CH2Cl2`; parentheses and charges are not accepted.
pub fn parse_formula(text: &str) -> Result<Formula> {
    let bad = |why: String| {
        Error::invalid(
            format!("formula '{text}' is not valid: {why}"),
            "write element symbols with counts, e.g. C7H8 or C2H3Cl3 (no brackets or charges)",
        )
    };
    let s = text.trim();
    let bytes = s.as_bytes();
    let mut counts: BTreeMap<String, u32> = BTreeMap::new();
    let mut i = 0;
    if bytes.is_empty() {
        return Err(bad("it is empty".into()));
    }
    while i < bytes.len() {
        if !bytes[i].is_ascii_uppercase() {
            return Err(bad(format!(
                "unexpected '{}' at position {}",
                bytes[i] as char,
                i + 1
            )));
        }
        let mut j = i + 1;
        while j < bytes.len() && bytes[j].is_ascii_lowercase() {
            j += 1;
        }
        let symbol = &s[i..j];
        if !ELEMENTS.contains(&symbol) {
            return Err(bad(format!("'{symbol}' is not an element symbol")));
        }
        let mut k = j;
        while k < bytes.len() && bytes[k].is_ascii_digit() {
            k += 1;
        }
        let n: u32 = if k == j {
            1
        } else {
            s[j..k]
                .parse()
                .map_err(|_| bad(format!("count '{}' is too large", &s[j..k])))?
        };
        if n == 0 {
            return Err(bad(format!("{symbol} has a count of 0")));
        }
        *counts.entry(symbol.to_string()).or_default() += n;
        i = k;
    }
    Ok(Formula { counts })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_and_prints_in_hill_order() {
        assert_eq!(parse_formula("C7H8").unwrap().to_string(), "C7H8");
        assert_eq!(parse_formula("CH2Cl2").unwrap().count("Cl"), 2);
        assert_eq!(parse_formula("H2OC").unwrap().to_string(), "CH2O");
        assert_eq!(parse_formula("ClH").unwrap().to_string(), "ClH");
        for bad in ["", "c7h8", "C7H8+", "Xx2", "C(CH3)4", "C0H4"] {
            assert!(parse_formula(bad).is_err(), "{bad}");
        }
    }
}
