//! Library spectra too alike to tell apart: an EI-MS search without a retention index warns
//! when the best hit's reference spectrum and the reference of another compound in the list
//! agree almost as well as two measurements of one compound do.
//!
//! Isomers and close homologues (glucose and allose, the stereoisomers of a sugar acid, two
//! TMS derivatives of related acids) give EI spectra that differ little more than two runs of
//! one standard; a spectrum alone cannot rank them reliably, and a score that puts one first
//! says nothing about the other. Gas chromatographers separate them by retention index, so the
//! warning names the retention index (and other techniques) as the way out. The comparison is
//! reference against reference, so it does not depend on the unknown's noise: it says what the
//! library can and cannot tell apart.

use super::hit::Hit;
use super::warning::{Warning, WarningCode};
use crate::error::Result;
use crate::library::Library;
use crate::prepare::Prepared;
use crate::score::entropy_similarity;

/// The entropy similarity (Li et al. 2021, reference against reference) at or above which two
/// compounds' EI reference spectra are called too alike to tell apart without a retention
/// index. Derived on the tuning part of the real EI set (`docs/evaluation-real.md`, "Reference
/// spectra too alike"): the lowest similarity, in steps of 0.01, at and above which at least
/// one degraded search in four put the other compound first. The unit test
/// `twin_similarity_matches_the_evaluation` checks it against that file.
pub const TWIN_SIMILARITY: f64 = 0.94;

/// How often a pair at or above [`TWIN_SIMILARITY`] must swap places for the derivation: one
/// search in four.
pub const TWIN_SWAP_RATE: f64 = 0.25;

/// The EI sticks of a prepared spectrum: `(m/z, height)` of its peaks.
fn sticks(p: &Prepared) -> Vec<(f64, f64)> {
    p.peaks.iter().map(|q| (q.x, q.height)).collect()
}

/// The entropy similarity of two EI reference spectra.
pub fn reference_similarity(a: &Prepared, b: &Prepared) -> f64 {
    entropy_similarity(&sticks(a), &sticks(b))
}

/// The other compounds among `hits` whose reference (their best-ranked spectrum in the list)
/// agrees with the first hit's reference at [`TWIN_SIMILARITY`] or more, each once, with the
/// similarity, in list order; compounds within `close_margin` of the first hit are left out
/// (the list already says those are too close).
pub fn similar_references(
    library: &Library,
    hits: &[Hit],
    close_margin: f64,
) -> Result<Vec<(String, f64)>> {
    let Some(best) = hits.first() else {
        return Ok(Vec::new());
    };
    let best_ref = library.prepared(best.spectrum_id)?;
    let mut seen = vec![best.compound_id];
    let mut out = Vec::new();
    for h in &hits[1..] {
        if seen.contains(&h.compound_id) {
            continue;
        }
        seen.push(h.compound_id);
        if best.score - h.score < close_margin {
            continue;
        }
        let s = reference_similarity(&best_ref, &library.prepared(h.spectrum_id)?);
        if s >= TWIN_SIMILARITY {
            out.push((h.name.clone(), s));
        }
    }
    Ok(out)
}

/// The warning for [`similar_references`], if there are any.
pub fn twin_warning(best: &Hit, twins: &[(String, f64)]) -> Option<Warning> {
    if twins.is_empty() {
        return None;
    }
    let named: Vec<String> = twins
        .iter()
        .map(|(name, s)| format!("{name} ({s:.3})"))
        .collect();
    Some(Warning::new(
        WarningCode::SimilarReferences,
        format!(
            "the library spectra of {} and {} agree as closely as isomers' do (entropy similarity, reference against reference, {TWIN_SIMILARITY:.2} or more): an EI spectrum alone may not tell them apart; a retention index (--ri) or another technique can",
            best.name,
            named.join(", ")
        ),
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn twin_similarity_matches_the_evaluation() {
        // docs/evaluation-real.md is the output of examples/evaluate_real/; its section
        // "Reference spectra too alike" marks the derived similarity in bold in its table and
        // states it on the line "Derived: ...".
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/evaluation-real.md");
        let text = std::fs::read_to_string(path).expect("docs/evaluation-real.md");
        let section = text
            .split("### Reference spectra too alike")
            .nth(1)
            .expect("a section on reference spectra too alike")
            .split("\n## ")
            .next()
            .unwrap();
        let bold: Vec<f64> = section
            .lines()
            .filter(|l| l.starts_with("| **"))
            .map(|l| {
                l.trim_start_matches("| **")
                    .split("**")
                    .next()
                    .unwrap()
                    .parse()
                    .unwrap()
            })
            .collect();
        assert_eq!(
            bold,
            [TWIN_SIMILARITY],
            "one bold row, the constant's value"
        );
        let derived: f64 = section
            .lines()
            .find_map(|l| l.strip_prefix("Derived: "))
            .expect("a derived line")
            .split(';')
            .next()
            .unwrap()
            .parse()
            .expect("a derived value");
        assert_eq!(derived, TWIN_SIMILARITY);
    }
}
