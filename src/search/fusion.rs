//! Evidence from several techniques: per-compound fusion of hit lists.

use std::collections::BTreeMap;

use serde::Serialize;

use super::Hit;
use super::warning::{Warning, WarningCode};
use crate::technique::Technique;

/// A compound ranked first by one technique and outside this many compounds by another (or
/// without a reference spectrum of it) is reported as a disagreement.
pub const DISAGREE_OUTSIDE: usize = 5;

/// What one technique says about one compound.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TechniqueEvidence {
    /// The technique.
    pub technique: Technique,
    /// The compound's best combined score in this technique; `None` when the library holds no
    /// spectrum of the compound for it (counted as 0 in the fused score).
    pub score: Option<f64>,
    /// The compound's rank among compounds in this technique (1 for the best).
    pub rank: Option<usize>,
    /// The library spectrum behind the score.
    pub spectrum_id: Option<i64>,
}

/// One compound of a fused list.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FusedCompound {
    /// 1 for the best.
    pub rank: usize,
    /// Compound id.
    pub compound_id: i64,
    /// Compound name.
    pub name: String,
    /// Formula.
    pub formula: Option<String>,
    /// The fused score, 0..1.
    pub fused: f64,
    /// One entry per technique searched, in the order given.
    pub evidence: Vec<TechniqueEvidence>,
    /// Techniques searched for which the library has no spectrum of this compound (always
    /// present in the JSON, empty when none is missing, so a program reads one shape).
    pub missing: Vec<Technique>,
    /// Where the techniques disagree about this compound (always present, possibly empty).
    pub disagreements: Vec<String>,
}

/// A fused list.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Fusion {
    /// The rule that made the fused score, in words.
    pub rule: String,
    /// The techniques searched.
    pub techniques: Vec<Technique>,
    /// Compounds, best first.
    pub compounds: Vec<FusedCompound>,
    /// Fused score of compound 1 minus compound 2.
    pub margin: Option<f64>,
    /// Plain-language warnings about the fused list.
    pub warnings: Vec<Warning>,
}

/// The rule [`fuse`] applies, as printed with every fused list.
pub const FUSION_RULE: &str = "mean of the per-technique combined scores over the techniques searched; a technique without a reference spectrum of the compound counts 0";

/// Fuses per-technique hit lists (each ranked, best first, ideally covering every candidate)
/// into one list per compound, keeping the best `top`.
///
/// The fused score is the mean, over the techniques searched, of the compound's best combined
/// score in each; a technique for which the library holds no spectrum of the compound counts
/// 0 and is shown as missing. Why this rule rather than rank fusion (for example reciprocal
/// rank fusion): every combined score already lies in 0..1 with 1 for an identical spectrum,
/// so the mean keeps how well each technique matched, where ranks keep only the order (a
/// near-perfect first hit and a poor first hit would count the same); counting a missing
/// technique as 0 means a compound cannot win by lacking the evidence that would test it.
/// Ties are broken by compound id.
pub fn fuse(lists: &[(Technique, &[Hit])], top: usize) -> Fusion {
    let techniques: Vec<Technique> = lists.iter().map(|(t, _)| *t).collect();
    // compound id -> (name, formula, per technique: (score, compound rank, spectrum id))
    type Row = (String, Option<String>, Vec<Option<(f64, usize, i64)>>);
    let mut rows: BTreeMap<i64, Row> = BTreeMap::new();
    for (k, (_, hits)) in lists.iter().enumerate() {
        let mut compound_rank = 0;
        for h in hits.iter() {
            let row = rows
                .entry(h.compound_id)
                .or_insert_with(|| (h.name.clone(), h.formula.clone(), vec![None; lists.len()]));
            if row.2[k].is_none() {
                compound_rank += 1;
                row.2[k] = Some((h.score, compound_rank, h.spectrum_id));
            }
        }
    }
    let n = lists.len().max(1) as f64;
    let mut compounds: Vec<FusedCompound> = rows
        .into_iter()
        .map(|(compound_id, (name, formula, per))| {
            let fused = per.iter().map(|e| e.map_or(0.0, |e| e.0)).sum::<f64>() / n;
            let evidence: Vec<TechniqueEvidence> = techniques
                .iter()
                .zip(&per)
                .map(|(&technique, e)| TechniqueEvidence {
                    technique,
                    score: e.map(|e| e.0),
                    rank: e.map(|e| e.1),
                    spectrum_id: e.map(|e| e.2),
                })
                .collect();
            let missing = evidence
                .iter()
                .filter(|e| e.score.is_none())
                .map(|e| e.technique)
                .collect();
            let disagreements = disagreements(&evidence);
            FusedCompound {
                rank: 0,
                compound_id,
                name,
                formula,
                fused,
                evidence,
                missing,
                disagreements,
            }
        })
        .collect();
    compounds.sort_by(|a, b| {
        b.fused
            .total_cmp(&a.fused)
            .then(a.compound_id.cmp(&b.compound_id))
    });
    compounds.truncate(top);
    for (i, c) in compounds.iter_mut().enumerate() {
        c.rank = i + 1;
    }
    let margin = (compounds.len() >= 2).then(|| compounds[0].fused - compounds[1].fused);
    let mut warnings = Vec::new();
    // Compared by compound, not by name: one compound is one compound whatever its spelling
    // in each reference ("Toluene", "toluene").
    let firsts: Vec<(Technique, &Hit)> = lists
        .iter()
        .filter_map(|(t, hits)| hits.first().map(|h| (*t, h)))
        .collect();
    if firsts
        .windows(2)
        .any(|w| w[0].1.compound_id != w[1].1.compound_id)
    {
        let said: Vec<String> = firsts
            .iter()
            .map(|(t, h)| format!("{t}: {}", h.name))
            .collect();
        warnings.push(Warning::new(
            WarningCode::TechniquesDisagree,
            format!(
                "the techniques rank different compounds first ({})",
                said.join("; ")
            ),
        ));
    }
    if let Some(best) = compounds.first()
        && !best.missing.is_empty()
    {
        let names: Vec<&str> = best.missing.iter().map(|t| t.name()).collect();
        warnings.push(Warning::new(
            WarningCode::MissingTechnique,
            format!(
                "the best compound, {}, has no reference spectrum for {}: that evidence is missing, not in its favour",
                best.name,
                names.join(", ")
            ),
        ));
    }
    Fusion {
        rule: FUSION_RULE.to_string(),
        techniques,
        compounds,
        margin,
        warnings,
    }
}

/// A compound ranked first by one technique and outside [`DISAGREE_OUTSIDE`] (or missing) in
/// another.
fn disagreements(evidence: &[TechniqueEvidence]) -> Vec<String> {
    let mut out = Vec::new();
    for first in evidence.iter().filter(|e| e.rank == Some(1)) {
        for other in evidence.iter().filter(|e| e.technique != first.technique) {
            match other.rank {
                Some(r) if r > DISAGREE_OUTSIDE => out.push(format!(
                    "ranked 1 by {} but {r} by {}",
                    first.technique, other.technique
                )),
                None => out.push(format!(
                    "ranked 1 by {}, but no {} reference to confirm it",
                    first.technique, other.technique
                )),
                _ => {}
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::IdentityPolicy;
    use crate::search::{Confidence, judge};

    fn hit(compound_id: i64, name: &str, score: f64) -> Hit {
        crate::search::hit::test_hit(compound_id, name, score)
    }

    #[test]
    fn mean_with_missing_as_zero_and_missing_shown() {
        let ir = [
            hit(1, "acetone", 0.9),
            hit(2, "2-butanone", 0.8),
            hit(3, "propanal", 0.5),
        ];
        // The library has no MS of propanal.
        let ms = [hit(2, "2-butanone", 0.7), hit(1, "acetone", 0.5)];
        let f = fuse(&[(Technique::Ir, &ir), (Technique::MsEi, &ms)], 10);
        let names: Vec<&str> = f.compounds.iter().map(|c| c.name.as_str()).collect();
        assert_eq!(names, ["2-butanone", "acetone", "propanal"]);
        // 2-butanone (0.8 + 0.7) / 2 = 0.75 beats acetone (0.9 + 0.5) / 2 = 0.70, although IR
        // alone ranks acetone first; propanal (0.5 + 0) / 2 = 0.25.
        let fused: Vec<f64> = f.compounds.iter().map(|c| c.fused).collect();
        assert!((fused[0] - 0.75).abs() < 1e-12 && (fused[1] - 0.70).abs() < 1e-12);
        let propanal = &f.compounds[2];
        assert_eq!(propanal.fused, 0.25);
        assert_eq!(propanal.missing, [Technique::MsEi]);
        assert_eq!(propanal.evidence[1].score, None);
        assert!(
            f.warnings[0].code == WarningCode::TechniquesDisagree,
            "{:?}",
            f.warnings
        );
    }

    fn thresholds(weak_score: f64, close_margin: f64) -> Confidence {
        Confidence {
            weak_score,
            close_margin,
            strong_score: weak_score,
            derived: false,
            evidence: crate::search::Evidence::Score,
            retention_index: false,
        }
    }

    #[test]
    fn the_policy_counts_techniques_for_and_against_the_fused_first() {
        let ir = [hit(1, "acetone", 0.9), hit(2, "2-butanone", 0.6)];
        let ms = [hit(1, "acetone", 0.8), hit(2, "2-butanone", 0.5)];
        let nmr = [hit(2, "2-butanone", 0.7), hit(1, "acetone", 0.4)];
        // The library's only 13C reference is of propanal.
        let c13 = [hit(3, "propanal", 0.9)];
        let lists = [
            (Technique::Ir, &ir[..]),
            (Technique::MsEi, &ms[..]),
            (Technique::Nmr1h, &nmr[..]),
            (Technique::Nmr13c, &c13[..]),
        ];
        let f = fuse(&lists, 10);
        assert_eq!(f.compounds[0].name, "acetone");
        let usual = thresholds(0.3, 0.05);
        let verdict = |nmr: Confidence, policy: IdentityPolicy| {
            judge(&policy, &lists, &[usual, usual, nmr, usual], &f)
        };
        let default = IdentityPolicy::default();
        // IR and MS support acetone (gaps 0.3, scores above 0.3); NMR confidently puts
        // 2-butanone first (0.7 >= 0.3, gap 0.3 >= 0.05) and speaks against it; 13C, without
        // an acetone reference, is silent although it confidently ranks propanal first.
        let v = verdict(usual, default);
        assert_eq!(v.supporting, [Technique::Ir, Technique::MsEi]);
        assert_eq!(v.against.len(), 1);
        assert_eq!(v.against[0].technique, Technique::Nmr1h);
        assert_eq!(v.against[0].reason, "2-butanone is confidently first");
        assert!(!v.met);
        assert!(
            v.summary()
                .starts_with("not met: acetone is ranked first with a confident hit by 2 techniques (ir, ms-ei); against: nmr-1h"),
            "{}",
            v.summary()
        );
        // NMR's first hit too close to call (gap 0.3 < 0.5), and acetone's 0.4 not weak: silent.
        assert!(verdict(thresholds(0.3, 0.5), default).met);
        // NMR's best hit weak (0.7 < 0.75), and acetone's own 0.4 below 0.75: against.
        let v = verdict(thresholds(0.75, 0.05), default);
        assert_eq!(
            v.against[0].reason,
            "acetone scores 0.400, below the weak-match threshold 0.750"
        );
        assert!(!v.met);
        // MS's first hit acetone but weak (0.8 < 0.85): not supporting, and not against
        // either, since no other compound is confidently first.
        let v = judge(
            &default,
            &lists,
            &[usual, thresholds(0.85, 0.05), usual, usual],
            &f,
        );
        assert_eq!(v.supporting, [Technique::Ir]);
        assert!(
            v.against.iter().all(|o| o.technique != Technique::MsEi),
            "{:?}",
            v.against
        );
        // A policy that lets two supporting techniques outvote one against.
        let lenient = IdentityPolicy {
            min_techniques: 2,
            allow_contradiction: true,
        };
        assert!(verdict(usual, lenient).met);
        // Three required: two are not enough.
        let strict = IdentityPolicy {
            min_techniques: 3,
            allow_contradiction: true,
        };
        assert!(!verdict(usual, strict).met);
    }

    #[test]
    fn the_same_compound_first_under_two_spellings_is_no_disagreement() {
        let ir = [hit(1, "Toluene", 0.9), hit(2, "benzene", 0.5)];
        let ms = [hit(1, "toluene", 0.8), hit(2, "benzene", 0.4)];
        let f = fuse(&[(Technique::Ir, &ir[..]), (Technique::MsEi, &ms[..])], 10);
        assert!(
            f.warnings
                .iter()
                .all(|w| w.code != WarningCode::TechniquesDisagree),
            "{:?}",
            f.warnings
        );
        // Two compounds first: the warning names both.
        let ms = [hit(2, "benzene", 0.8), hit(1, "toluene", 0.4)];
        let f = fuse(&[(Technique::Ir, &ir[..]), (Technique::MsEi, &ms[..])], 10);
        assert!(
            f.warnings
                .iter()
                .any(|w| w.message.contains("ir: Toluene; ms-ei: benzene")),
            "{:?}",
            f.warnings
        );
    }

    #[test]
    fn disagreement_is_reported() {
        let ir: Vec<Hit> = (1..=8)
            .map(|i| hit(i, &format!("c{i}"), 1.0 - 0.05 * i as f64))
            .collect();
        let mut ms: Vec<Hit> = (2..=8)
            .map(|i| hit(i, &format!("c{i}"), 1.0 - 0.05 * i as f64))
            .collect();
        ms.push(hit(1, "c1", 0.1));
        let f = fuse(&[(Technique::Ir, &ir), (Technique::MsEi, &ms)], 10);
        let c1 = f.compounds.iter().find(|c| c.compound_id == 1).unwrap();
        assert_eq!(c1.disagreements, ["ranked 1 by ir but 8 by ms-ei"]);
        // c2 is ranked 1 by ms-ei and 2 by ir: no disagreement.
        assert!(
            f.compounds
                .iter()
                .find(|c| c.compound_id == 2)
                .unwrap()
                .disagreements
                .is_empty()
        );
        assert_eq!(
            fuse(&[(Technique::Ir, &ir), (Technique::MsEi, &ms)], 3)
                .compounds
                .len(),
            3
        );
    }
}
