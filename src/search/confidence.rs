//! How sure a hit list may sound: the confidence thresholds derived by the evaluation, and
//! the plain-language warnings about a list.

use serde::{Deserialize, Serialize};

use super::hit::Hit;
use super::warning::{Warning, WarningCode};
use crate::score::{Measure, ScoreParams};
use crate::technique::Technique;

/// How sure a hit list may sound. Below `weak_score` the best hit is reported as a weak
/// match; two top hits of different compounds closer than `close_margin` are reported as too
/// close to tell apart.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Confidence {
    /// Weak-match threshold for the best combined score.
    pub weak_score: f64,
    /// Too-close threshold for the margin between hits 1 and 2.
    pub close_margin: f64,
    /// Strong-candidate threshold for the best combined score (0 in results saved before it
    /// existed, whose lists carried no verdict).
    #[serde(default)]
    pub strong_score: f64,
    /// Whether the thresholds were derived for this scoring (else the fallback values).
    pub derived: bool,
    /// What `weak_score` is compared with (the best score in results saved before it
    /// existed).
    #[serde(default)]
    pub evidence: Evidence,
    /// Whether the weak threshold is the one derived for searches given a retention index
    /// ([`Threshold::with_ri`]); absent (false) otherwise and in results saved before it.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub retention_index: bool,
}

/// What the no-match threshold (`weak_score`) is compared with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Evidence {
    /// The best hit's combined score.
    #[default]
    Score,
    /// The discriminant of Lam et al. (2007), "Development and validation of a spectral
    /// library searching method for peptide identification from MS/MS", Proteomics 7,
    /// 655-667: F = 0.6 D + 0.4 dD, with D the best hit's score and dD = (D - D2) / D its
    /// lead over the best hit of another compound, relative to D (D2 = 0 when no other
    /// compound was compared). The paper's penalty for a dot product dominated by a few peaks
    /// is left out. A real unknown of a compound the library lacks often still scores well
    /// against a relative, but it rarely stands out from the next compounds as a true match
    /// does; on the real tuning parts this separates the two better than the score alone
    /// (`docs/evaluation-real.md`).
    Discriminant,
}

impl Evidence {
    /// The evidence of a hit list (best first), `None` when it is empty.
    pub fn of(self, hits: &[Hit]) -> Option<f64> {
        let best = hits.first()?;
        Some(match self {
            Evidence::Score => best.score,
            Evidence::Discriminant => {
                let next = hits
                    .iter()
                    .find(|h| h.compound_id != best.compound_id)
                    .map_or(0.0, |h| h.score);
                self.of_scores(best.score, next)
            }
        })
    }

    /// The evidence of a compound scoring `score` beside another compound's best `next`
    /// (negative lead when `next` is higher).
    pub fn of_scores(self, score: f64, next: f64) -> f64 {
        match self {
            Evidence::Score => score,
            Evidence::Discriminant => {
                let lead = if score > 0.0 {
                    (score - next) / score
                } else {
                    0.0
                };
                0.6 * score + 0.4 * lead
            }
        }
    }

    /// How the evidence is named in a sentence.
    pub fn describe(self) -> &'static str {
        match self {
            Evidence::Score => "the best score",
            Evidence::Discriminant => {
                "the best score and its lead over the next compound (0.6 x score + 0.4 x relative lead)"
            }
        }
    }
}

/// One row of the derived thresholds: a technique, its ranking measure and search direction.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Threshold {
    /// Technique.
    pub technique: Technique,
    /// Ranking measure.
    pub measure: Measure,
    /// EI-MS reverse search.
    pub reverse: bool,
    /// See [`Confidence::weak_score`].
    pub weak_score: f64,
    /// See [`Confidence::close_margin`].
    pub close_margin: f64,
    /// See [`Confidence::strong_score`].
    pub strong_score: f64,
    /// See [`Confidence::evidence`].
    pub evidence: Evidence,
    /// The weak threshold and its evidence for a search given a retention index (`--ri`),
    /// where derived: such a search competes only with the references inside its window,
    /// so its evidence is distributed otherwise than a search by the spectrum alone.
    pub with_ri: Option<(f64, Evidence)>,
}

impl Threshold {
    /// This row with a weak threshold of its own for searches given a retention index.
    const fn and_with_ri(self, weak: f64, evidence: Evidence) -> Threshold {
        Threshold {
            with_ri: Some((weak, evidence)),
            ..self
        }
    }
}

const fn row(
    technique: Technique,
    measure: Measure,
    reverse: bool,
    weak_score: f64,
    close_margin: f64,
    strong_score: f64,
) -> Threshold {
    Threshold {
        technique,
        measure,
        reverse,
        weak_score,
        close_margin,
        strong_score,
        evidence: Evidence::Score,
        with_ri: None,
    }
}

/// A row whose weak threshold applies to the [`Evidence::Discriminant`].
const fn discriminant_row(
    technique: Technique,
    measure: Measure,
    weak: f64,
    close_margin: f64,
    strong_score: f64,
) -> Threshold {
    Threshold {
        evidence: Evidence::Discriminant,
        ..row(technique, measure, false, weak, close_margin, strong_score)
    }
}

/// The confidence thresholds: the weak-score and close-margin thresholds of every technique
/// and measure, derived by the evaluation harness (`examples/evaluate/`; its output, with
/// the derivation written out, is `docs/evaluation.md`) from degraded unknowns at the
/// moderate level, with the default preparation and otherwise default parameters:
///
/// - weak score: the 95th percentile of the best combined score of a wrong compound, so a
///   best hit below it scores no better than wrong compounds do in one unknown in twenty;
/// - close margin: 1.96 times the standard deviation with which the score difference of the
///   first two compounds changes between repeat measurements of the same sample, so two top
///   hits closer than it may swap places in a repeat;
/// - strong score: the 99th percentile of the best combined score of a wrong compound (at
///   least the weak score), so a best hit above it outscores the best wrong compound in all
///   but one unknown in a hundred.
///
/// Both are rounded up to two decimals.
///
/// The weak threshold of the two default scorings measured on real spectra (Raman,
/// derivative; EI-MS, entropy) comes instead from the real tuning parts
/// (`examples/evaluate_real/`; its output is `docs/evaluation-real.md`): a generated library
/// cannot show how far a real second instrument moves a true match, nor how close real
/// isomers come. There it applies to the [`Evidence::Discriminant`] (which met the targets
/// better than the score alone on those tuning parts), and it is the threshold that best
/// meets both verdict targets: at least 90 % of searches with the true compound withdrawn
/// below it, at most 5 % of right first hits below it.
///
/// The unit test `thresholds_match_the_evaluation` checks this table against both files.
///
/// The EI-MS entropy row also carries a weak threshold of its own for searches given a
/// retention index, derived on the tuning part of the real EI protocol searched with one.
pub const THRESHOLDS: [Threshold; 14] = [
    row(Technique::Ir, Measure::Correlation, false, 0.82, 0.03, 0.93),
    row(Technique::Ir, Measure::Cosine, false, 0.83, 0.03, 0.90),
    row(Technique::Ir, Measure::Derivative, false, 0.76, 0.03, 0.88),
    discriminant_row(Technique::Raman, Measure::Derivative, 0.38, 0.04, 0.91),
    row(
        Technique::Raman,
        Measure::Correlation,
        false,
        0.59,
        0.04,
        0.68,
    ),
    row(Technique::Raman, Measure::Cosine, false, 0.53, 0.04, 0.58),
    discriminant_row(Technique::MsEi, Measure::Entropy, 0.52, 0.01, 0.88)
        .and_with_ri(RI_WEAK, RI_EVIDENCE),
    row(Technique::MsEi, Measure::Composite, false, 0.85, 0.02, 0.96),
    row(Technique::MsEi, Measure::Composite, true, 0.98, 0.02, 1.00),
    row(Technique::MsEi, Measure::Cosine, false, 0.94, 0.03, 0.96),
    row(Technique::Nmr1h, Measure::Cosine, false, 0.92, 0.03, 0.96),
    row(
        Technique::Nmr1h,
        Measure::Correlation,
        false,
        0.93,
        0.03,
        0.97,
    ),
    row(
        Technique::Nmr13c,
        Measure::ShiftMatch,
        false,
        0.67,
        0.26,
        0.92,
    ),
    row(Technique::Nmr13c, Measure::Cosine, false, 0.67, 0.50, 1.00),
];

/// The weak threshold of an EI-MS entropy search given a retention index, and what it applies
/// to, derived on the real tuning part (`docs/evaluation-real.md`, "searched with its
/// retention index").
const RI_WEAK: f64 = 0.77;
const RI_EVIDENCE: Evidence = Evidence::Score;

/// The thresholds for a technique and its score parameters: the derived row for this
/// technique, measure and search direction (which matters only to the EI-MS composite); for
/// a combination the table lacks, the row of the technique's default scoring, marked as not
/// derived for this scoring.
pub fn confidence(technique: Technique, params: &ScoreParams) -> Confidence {
    confidence_for(technique, params, false)
}

/// [`confidence`] for a search that is (`retention_index`) or is not given a retention
/// index: the row's weak threshold for such searches where one was derived
/// ([`Threshold::with_ri`]), else the same as without.
pub fn confidence_for(
    technique: Technique,
    params: &ScoreParams,
    retention_index: bool,
) -> Confidence {
    // The search direction shapes only the composite score.
    let direction = |p: &ScoreParams| {
        technique == Technique::MsEi && p.measure == Measure::Composite && p.composite.reverse
    };
    let find = |p: &ScoreParams| {
        THRESHOLDS.iter().find(|t| {
            t.technique == technique && t.measure == p.measure && t.reverse == direction(p)
        })
    };
    let (row, derived) = match find(params) {
        Some(r) => (r, true),
        None => (
            find(&ScoreParams::default_for(technique))
                .expect("every technique has a row for its default measure"),
            false,
        ),
    };
    let (weak_score, evidence, retention_index) = match row.with_ri {
        Some((weak, evidence)) if retention_index && derived => (weak, evidence, true),
        _ => (row.weak_score, row.evidence, false),
    };
    Confidence {
        weak_score,
        close_margin: row.close_margin,
        strong_score: row.strong_score,
        derived,
        evidence,
        retention_index,
    }
}

/// What a hit list comes to, in one machine-readable word and plain wording
/// ([`Verdict::sentence`]). Derived from the best hit's score and its lead over the next
/// compound against the technique's [`Confidence`] thresholds; a library match is evidence,
/// not proof of identity, whatever the verdict.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "verdict", rename_all = "kebab-case")]
pub enum Verdict {
    /// The best hit clears the strong score and leads every other compound by at least the
    /// close margin: a confident identification candidate, to be confirmed.
    StrongCandidate {
        /// The compound.
        name: String,
        /// Its combined score.
        score: f64,
    },
    /// The best hit clears the weak score, not the strong one, and leads every other
    /// compound by at least the close margin.
    Probable {
        /// The compound.
        name: String,
        /// Its combined score.
        score: f64,
    },
    /// The best hit clears the weak score, but other compounds score within the close margin
    /// of it: this spectrum alone cannot tell them apart.
    Ambiguous {
        /// The compounds within the close margin of the best, best first.
        candidates: Vec<String>,
        /// Best score minus the lowest score among them.
        spread: f64,
    },
    /// The evidence falls below the weak threshold: the compound is probably not in the
    /// library (or the spectrum is too poor to match).
    NoAcceptableMatch {
        /// The best combined score, if anything was compared.
        best: Option<f64>,
        /// The weak threshold the evidence fell below.
        threshold: f64,
        /// The [`Evidence::Discriminant`], when that is what was compared.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        discriminant: Option<f64>,
    },
    /// A combination of library spectra explains the unknown clearly better than its best
    /// hit alone.
    PossibleMixture {
        /// The components, largest share first.
        components: Vec<String>,
    },
}

impl Verdict {
    /// The machine-readable word, as the JSON's `verdict` field and the CSV have it.
    pub fn word(&self) -> &'static str {
        match self {
            Verdict::StrongCandidate { .. } => "strong-candidate",
            Verdict::Probable { .. } => "probable",
            Verdict::Ambiguous { .. } => "ambiguous",
            Verdict::NoAcceptableMatch { .. } => "no-acceptable-match",
            Verdict::PossibleMixture { .. } => "possible-mixture",
        }
    }

    /// The verdict in plain words, for the end of a hit list.
    pub fn sentence(&self, c: &Confidence) -> String {
        match self {
            Verdict::StrongCandidate { name, score } => format!(
                "strong candidate: {name} (score {score:.3}, at or above {:.2}, and clear of every other compound by {:.2} or more); confirm it by the lab's own procedure",
                c.strong_score, c.close_margin
            ),
            Verdict::Probable { name, score } if c.evidence == Evidence::Score => format!(
                "probable match: {name} (score {score:.3}, between {:.2} and {:.2}); look for corroborating evidence before relying on it",
                c.weak_score, c.strong_score
            ),
            Verdict::Probable { name, score } => format!(
                "probable match: {name} (score {score:.3}, below {:.2}, standing out enough from the next compound); look for corroborating evidence before relying on it",
                c.strong_score
            ),
            Verdict::Ambiguous { candidates, spread } => format!(
                "ambiguous: {} score within {spread:.3} of each other (less than {:.2}); this spectrum alone cannot tell them apart",
                join_names(candidates),
                c.close_margin
            ),
            Verdict::NoAcceptableMatch {
                best: Some(best),
                threshold,
                discriminant: None,
            } => format!(
                "no acceptable match: the best score {best:.3} is below {threshold:.2}; the compound is probably not in the library"
            ),
            Verdict::NoAcceptableMatch {
                best: Some(best),
                threshold,
                discriminant: Some(d),
            } => format!(
                "no acceptable match: the best score {best:.3} stands out too little from the next compound ({} gives {d:.3}, below {threshold:.2}); the compound is probably not in the library",
                Evidence::Discriminant.describe()
            ),
            Verdict::NoAcceptableMatch { best: None, .. } => {
                "no acceptable match: no library spectrum was compared".to_string()
            }
            Verdict::PossibleMixture { components } => format!(
                "possibly a mixture: {} together explain the unknown clearly better than any one of them",
                join_names(components)
            ),
        }
    }
}

/// `a`, `a and b`, `a, b and c`.
fn join_names(names: &[String]) -> String {
    match names {
        [] => String::new(),
        [one] => one.clone(),
        [rest @ .., last] => format!("{} and {last}", rest.join(", ")),
    }
}

/// The verdict on a hit list (best first) under thresholds `c`; see [`Verdict`]. Mixtures are
/// judged elsewhere (they need the spectra, not only the scores).
pub fn verdict(hits: &[Hit], c: &Confidence) -> Verdict {
    let (Some(best), Some(evidence)) = (hits.first(), c.evidence.of(hits)) else {
        return Verdict::NoAcceptableMatch {
            best: None,
            threshold: c.weak_score,
            discriminant: None,
        };
    };
    if evidence < c.weak_score {
        return Verdict::NoAcceptableMatch {
            best: Some(best.score),
            threshold: c.weak_score,
            discriminant: (c.evidence == Evidence::Discriminant).then_some(evidence),
        };
    }
    // Every other compound within the close margin, each once, at its best hit.
    let mut close: Vec<&Hit> = Vec::new();
    for h in &hits[1..] {
        if best.score - h.score < c.close_margin
            && h.compound_id != best.compound_id
            && !close.iter().any(|o| o.compound_id == h.compound_id)
        {
            close.push(h);
        }
    }
    if let Some(last) = close.last() {
        let mut candidates = vec![best.name.clone()];
        candidates.extend(close.iter().map(|h| h.name.clone()));
        return Verdict::Ambiguous {
            candidates,
            spread: best.score - last.score,
        };
    }
    if best.score >= c.strong_score {
        Verdict::StrongCandidate {
            name: best.name.clone(),
            score: best.score,
        }
    } else {
        Verdict::Probable {
            name: best.name.clone(),
            score: best.score,
        }
    }
}

/// The first hit, the nearest hit of another compound, and the gap between their scores: the
/// gap decides whether the first can be told apart.
pub(crate) fn runner_up(hits: &[Hit]) -> Option<(&Hit, &Hit, f64)> {
    let first = hits.first()?;
    let other = hits
        .iter()
        .skip(1)
        .find(|h| h.compound_id != first.compound_id)?;
    Some((first, other, first.score - other.score))
}

/// True when a hit list's first hit passes both confidence thresholds: its score is not weak
/// and the nearest hit of another compound is not too close.
pub fn is_confident(hits: &[Hit], c: &Confidence) -> bool {
    c.evidence.of(hits).is_some_and(|e| e >= c.weak_score)
        && runner_up(hits).is_none_or(|(_, _, gap)| gap >= c.close_margin)
}

/// The plain-language warnings about a hit list: no hits, a weak best hit, top hits too close.
pub(super) fn list_warnings(hits: &[Hit], c: &Confidence) -> Vec<Warning> {
    let mut warnings = Vec::new();
    match hits.first() {
        None => warnings.push(Warning::new(
            WarningCode::NoCandidates,
            "no library spectrum to compare with: check the technique, the --where query and the constraints",
        )),
        Some(best) => match c.evidence.of(hits) {
            Some(e) if e < c.weak_score && c.evidence == Evidence::Score => {
                warnings.push(Warning::new(
                    WarningCode::WeakMatch,
                    format!(
                        "best score {:.3} is below {:.3}: a weak match, not an identification",
                        best.score, c.weak_score
                    ),
                ))
            }
            Some(e) if e < c.weak_score => warnings.push(Warning::new(
                WarningCode::WeakMatch,
                format!(
                    "best score {:.3} stands out too little from the next compound ({} gives {e:.3}, below {:.3}): a weak match, not an identification",
                    best.score,
                    Evidence::Discriminant.describe(),
                    c.weak_score
                ),
            )),
            _ => {}
        },
    }
    if let Some((first, other, gap)) = runner_up(hits)
        && gap < c.close_margin
    {
        warnings.push(Warning::new(
            WarningCode::TooClose,
            format!(
                "{} and {} differ by only {gap:.3} (less than {:.3}): too close to tell apart by this spectrum alone",
                first.name, other.name, c.close_margin
            ),
        ));
    }
    warnings
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thresholds_match_the_evaluation() {
        // docs/evaluation.md is the output of examples/evaluate/; its threshold table has
        // the technique, the measure, then the weak score and close margin in bold.
        let docs = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs");
        let text = std::fs::read_to_string(docs.join("evaluation.md")).expect("docs/evaluation.md");
        // docs/evaluation-real.md is the output of examples/evaluate_real/; its thresholds
        // table has the technique, the measure, what the threshold applies to and, on the
        // chosen row, the weak threshold in bold, which overrides the generated spectra's weak
        // score (and its evidence) for that row.
        let real = std::fs::read_to_string(docs.join("evaluation-real.md"))
            .expect("docs/evaluation-real.md");
        let real_weak: Vec<(Technique, Measure, bool, Evidence, f64)> = real
            .split("## Verdict thresholds from the real tuning parts")
            .nth(1)
            .expect("a real thresholds section")
            .lines()
            .filter(|l| l.starts_with("| ") && l.matches("**").count() == 2)
            .filter(|l| !l.starts_with("| technique"))
            .map(|line| {
                let cells: Vec<&str> = line.trim_matches('|').split('|').map(str::trim).collect();
                let weak = cells
                    .iter()
                    .find_map(|c| c.strip_prefix("**")?.strip_suffix("**")?.parse().ok())
                    .unwrap_or_else(|| panic!("a bold weak score in {line}"));
                let with_ri = match cells[2] {
                    "none" => false,
                    "given" => true,
                    other => panic!("retention index {other}?"),
                };
                let evidence = match cells[3] {
                    "best score" => Evidence::Score,
                    "discriminant" => Evidence::Discriminant,
                    other => panic!("threshold on {other}?"),
                };
                (
                    cells[0].parse().unwrap(),
                    cells[1].parse().unwrap(),
                    with_ri,
                    evidence,
                    weak,
                )
            })
            .collect();
        assert_eq!(
            real_weak.len(),
            3,
            "EI-MS (without and with a retention index) and Raman rows from real spectra"
        );
        for &(technique, measure, _, evidence, weak) in real_weak.iter().filter(|r| r.2) {
            let t = THRESHOLDS
                .iter()
                .find(|t| t.technique == technique && t.measure == measure && !t.reverse)
                .expect("a THRESHOLDS row for the retention-index threshold");
            assert_eq!(t.with_ri, Some((weak, evidence)), "{technique} {measure}");
        }
        assert_eq!(
            THRESHOLDS.iter().filter(|t| t.with_ri.is_some()).count(),
            real_weak.iter().filter(|r| r.2).count(),
            "every retention-index threshold is in the evaluation"
        );
        let real_weak: Vec<(Technique, Measure, Evidence, f64)> = real_weak
            .into_iter()
            .filter(|r| !r.2)
            .map(|(t, m, _, e, w)| (t, m, e, w))
            .collect();
        let mut real_rows = 0;
        let mut rows = 0;
        let section = text
            .split("## Confidence thresholds")
            .nth(1)
            .expect("a thresholds section");
        for line in section
            .lines()
            .filter(|l| l.matches("**").count() == 6 && !l.starts_with("| technique"))
        {
            let cells: Vec<&str> = line.trim_matches('|').split('|').map(str::trim).collect();
            let technique: Technique = cells[0].parse().unwrap();
            let (measure, reverse) = match cells[1].split_once(", ") {
                Some((m, "reverse")) => (m, true),
                Some((m, "forward")) => (m, false),
                _ => (cells[1], false),
            };
            let measure: Measure = measure.parse().unwrap();
            let bold: Vec<f64> = cells
                .iter()
                .filter_map(|c| c.strip_prefix("**")?.strip_suffix("**")?.parse().ok())
                .collect();
            let t = THRESHOLDS
                .iter()
                .find(|t| t.technique == technique && t.measure == measure && t.reverse == reverse)
                .unwrap_or_else(|| panic!("no THRESHOLDS row for {line}"));
            let (weak, evidence) = match real_weak
                .iter()
                .find(|(tq, m, _, _)| *tq == technique && *m == measure && !reverse)
            {
                Some(&(_, _, e, w)) => {
                    real_rows += 1;
                    (w, e)
                }
                None => (bold[0], Evidence::Score),
            };
            assert_eq!(
                (t.weak_score, t.close_margin, t.strong_score, t.evidence),
                (weak, bold[1], bold[2], evidence),
                "{line}"
            );
            rows += 1;
        }
        assert_eq!(
            real_rows,
            real_weak.len(),
            "each real row is a THRESHOLDS row"
        );
        assert_eq!(
            rows,
            THRESHOLDS.len(),
            "every row of THRESHOLDS is in the evaluation"
        );
    }

    #[test]
    fn a_search_given_a_retention_index_takes_the_threshold_derived_for_it() {
        let entropy = ScoreParams::default_for(Technique::MsEi);
        let (without, with) = (
            confidence_for(Technique::MsEi, &entropy, false),
            confidence_for(Technique::MsEi, &entropy, true),
        );
        assert_eq!(without, confidence(Technique::MsEi, &entropy));
        assert!(!without.retention_index && with.retention_index);
        assert_eq!((with.weak_score, with.evidence), (RI_WEAK, RI_EVIDENCE));
        // The close margin and strong score are the spectrum's either way.
        assert_eq!(
            (with.close_margin, with.strong_score),
            (without.close_margin, without.strong_score)
        );
        // A scoring without a threshold of its own for retention indices keeps its row's.
        let mut cosine = entropy.clone();
        cosine.measure = Measure::Cosine;
        assert_eq!(
            confidence_for(Technique::MsEi, &cosine, true),
            confidence(Technique::MsEi, &cosine)
        );
        assert_eq!(
            confidence_for(
                Technique::Ir,
                &ScoreParams::default_for(Technique::Ir),
                true
            ),
            confidence(Technique::Ir, &ScoreParams::default_for(Technique::Ir))
        );
    }

    #[test]
    fn each_verdict_follows_from_the_scores_and_thresholds() {
        use crate::search::hit::test_hit as hit;
        let c = Confidence {
            weak_score: 0.80,
            close_margin: 0.03,
            strong_score: 0.90,
            derived: true,
            evidence: Evidence::Score,
            retention_index: false,
        };
        let word = |hits: &[Hit]| verdict(hits, &c).word();
        assert_eq!(word(&[]), "no-acceptable-match");
        // Below the weak score: not in the library, whatever the lead.
        assert_eq!(
            word(&[hit(1, "a", 0.79), hit(2, "b", 0.40)]),
            "no-acceptable-match"
        );
        // A second spectrum of the same compound close behind is no ambiguity.
        let same = [hit(1, "a", 0.95), hit(1, "a", 0.94), hit(2, "b", 0.80)];
        assert_eq!(word(&same), "strong-candidate");
        assert_eq!(word(&[hit(1, "a", 0.85), hit(2, "b", 0.70)]), "probable");
        // Two other compounds within the close margin: all three named, best first.
        let close = [
            hit(1, "a", 0.95),
            hit(2, "b", 0.94),
            hit(3, "c", 0.93),
            hit(4, "d", 0.91),
        ];
        match verdict(&close, &c) {
            Verdict::Ambiguous { candidates, spread } => {
                assert_eq!(candidates, ["a", "b", "c"]);
                assert!((spread - 0.02).abs() < 1e-12);
            }
            v => panic!("{v:?}"),
        }
        assert!(verdict(&close, &c).sentence(&c).contains("a, b and c"));
        // Exactly at the thresholds counts as reaching them.
        assert_eq!(
            word(&[hit(1, "a", 0.90), hit(2, "b", 0.87)]),
            "strong-candidate"
        );
    }

    #[test]
    fn the_discriminant_weighs_the_score_and_the_relative_lead_as_lam_et_al_2007() {
        use crate::search::hit::test_hit as hit;
        // F = 0.6 D + 0.4 (D - D2) / D (Lam et al. 2007; the same weights in OpenMS's
        // SpectraSTSimilarityScore::compute_F, without its dot-bias term): D = 0.9 and
        // D2 = 0.6 give 0.54 + 0.4 / 3 = 0.673333...
        let e = Evidence::Discriminant;
        let hits = [hit(1, "a", 0.9), hit(1, "a", 0.85), hit(2, "b", 0.6)];
        assert!((e.of(&hits).unwrap() - (0.54 + 0.4 / 3.0)).abs() < 1e-12);
        // No other compound: the whole score is the lead.
        assert!((e.of(&[hit(1, "a", 0.5)]).unwrap() - 0.7).abs() < 1e-12);
        assert_eq!(e.of(&[]), None);
        assert_eq!(Evidence::Score.of(&hits), Some(0.9));
        // The same best score is a match when it stands out, no match when it does not.
        let c = Confidence {
            weak_score: 0.55,
            close_margin: 0.01,
            strong_score: 0.95,
            derived: true,
            evidence: e,
            retention_index: false,
        };
        assert_eq!(verdict(&hits, &c).word(), "probable");
        let crowded = [hit(1, "a", 0.9), hit(2, "b", 0.88), hit(3, "c", 0.87)];
        let v = verdict(&crowded, &c);
        assert_eq!(v.word(), "no-acceptable-match");
        assert!(v.sentence(&c).contains("stands out too little"), "{v:?}");
        assert!(!is_confident(&crowded, &c) && is_confident(&hits, &c));
        assert!(
            list_warnings(&crowded, &c)[0]
                .message
                .contains("stands out too little")
        );
    }

    #[test]
    fn every_technique_has_thresholds_for_its_default_scoring() {
        for t in Technique::ALL {
            let c = confidence(t, &ScoreParams::default_for(t));
            assert!(c.derived, "{t}");
            assert!(c.weak_score > 0.0 && c.close_margin > 0.0);
        }
        // The search direction does not change the cosine, so it keeps the cosine's row.
        let mut p = ScoreParams::default_for(Technique::MsEi);
        p.measure = Measure::Cosine;
        for reverse in [false, true] {
            p.composite.reverse = reverse;
            let c = confidence(Technique::MsEi, &p);
            assert!(c.derived, "{p:?}");
        }
    }
}
