//! Evidence from several techniques: per-compound fusion of hit lists.

use std::collections::BTreeMap;

use serde::Serialize;

use super::{
    Confidence, Constraints, Hit, LibraryStamp, Parameters, Request, UnknownStamp, is_confident,
    run_search,
};
use crate::config::IdentityPolicy;
use crate::error::{Error, Result};
use crate::library::Library;
use crate::prepare::Solvent;
use crate::spectrum::{XUnit, YUnit};
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
    /// Techniques searched for which the library has no spectrum of this compound.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub missing: Vec<Technique>,
    /// Where the techniques disagree about this compound.
    #[serde(skip_serializing_if = "Vec::is_empty")]
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
    pub warnings: Vec<String>,
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
    let firsts: Vec<(Technique, &str)> = lists
        .iter()
        .filter_map(|(t, hits)| hits.first().map(|h| (*t, h.name.as_str())))
        .collect();
    if firsts.windows(2).any(|w| w[0].1 != w[1].1) {
        let said: Vec<String> = firsts.iter().map(|(t, n)| format!("{t}: {n}")).collect();
        warnings.push(format!(
            "the techniques rank different compounds first ({})",
            said.join("; ")
        ));
    }
    if let Some(best) = compounds.first()
        && !best.missing.is_empty()
    {
        let names: Vec<&str> = best.missing.iter().map(|t| t.name()).collect();
        warnings.push(format!(
            "the best compound, {}, has no reference spectrum for {}: that evidence is missing, not in its favour",
            best.name,
            names.join(", ")
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

/// One unknown file of a multi-technique identification.
#[derive(Debug, Clone)]
pub struct UnknownInput {
    /// The technique it was measured with.
    pub technique: Technique,
    /// The file.
    pub file: std::path::PathBuf,
    /// x unit, when not the technique's usual one.
    pub x_unit: Option<XUnit>,
    /// y unit, when declared.
    pub y_unit: Option<YUnit>,
    /// NMR solvent.
    pub solvent: Option<Solvent>,
}

/// One technique's part of an identification: what was searched and how.
#[derive(Debug, Clone, Serialize)]
pub struct TechniqueRun {
    /// The unknown.
    pub unknown: UnknownStamp,
    /// The parameters that decided its ranking.
    pub parameters: Parameters,
    /// Library spectra compared.
    pub candidates: usize,
    /// Warnings about the unknown and its hit list, as `search` gives them.
    pub warnings: Vec<String>,
    /// The thresholds its hit list was judged by.
    pub confidence: Confidence,
}

/// The result of `identify`: every technique searched, and the fused list.
#[derive(Debug, Clone, Serialize)]
pub struct IdentifyReport {
    /// whorl version.
    pub tool_version: String,
    /// When the searches ran (UTC).
    pub searched_at: String,
    /// The library.
    pub library: LibraryStamp,
    /// One entry per technique, in the order given.
    pub runs: Vec<TechniqueRun>,
    /// The fused list.
    pub fusion: Fusion,
    /// Whether the evidence meets the library's identity policy.
    pub policy: PolicyVerdict,
    /// The caution that goes with every hit list.
    pub caution: String,
}

/// What a lab asks of the evidence before a fused result may be reported as meeting its
/// identification criteria: the `[identity]` table of `whorl.toml`.
///
/// A technique whose evidence speaks against a compound, and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Objection {
    /// The technique.
    pub technique: Technique,
    /// Why, in words.
    pub reason: String,
}

/// Whether an identification meets the library's [`IdentityPolicy`], and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PolicyVerdict {
    /// True when the policy is met for the fused list's first compound.
    pub met: bool,
    /// The rule applied, in words.
    pub rule: String,
    /// The policy applied.
    pub policy: IdentityPolicy,
    /// The compound judged: the fused list's first.
    pub compound: Option<String>,
    /// Techniques that confidently rank it first.
    pub supporting: Vec<Technique>,
    /// Techniques whose evidence speaks against it.
    pub against: Vec<Objection>,
}

impl PolicyVerdict {
    /// The verdict in one line: met or not, and why.
    pub fn summary(&self) -> String {
        let Some(compound) = &self.compound else {
            return "not met: no compound to judge".to_string();
        };
        let n = self.supporting.len();
        let mut why = format!(
            "{compound} is ranked first with a confident hit by {n} technique{}",
            if n == 1 { "" } else { "s" }
        );
        if n > 0 {
            let names: Vec<&str> = self.supporting.iter().map(|t| t.name()).collect();
            why.push_str(&format!(" ({})", names.join(", ")));
        }
        for o in &self.against {
            why.push_str(&format!("; against: {}: {}", o.technique, o.reason));
        }
        format!(
            "{}: {why}; the library asks for {}{} ([identity] in whorl.toml)",
            if self.met { "met" } else { "not met" },
            self.policy.min_techniques,
            if self.policy.allow_contradiction {
                ""
            } else {
                " and none against"
            }
        )
    }
}

/// Judges the fused list's first compound against the policy. `lists` holds each technique's
/// hit list and `confidence` the thresholds it was judged by, in the same order.
pub fn judge(
    policy: &IdentityPolicy,
    lists: &[(Technique, &[Hit])],
    confidence: &[Confidence],
    fusion: &Fusion,
) -> PolicyVerdict {
    let best = fusion.compounds.first();
    let mut supporting = Vec::new();
    let mut against = Vec::new();
    if let Some(best) = best {
        for (((technique, hits), c), evidence) in lists.iter().zip(confidence).zip(&best.evidence) {
            let Some(score) = evidence.score else {
                continue; // no reference of the compound: this technique is silent
            };
            let sure = is_confident(hits, c);
            match hits.first() {
                Some(first) if sure && first.compound_id == best.compound_id => {
                    supporting.push(*technique);
                    continue;
                }
                Some(first) if sure => against.push(Objection {
                    technique: *technique,
                    reason: format!("{} is confidently first", first.name),
                }),
                _ if score < c.weak_score => against.push(Objection {
                    technique: *technique,
                    reason: format!(
                        "{} scores {score:.3}, below the weak-match threshold {:.3}",
                        best.name, c.weak_score
                    ),
                }),
                _ => {}
            }
        }
    }
    let met = best.is_some()
        && supporting.len() >= policy.min_techniques
        && (policy.allow_contradiction || against.is_empty());
    PolicyVerdict {
        met,
        rule: policy.rule(),
        policy: *policy,
        compound: best.map(|c| c.name.clone()),
        supporting,
        against,
    }
}

/// How `identify` searches: the constraints and length of the fused list, the identity policy,
/// and the library's own search settings.
pub struct IdentifyOptions<'a> {
    /// Constraints applied to every technique's search.
    pub constraints: Constraints,
    /// Compounds listed.
    pub top: usize,
    /// What the evidence must show to meet the library's identification criteria.
    pub policy: IdentityPolicy,
    /// Applied to each technique's request before it runs (the library's `whorl.toml`).
    pub configure: &'a dyn Fn(&mut Request),
}

/// Searches each unknown against the library with its technique's default scoring (adjusted
/// by `options.configure`) and the given constraints, fuses the hit lists per compound
/// ([`fuse`]) and judges the result against the identity policy ([`judge`]).
pub fn identify(
    library: &Library,
    unknowns: &[UnknownInput],
    options: &IdentifyOptions<'_>,
) -> Result<IdentifyReport> {
    if unknowns.is_empty() {
        return Err(Error::invalid(
            "no unknown to identify",
            "give at least one of --ir, --raman, --ms-ei, --nmr-1h, --nmr-13c",
        ));
    }
    for (i, u) in unknowns.iter().enumerate() {
        if unknowns[..i].iter().any(|v| v.technique == u.technique) {
            return Err(Error::invalid(
                format!("two unknowns for {}", u.technique),
                "give one file per technique",
            ));
        }
    }
    let mut runs = Vec::new();
    let mut hit_lists = Vec::new();
    for u in unknowns {
        let mut request = Request::new(u.technique);
        (options.configure)(&mut request);
        request.top = usize::MAX;
        request.constraints = options.constraints.clone();
        let report = run_search(library, &u.file, u.x_unit, u.y_unit, u.solvent, &request)?;
        let mut parameters = report.parameters;
        parameters.top = options.top;
        runs.push(TechniqueRun {
            unknown: report.unknown,
            parameters,
            candidates: report.candidates,
            warnings: report.warnings,
            confidence: report.confidence,
        });
        hit_lists.push((u.technique, report.hits));
    }
    let borrowed: Vec<(Technique, &[Hit])> =
        hit_lists.iter().map(|(t, h)| (*t, h.as_slice())).collect();
    let fusion = fuse(&borrowed, options.top);
    let confidence: Vec<Confidence> = runs.iter().map(|r| r.confidence).collect();
    let policy = judge(&options.policy, &borrowed, &confidence, &fusion);
    Ok(IdentifyReport {
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        searched_at: crate::library::now(),
        library: LibraryStamp::of(library)?,
        runs,
        fusion,
        policy,
        caution: crate::CAUTION.to_string(),
    })
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
    use crate::library::Status;
    use crate::score::{Overlap, Scores};

    fn hit(compound_id: i64, name: &str, score: f64) -> Hit {
        Hit {
            rank: 0,
            score,
            components: Scores {
                combined: score,
                spectral: score,
                cosine: score,
                correlation: None,
                derivative: None,
                composite: None,
                shift_match: None,
                peak_overlap: Overlap {
                    matched: 0,
                    unknown_peaks: 0,
                    reference_peaks: 0,
                    forward: 0.0,
                    reverse: 0.0,
                    jaccard: 0.0,
                },
            },
            spectrum_id: compound_id * 10,
            compound_id,
            name: name.into(),
            formula: None,
            cas: None,
            technique: Technique::Ir,
            status: Status::Pending,
            solvent: None,
            notes: vec![],
        }
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
            f.warnings[0].contains("different compounds first"),
            "{:?}",
            f.warnings
        );
    }

    fn thresholds(weak_score: f64, close_margin: f64) -> Confidence {
        Confidence {
            weak_score,
            close_margin,
            derived: false,
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
