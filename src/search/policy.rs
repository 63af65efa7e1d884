//! Whether the evidence of several techniques meets a library's identity policy.

use serde::Serialize;

use super::{Confidence, Evidence, Fusion, Hit, is_confident};
use crate::config::IdentityPolicy;
use crate::technique::Technique;

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
                // A weak first hit of the compound itself: not supporting, not against.
                Some(first) if first.compound_id == best.compound_id => {}
                // Another compound first, not confidently, and the compound's own best hit
                // would not pass as a match even in first place: the spectrum does not look
                // like it.
                Some(first) if c.evidence.of_scores(score, first.score) < c.weak_score => {
                    let reason = match c.evidence {
                        Evidence::Score => format!(
                            "{} scores {score:.3}, below the weak-match threshold {:.3}",
                            best.name, c.weak_score
                        ),
                        Evidence::Discriminant => format!(
                            "{} scores {score:.3} beside {} at {:.3}, below the weak-match threshold {:.3} ({})",
                            best.name,
                            first.name,
                            first.score,
                            c.weak_score,
                            Evidence::Discriminant.describe()
                        ),
                    };
                    against.push(Objection {
                        technique: *technique,
                        reason,
                    });
                }
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
