//! How sure a hit list may sound: the confidence thresholds derived by the evaluation, and
//! the plain-language warnings about a list.

use serde::{Deserialize, Serialize};

use super::hit::Hit;
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
    /// Whether the thresholds were derived for this scoring (else the fallback values).
    pub derived: bool,
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
}

const fn row(
    technique: Technique,
    measure: Measure,
    reverse: bool,
    weak_score: f64,
    close_margin: f64,
) -> Threshold {
    Threshold {
        technique,
        measure,
        reverse,
        weak_score,
        close_margin,
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
///   hits closer than it may swap places in a repeat.
///
/// Both are rounded up to two decimals. The unit test `thresholds_match_the_evaluation`
/// checks this table against `docs/evaluation.md`.
pub const THRESHOLDS: [Threshold; 13] = [
    row(Technique::Ir, Measure::Correlation, false, 0.82, 0.03),
    row(Technique::Ir, Measure::Cosine, false, 0.83, 0.03),
    row(Technique::Ir, Measure::Derivative, false, 0.76, 0.03),
    row(Technique::Raman, Measure::Correlation, false, 0.85, 0.03),
    row(Technique::Raman, Measure::Cosine, false, 0.85, 0.04),
    row(Technique::Raman, Measure::Derivative, false, 0.81, 0.04),
    row(Technique::MsEi, Measure::Composite, false, 0.77, 0.02),
    row(Technique::MsEi, Measure::Composite, true, 0.88, 0.02),
    row(Technique::MsEi, Measure::Cosine, false, 0.88, 0.02),
    row(Technique::Nmr1h, Measure::Cosine, false, 0.92, 0.03),
    row(Technique::Nmr1h, Measure::Correlation, false, 0.93, 0.03),
    row(Technique::Nmr13c, Measure::ShiftMatch, false, 0.67, 0.26),
    row(Technique::Nmr13c, Measure::Cosine, false, 0.67, 0.50),
];

/// The thresholds for a technique and its score parameters: the derived row for this
/// technique, measure and search direction (which matters only to the EI-MS composite); for
/// a combination the table lacks, the row of the technique's default scoring, marked as not
/// derived for this scoring.
pub fn confidence(technique: Technique, params: &ScoreParams) -> Confidence {
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
    Confidence {
        weak_score: row.weak_score,
        close_margin: row.close_margin,
        derived,
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
    hits.first().is_some_and(|best| best.score >= c.weak_score)
        && runner_up(hits).is_none_or(|(_, _, gap)| gap >= c.close_margin)
}

/// The plain-language warnings about a hit list: no hits, a weak best hit, top hits too close.
pub(super) fn list_warnings(hits: &[Hit], c: &Confidence) -> Vec<String> {
    let mut warnings = Vec::new();
    match hits.first() {
        None => warnings.push(
            "no library spectrum to compare with: check the technique, the --where query and the constraints"
                .to_string(),
        ),
        Some(best) if best.score < c.weak_score => warnings.push(format!(
            "best score {:.3} is below {:.3}: a weak match, not an identification",
            best.score, c.weak_score
        )),
        Some(_) => {}
    }
    if let Some((first, other, gap)) = runner_up(hits)
        && gap < c.close_margin
    {
        warnings.push(format!(
            "{} and {} differ by only {gap:.3} (less than {:.3}): too close to tell apart by this spectrum alone",
            first.name, other.name, c.close_margin
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
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/evaluation.md");
        let text = std::fs::read_to_string(path).expect("docs/evaluation.md");
        let mut rows = 0;
        let section = text
            .split("## Confidence thresholds")
            .nth(1)
            .expect("a thresholds section");
        for line in section
            .lines()
            .filter(|l| l.matches("**").count() == 4 && !l.starts_with("| technique"))
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
            assert_eq!((t.weak_score, t.close_margin), (bold[0], bold[1]), "{line}");
            rows += 1;
        }
        assert_eq!(
            rows,
            THRESHOLDS.len(),
            "every row of THRESHOLDS is in the evaluation"
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
