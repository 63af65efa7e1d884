//! Sub-formulas of a formula at a nominal m/z, and the plausibility check of an EI mass
//! spectrum against its compound's formula.

use serde::Serialize;

use super::elements::resolve;
use super::formula::Formula;
use super::isotopes::isotope_pattern;
use super::mass::{ihd, monoisotopic_mass, nominal_mass, round_to};
use crate::error::{Error, Result};
use crate::prepare::nominal_mz;

/// The electron mass in u, CODATA 2018 (5.48579909065e-4 u), from memory: a singly charged
/// cation weighs its neutral composition minus one electron.
pub const ELECTRON_MASS: f64 = 5.48579909065e-4;

/// The search for sub-formulas gives up after visiting this many partial compositions, so that
/// an enormous formula fails with a message instead of running for hours.
const MAX_VISITS: u64 = 20_000_000;

/// One sub-formula of a formula whose nominal mass equals an m/z.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Fragment {
    /// The sub-formula in Hill order.
    pub formula: String,
    /// Monoisotopic mass of the neutral composition, u, rounded to 0.000001.
    pub monoisotopic_mass: f64,
    /// m/z of the singly charged cation (one electron less), rounded to 0.000001.
    pub cation_mz: f64,
    /// Rings plus double bonds of the composition; an even-electron cation has a half-integer
    /// value, a negative value means no structure with the usual valences exists.
    pub ihd: f64,
}

/// Element counts of one composition, in the order the search visits the elements.
type Counts = [(&'static str, u32)];

/// Called with each composition found; returns false to stop the search.
type Visit<'a> = &'a mut dyn FnMut(&Counts) -> bool;

/// Calls `visit` with the element counts (in the order of `symbols`) of every sub-formula of
/// `formula` (each count between 0 and the formula's, at least one atom) whose nominal mass is
/// `target`. `visit` returns false to stop early.
fn each_sub_formula(formula: &Formula, target: u64, visit: Visit<'_>) -> Result<()> {
    let mut elements: Vec<(&'static str, u64, u32)> = resolve(formula)?
        .into_iter()
        .map(|(e, n)| {
            (
                e.symbol,
                u64::from(e.most_abundant().mass_number),
                u32::try_from(n).unwrap_or(u32::MAX),
            )
        })
        .collect();
    // Heaviest first, so that the lightest element (usually H) closes each composition.
    elements.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(b.0)));
    // capacity[i]: the largest nominal mass elements i.. can still add.
    let mut capacity = vec![0u64; elements.len() + 1];
    for i in (0..elements.len()).rev() {
        capacity[i] = capacity[i + 1] + elements[i].1 * u64::from(elements[i].2);
    }
    if target == 0 || target > capacity[0] {
        return Ok(());
    }
    struct Walk<'a> {
        elements: &'a [(&'static str, u64, u32)],
        capacity: &'a [u64],
        counts: Vec<(&'static str, u32)>,
        visits: u64,
    }
    fn go(w: &mut Walk<'_>, i: usize, remaining: u64, visit: Visit<'_>) -> Result<bool> {
        w.visits += 1;
        if w.visits > MAX_VISITS {
            return Err(Error::invalid(
                "the formula has too many sub-formulas to enumerate",
                "use the molecular formula of the compound itself, not of a polymer or mixture",
            ));
        }
        if remaining == 0 {
            return Ok(visit(&w.counts));
        }
        if i == w.elements.len() || remaining > w.capacity[i] {
            return Ok(true);
        }
        let (symbol, mass, max) = w.elements[i];
        let most = u64::from(max).min(remaining / mass);
        for k in (0..=most).rev() {
            let left = remaining - k * mass;
            if left > w.capacity[i + 1] {
                break;
            }
            if k > 0 {
                w.counts.push((symbol, k as u32));
            }
            let go_on = go(w, i + 1, left, visit)?;
            if k > 0 {
                w.counts.pop();
            }
            if !go_on {
                return Ok(false);
            }
        }
        Ok(true)
    }
    let mut walk = Walk {
        elements: &elements,
        capacity: &capacity,
        counts: Vec::new(),
        visits: 0,
    };
    go(&mut walk, 0, target, visit)?;
    Ok(())
}

fn formula_of(counts: &Counts) -> Formula {
    Formula {
        counts: counts.iter().map(|&(s, n)| (s.to_string(), n)).collect(),
    }
}

/// Every sub-formula of `formula` whose nominal mass is `mz` (element counts up to those of the
/// formula, at least one atom; any composition is allowed, as cation fragments need not be
/// neutral molecules). Sorted by how close the monoisotopic mass lies to `mz`, then by the
/// formula in Hill order.
pub fn sub_formulas(formula: &Formula, mz: u64) -> Result<Vec<Fragment>> {
    let mut found = Vec::new();
    each_sub_formula(formula, mz, &mut |counts| {
        found.push(formula_of(counts));
        true
    })?;
    let mut fragments = found
        .iter()
        .map(|f| {
            let mono = monoisotopic_mass(f)?;
            Ok(Fragment {
                formula: f.to_string(),
                monoisotopic_mass: round_to(mono, 6),
                cation_mz: round_to(mono - ELECTRON_MASS, 6),
                ihd: ihd(f)?,
            })
        })
        .collect::<Result<Vec<_>>>()?;
    let target = mz as f64;
    fragments.sort_by(|a, b| {
        (a.monoisotopic_mass - target)
            .abs()
            .total_cmp(&(b.monoisotopic_mass - target).abs())
            .then_with(|| a.formula.cmp(&b.formula))
    });
    Ok(fragments)
}

/// Parses a comma-separated list of nominal m/z values such as `15,29,43`.
pub fn parse_mz_list(text: &str) -> Result<Vec<u64>> {
    let bad = |why: String| {
        Error::invalid(
            format!("m/z list '{text}' is not valid: {why}"),
            "give whole-number m/z values separated by commas, e.g. --mz 15,29,43",
        )
    };
    let items: Vec<&str> = text.split(',').map(str::trim).collect();
    if items.iter().all(|s| s.is_empty()) {
        return Err(bad("it is empty".into()));
    }
    items
        .into_iter()
        .map(|s| match s.parse::<u64>() {
            Ok(0) => Err(bad("m/z 0 is not a mass".into())),
            Ok(v) if v > 100_000 => Err(bad(format!("{v} is beyond any EI mass spectrum"))),
            Ok(v) => Ok(v),
            Err(_) if s.is_empty() => Err(bad("an item is empty".into())),
            Err(_) => Err(bad(format!("'{s}' is not a whole number"))),
        })
        .collect()
}

/// Isotope shifts considered when a peak may be an isotope peak of a sub-formula.
const ISOTOPE_REACH: i64 = 12;
/// A peak explained as an isotope peak must carry at least this share of the strongest peak of
/// its sub-formula's pattern: a base peak cannot be a minor isotope peak of its own cluster.
const ISOTOPE_PEAK_SHARE: f64 = 0.25;
/// Isotope peaks of the molecule above this share of its strongest one widen the molecular-ion
/// region beyond M+2.
const MOLECULAR_REGION_SHARE: f64 = 0.01;
/// Peaks at or above this fraction of the base peak count as significant.
pub const SIGNIFICANT: f64 = 0.05;

/// True when `mz` is the nominal mass of a sub-formula of `formula`, or an isotope peak of one
/// that carries at least a quarter of that sub-formula's strongest isotope peak (so that the
/// base peak of bromoform, m/z 173 for CH79Br81Br+, is explained although no sub-formula of
/// CHBr3 has nominal mass 173).
pub fn explains(formula: &Formula, mz: u64) -> Result<bool> {
    let mut any = false;
    each_sub_formula(formula, mz, &mut |_| {
        any = true;
        false
    })?;
    if any {
        return Ok(true);
    }
    for shift in (-ISOTOPE_REACH..=ISOTOPE_REACH).filter(|&s| s != 0) {
        let Some(target) = (mz as i64).checked_sub(shift).filter(|&t| t > 0) else {
            continue;
        };
        let mut found = false;
        let mut failure = None;
        each_sub_formula(formula, target as u64, &mut |counts| {
            match isotope_pattern(&formula_of(counts), -ISOTOPE_REACH, ISOTOPE_REACH) {
                Ok(pattern) => {
                    let strongest = pattern.iter().map(|p| p.relative).fold(0.0, f64::max);
                    let here = pattern[(shift + ISOTOPE_REACH) as usize].relative;
                    found = here >= ISOTOPE_PEAK_SHARE * strongest;
                }
                Err(e) => failure = Some(e),
            }
            !found && failure.is_none()
        })?;
        if let Some(e) = failure {
            return Err(e);
        }
        if found {
            return Ok(true);
        }
    }
    Ok(false)
}

/// The highest m/z at which the molecule itself gives a peak: its nominal mass plus 2, or more
/// when its own isotope pattern carries at least 1 % of its strongest peak further up (two
/// bromines reach M+4).
pub fn molecular_region_top(formula: &Formula) -> Result<u64> {
    let nominal = nominal_mass(formula)?;
    let pattern = isotope_pattern(formula, -ISOTOPE_REACH, ISOTOPE_REACH)?;
    let strongest = pattern.iter().map(|p| p.relative).fold(0.0, f64::max);
    let reach = pattern
        .iter()
        .filter(|p| p.shift > 0 && p.relative >= MOLECULAR_REGION_SHARE * strongest)
        .map(|p| p.shift)
        .max()
        .unwrap_or(0)
        .max(2);
    Ok(nominal + reach as u64)
}

/// Checks an EI mass spectrum against its compound's formula and returns warnings (never an
/// error for the spectrum itself): the base peak must be explained by the formula (see
/// [`explains`]), and no significant peak (at least 5 % of the base peak) may lie above the
/// molecule's own isotope peaks ([`molecular_region_top`]). `peaks` are (m/z, abundance
/// relative to the base peak). A formula with an element whorl has no data for gives one
/// warning saying the check was skipped.
pub fn ms_formula_warnings(formula: &Formula, peaks: &[(f64, f64)]) -> Vec<String> {
    match check_ms(formula, peaks) {
        Ok(w) => w,
        Err(e) => vec![format!(
            "the mass spectrum was not checked against the formula {formula}: {e}"
        )],
    }
}

fn check_ms(formula: &Formula, peaks: &[(f64, f64)]) -> Result<Vec<String>> {
    let mut warnings = Vec::new();
    let nominal = |mz: f64| u64::try_from(nominal_mz(mz)).unwrap_or(0);
    let Some(&(base_mz, base)) = peaks.iter().max_by(|a, b| a.1.total_cmp(&b.1)) else {
        return Ok(warnings);
    };
    if base <= 0.0 {
        return Ok(warnings);
    }
    let base_mz = nominal(base_mz);
    if !explains(formula, base_mz)? {
        warnings.push(format!(
            "the base peak at m/z {base_mz} fits no sub-formula of {formula} (nor an isotope peak of one); check the formula and the spectrum"
        ));
    }
    let top = molecular_region_top(formula)?;
    if let Some(&(mz, height)) = peaks
        .iter()
        .filter(|p| p.1 >= SIGNIFICANT * base)
        .max_by(|a, b| a.0.total_cmp(&b.0))
    {
        let mz = nominal(mz);
        if mz > top {
            warnings.push(format!(
                "m/z {mz} ({:.0} % of the base peak) lies above the molecular ion of {formula} (nominal mass {}, isotope peaks up to m/z {top}); check the formula and the spectrum",
                100.0 * height / base,
                nominal_mass(formula)?
            ));
        }
    }
    Ok(warnings)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::chem::parse_formula;

    fn at(formula: &str, mz: u64) -> Vec<String> {
        sub_formulas(&parse_formula(formula).unwrap(), mz)
            .unwrap()
            .into_iter()
            .map(|f| f.formula)
            .collect()
    }

    #[test]
    fn propanal_fragments() {
        // Common practice: CH3+ at m/z 15; C2H5+ and CHO+ both at m/z 29 for propanal C3H6O.
        assert_eq!(at("C3H6O", 15), ["CH3"]);
        // CHO (29.0027) lies closer to 29 than C2H5 (29.0391) (AME2016 masses, arithmetic).
        assert_eq!(at("C3H6O", 29), ["CHO", "C2H5"]);
        // The molecular ion itself is a sub-formula; nothing fits m/z 7 or above M.
        assert_eq!(at("C3H6O", 58), ["C3H6O"]);
        assert!(at("C3H6O", 7).is_empty());
        assert!(at("C3H6O", 59).is_empty());
    }

    #[test]
    fn counts_never_exceed_the_formula() {
        // CH2Cl2 has one carbon, so m/z 24 (C2) is impossible; Cl2 at 70 is allowed.
        assert!(at("CH2Cl2", 24).is_empty());
        assert_eq!(at("CH2Cl2", 70), ["Cl2"]);
        // Every listed sub-formula has the asked nominal mass and fits inside the formula.
        let caffeine = parse_formula("C8H10N4O2").unwrap();
        for mz in 1..=194 {
            for frag in sub_formulas(&caffeine, mz).unwrap() {
                let f = parse_formula(&frag.formula).unwrap();
                assert_eq!(nominal_mass(&f).unwrap(), mz);
                for (e, n) in &f.counts {
                    assert!(*n <= caffeine.count(e), "{} at {mz}", frag.formula);
                }
            }
        }
    }

    #[test]
    fn enumeration_matches_brute_force() {
        // Every sub-composition of C4H9NO2S, tallied by nominal mass the slow way.
        let formula = parse_formula("C4H9NO2S").unwrap();
        let mut tally = std::collections::BTreeMap::<u64, usize>::new();
        for c in 0..=4u64 {
            for h in 0..=9 {
                for n in 0..=1 {
                    for o in 0..=2 {
                        for s in 0..=1 {
                            let m = 12 * c + h + 14 * n + 16 * o + 32 * s;
                            if m > 0 {
                                *tally.entry(m).or_default() += 1;
                            }
                        }
                    }
                }
            }
        }
        for mz in 1..=160 {
            let got = sub_formulas(&formula, mz).unwrap().len();
            assert_eq!(got, tally.get(&mz).copied().unwrap_or(0), "m/z {mz}");
        }
    }

    #[test]
    fn cation_mz_is_one_electron_lighter() {
        let f = &sub_formulas(&parse_formula("C3H6O").unwrap(), 15).unwrap()[0];
        // CH3: 12 + 3 x 1.00782503223 = 15.023475 (AME2016, arithmetic).
        assert_eq!(f.monoisotopic_mass, 15.023475);
        assert_eq!(f.cation_mz, 15.022927);
        assert_eq!(f.ihd, 0.5);
    }

    #[test]
    fn mz_lists() {
        assert_eq!(parse_mz_list("15, 29,43").unwrap(), [15, 29, 43]);
        for bad in ["", "15,,29", "15;29", "0", "-15", "29.5", "abc", "1000000"] {
            let err = parse_mz_list(bad).unwrap_err();
            assert!(err.is_input(), "{bad}");
            assert!(err.hint().unwrap().contains("--mz"), "{bad}");
        }
    }

    #[test]
    fn isotope_peaks_explain_a_base_peak() {
        let chbr3 = parse_formula("CHBr3").unwrap();
        // Bromoform's base peak m/z 173 is CHBr2+ with one 79Br and one 81Br (common practice);
        // no sub-formula has nominal mass 173.
        assert!(at("CHBr3", 173).is_empty());
        assert!(explains(&chbr3, 173).unwrap());
        // m/z 175 (CH81Br2+, about half of 173) is explained too; m/z 100 is not.
        assert!(explains(&chbr3, 175).unwrap());
        assert!(!explains(&chbr3, 100).unwrap());
        // A minor 13C peak cannot be a base peak: C3H6O has no sub-formula at 59, and the
        // M+1 of C3H6O is about 3 % of M.
        assert!(!explains(&parse_formula("C3H6O").unwrap(), 59).unwrap());
    }

    #[test]
    fn molecular_region() {
        // Propanal: 58 + 2. Dibromomethane CH2Br2: M 172, M+2 174 and M+4 176 about 1:2:1
        // (common practice), so its region reaches 176.
        assert_eq!(
            molecular_region_top(&parse_formula("C3H6O").unwrap()).unwrap(),
            60
        );
        assert_eq!(
            molecular_region_top(&parse_formula("CH2Br2").unwrap()).unwrap(),
            176
        );
    }

    #[test]
    fn spectrum_checks() {
        let propanal = parse_formula("C3H6O").unwrap();
        // A plausible spectrum: base peak 29, molecular ion 58.
        let good = [(15.0, 0.1), (29.0, 1.0), (57.0, 0.2), (58.0, 0.6)];
        assert!(ms_formula_warnings(&propanal, &good).is_empty());
        // Base peak at m/z 10: no sub-formula of C3H6O weighs 10.
        let w = ms_formula_warnings(&propanal, &[(10.0, 1.0), (29.0, 0.5)]);
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(w[0].contains("base peak at m/z 10"), "{w:?}");
        // A significant peak at 72 lies above 58 + 2; a 3 % peak there is ignored.
        let w = ms_formula_warnings(&propanal, &[(29.0, 1.0), (72.0, 0.3)]);
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(w[0].contains("m/z 72 (30 % of the base peak)"), "{w:?}");
        assert!(ms_formula_warnings(&propanal, &[(29.0, 1.0), (72.0, 0.03)]).is_empty());
        // An element without data: the check says it was skipped.
        let w = ms_formula_warnings(&parse_formula("CH3Hg").unwrap(), &[(15.0, 1.0)]);
        assert!(w[0].contains("not checked") && w[0].contains("Hg"), "{w:?}");
    }
}
