//! Constraints an analyst applies to a hit list: formula, nominal mass, IHD, allowed
//! elements, retention index. A hit that a constraint rules out is excluded, with the reason.

use std::collections::BTreeSet;

use serde::{Deserialize, Serialize};

use crate::chem::{Formula, ihd, nominal_mass, parse_formula};
use crate::error::{Error, Result};
use crate::library::Metadata;

// --- Constraints ----------------------------------------------------------------------------

/// A retention-index window.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RiWindow {
    /// The unknown's retention index.
    pub value: f64,
    /// Half-width: a reference within value +- window passes.
    pub window: f64,
    /// Column phase the index was measured on; when given, a reference's `ri_phase` must match
    /// (retention indices differ between phases).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub phase: Option<String>,
}

/// The constraints of one search. Empty constraints let every hit through.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Constraints {
    /// The exact formula (Hill order).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub formula: Option<String>,
    /// Nominal molecular mass of the hit's formula.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mass: Option<u64>,
    /// Index of hydrogen deficiency of the hit's formula.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ihd: Option<f64>,
    /// The elements a hit's formula may contain.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub elements: Option<BTreeSet<String>>,
    /// Retention-index window; references carry `ri` (and `ri_phase`) in their metadata.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ri: Option<RiWindow>,
}

/// The metadata key holding a reference's retention index (a manifest column `ri`).
pub const RI_KEY: &str = "ri";
/// The metadata key holding the column phase of that index (a manifest column `ri_phase`).
pub const RI_PHASE_KEY: &str = "ri_phase";

impl Constraints {
    /// True when no constraint is set.
    pub fn is_empty(&self) -> bool {
        *self == Constraints::default()
    }

    /// Sets the formula constraint, rewriting it in Hill order.
    pub fn with_formula(mut self, formula: &str) -> Result<Constraints> {
        self.formula = Some(parse_formula(formula)?.to_string());
        Ok(self)
    }

    /// Sets the allowed elements from a list such as `C,H,O`.
    pub fn with_elements(mut self, list: &str) -> Result<Constraints> {
        let mut set = BTreeSet::new();
        for e in list.split(',').map(str::trim).filter(|e| !e.is_empty()) {
            // One element symbol parses as a formula with one element and count 1.
            let f = parse_formula(e)?;
            if f.counts.len() != 1 || f.counts.values().any(|&n| n != 1) {
                return Err(Error::invalid(
                    format!("'{e}' is not one element symbol"),
                    "list element symbols separated by commas, e.g. C,H,O,N",
                ));
            }
            set.extend(f.counts.into_keys());
        }
        if set.is_empty() {
            return Err(Error::invalid(
                "the element list is empty",
                "list element symbols separated by commas, e.g. C,H,O,N",
            ));
        }
        self.elements = Some(set);
        Ok(self)
    }

    /// Checks the values are usable.
    pub fn validate(&self) -> Result<()> {
        if let Some(i) = self.ihd
            && !(i.is_finite() && i >= 0.0 && (2.0 * i).fract() == 0.0)
        {
            return Err(Error::invalid(
                format!("IHD {i} is not a whole or half number of at least 0"),
                "rings plus double bonds is 0, 1, 2, ... (half values for radicals and ions)",
            ));
        }
        if let Some(ri) = &self.ri
            && !(ri.value.is_finite() && ri.window.is_finite() && ri.window >= 0.0)
        {
            return Err(Error::invalid(
                format!(
                    "retention index {} +- {} is not usable",
                    ri.value, ri.window
                ),
                "give --ri VALUE and a non-negative --ri-window, e.g. --ri 1012 --ri-window 15",
            ));
        }
        Ok(())
    }

    /// Why a reference with this metadata is ruled out, or `None` when it passes. Every
    /// failing constraint is named, separated by "; ".
    pub fn rule_out(&self, metadata: &Metadata) -> Option<String> {
        let mut reasons = Vec::new();
        let needs_formula = self.formula.is_some()
            || self.mass.is_some()
            || self.ihd.is_some()
            || self.elements.is_some();
        if needs_formula {
            match metadata.formula.as_deref().map(parse_formula) {
                None => reasons.push("no formula on record to check".to_string()),
                Some(Err(_)) => reasons.push("the formula on record cannot be read".to_string()),
                Some(Ok(f)) => self.check_formula(&f, &mut reasons),
            }
        }
        if let Some(ri) = &self.ri {
            check_ri(ri, metadata, &mut reasons);
        }
        (!reasons.is_empty()).then(|| reasons.join("; "))
    }

    fn check_formula(&self, f: &Formula, reasons: &mut Vec<String>) {
        let hill = f.to_string();
        if let Some(want) = &self.formula
            && &hill != want
        {
            reasons.push(format!("formula {hill}, not {want}"));
        }
        if let Some(want) = self.mass {
            match nominal_mass(f) {
                Ok(m) if m != want => reasons.push(format!("nominal mass {m}, not {want}")),
                Ok(_) => {}
                Err(e) => reasons.push(format!("nominal mass of {hill} unknown: {e}")),
            }
        }
        if let Some(want) = self.ihd {
            match ihd(f) {
                Ok(i) if (i - want).abs() > 1e-9 => reasons.push(format!("IHD {i}, not {want}")),
                Ok(_) => {}
                Err(e) => reasons.push(format!("IHD of {hill} unknown: {e}")),
            }
        }
        if let Some(allowed) = &self.elements {
            let extra: Vec<&str> = f
                .counts
                .keys()
                .filter(|e| !allowed.contains(*e))
                .map(String::as_str)
                .collect();
            if !extra.is_empty() {
                reasons.push(format!("contains {} (not allowed)", extra.join(", ")));
            }
        }
    }
}

fn check_ri(ri: &RiWindow, metadata: &Metadata, reasons: &mut Vec<String>) {
    let Some(text) = metadata.extra.get(RI_KEY) else {
        reasons.push("no retention index on record".to_string());
        return;
    };
    let Ok(value) = text.trim().parse::<f64>() else {
        reasons.push(format!(
            "retention index '{text}' on record is not a number"
        ));
        return;
    };
    if let Some(phase) = &ri.phase {
        match metadata.extra.get(RI_PHASE_KEY) {
            Some(p) if same_phase(p, phase) => {}
            Some(p) => {
                reasons.push(format!(
                    "retention index on record is for phase {p}, not {phase}"
                ));
                return;
            }
            None => {
                reasons.push("no column phase on record for its retention index".to_string());
                return;
            }
        }
    }
    let diff = value - ri.value;
    if diff.abs() > ri.window {
        reasons.push(format!(
            "retention index {value:.1} is {:.0} from {:.1} (window +-{})",
            diff.abs(),
            ri.value,
            ri.window
        ));
    }
}

/// Column phase names as labs write them compare equal after case, spaces, hyphens and
/// underscores are set aside: "DB-5", "db 5" and "DB5" are one phase.
fn same_phase(a: &str, b: &str) -> bool {
    let key = |s: &str| -> String {
        s.chars()
            .filter(|c| !matches!(c, ' ' | '-' | '_'))
            .flat_map(char::to_lowercase)
            .collect()
    };
    key(a) == key(b)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn meta(formula: Option<&str>, ri: Option<&str>, phase: Option<&str>) -> Metadata {
        let mut m = Metadata {
            name: "x".into(),
            formula: formula.map(str::to_string),
            ..Metadata::default()
        };
        if let Some(r) = ri {
            m.extra.insert(RI_KEY.into(), r.into());
        }
        if let Some(p) = phase {
            m.extra.insert(RI_PHASE_KEY.into(), p.into());
        }
        m
    }

    #[test]
    fn mass_and_ihd_constraints_cover_every_element_with_data() {
        // The constraints use src/chem's element tables, so salts and organometallics are
        // checked rather than refused. Common practice: NaCl has nominal mass 23 + 35 = 58 and,
        // with Na counted like H, IHD 1 - (1 + 1)/2 = 0; tetramethylsilane Si(CH3)4, C4H12Si,
        // has nominal mass 4 x 12 + 12 + 28 = 88 and IHD 0.
        let salt = meta(Some("NaCl"), None, None);
        let tms = meta(Some("C4H12Si"), None, None);
        let c = Constraints {
            mass: Some(58),
            ihd: Some(0.0),
            ..Constraints::default()
        };
        assert_eq!(c.rule_out(&salt), None);
        assert_eq!(c.rule_out(&tms).unwrap(), "nominal mass 88, not 58");
        // An element without atomic data (ferrocene's Fe) is named in the reason, not passed.
        let ferrocene = meta(Some("C10H10Fe"), None, None);
        let why = c.rule_out(&ferrocene).unwrap();
        assert!(
            why.starts_with("nominal mass of C10H10Fe unknown") && why.contains("Fe"),
            "{why}"
        );
    }

    #[test]
    fn each_constraint_excludes_what_it_should() {
        let benzene = meta(Some("C6H6"), Some("655"), Some("DB-5"));
        let toluene = meta(Some("C7H8"), Some("760"), Some("DB-5"));
        let chloroform = meta(Some("CHCl3"), None, None);
        let unnamed = meta(None, None, None);

        let c = Constraints::default().with_formula("H6C6").unwrap();
        assert_eq!(c.rule_out(&benzene), None);
        assert_eq!(c.rule_out(&toluene).unwrap(), "formula C7H8, not C6H6");
        assert_eq!(
            c.rule_out(&unnamed).unwrap(),
            "no formula on record to check"
        );

        let c = Constraints {
            mass: Some(92),
            ..Constraints::default()
        };
        assert_eq!(c.rule_out(&toluene), None);
        assert_eq!(c.rule_out(&benzene).unwrap(), "nominal mass 78, not 92");

        let c = Constraints {
            ihd: Some(0.0),
            ..Constraints::default()
        };
        assert_eq!(c.rule_out(&chloroform), None);
        assert_eq!(c.rule_out(&benzene).unwrap(), "IHD 4, not 0");

        let c = Constraints::default().with_elements("C, H").unwrap();
        assert_eq!(c.rule_out(&toluene), None);
        assert_eq!(
            c.rule_out(&chloroform).unwrap(),
            "contains Cl (not allowed)"
        );

        let ri = |phase: Option<&str>| Constraints {
            ri: Some(RiWindow {
                value: 660.0,
                window: 10.0,
                phase: phase.map(str::to_string),
            }),
            ..Constraints::default()
        };
        assert_eq!(ri(None).rule_out(&benzene), None);
        assert_eq!(
            ri(None).rule_out(&toluene).unwrap(),
            "retention index 760.0 is 100 from 660.0 (window +-10)"
        );
        assert_eq!(
            ri(None).rule_out(&chloroform).unwrap(),
            "no retention index on record"
        );
        assert_eq!(ri(Some("db-5")).rule_out(&benzene), None);
        // Spellings of one phase (common practice: labs write DB-5, DB5, db 5).
        for same in ["DB5", "db 5", "Db_5", " DB-5 "] {
            assert_eq!(ri(Some(same)).rule_out(&benzene), None, "{same}");
        }
        assert!(ri(Some("DB-50")).rule_out(&benzene).is_some());
        // A computed index prints with one decimal, never all of its digits.
        let computed = Constraints {
            ri: Some(RiWindow {
                value: 763.157_894_736_842_1,
                window: 5.0,
                phase: None,
            }),
            ..Constraints::default()
        };
        assert_eq!(
            computed.rule_out(&benzene).unwrap(),
            "retention index 655.0 is 108 from 763.2 (window +-5)"
        );
        assert!(
            ri(Some("DB-WAX"))
                .rule_out(&benzene)
                .unwrap()
                .contains("phase DB-5")
        );

        // Several failures are all named.
        let c = Constraints {
            mass: Some(92),
            ihd: Some(4.0),
            ..Constraints::default()
        };
        assert_eq!(
            c.rule_out(&chloroform).unwrap(),
            "nominal mass 118, not 92; IHD 0, not 4"
        );
    }

    #[test]
    fn bad_values_are_refused() {
        assert!(Constraints::default().with_elements("C,Hx").is_err());
        assert!(Constraints::default().with_elements("C2").is_err());
        assert!(Constraints::default().with_formula("c6h6").is_err());
        let c = Constraints {
            ihd: Some(1.3),
            ..Constraints::default()
        };
        assert!(c.validate().is_err());
        assert!(Constraints::default().is_empty());
    }
}
