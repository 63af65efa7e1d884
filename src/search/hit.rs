//! One ranked library entry, and a candidate a constraint or the metadata query ruled out.

use serde::{Deserialize, Serialize};

use crate::library::Status;
use crate::score::Scores;
use crate::technique::Technique;

/// One ranked library entry.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Hit {
    /// 1 for the best.
    pub rank: usize,
    /// The combined score, 0..1.
    pub score: f64,
    /// The parts of the score.
    pub components: Scores,
    /// Library spectrum id.
    pub spectrum_id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Compound name.
    pub name: String,
    /// Formula.
    pub formula: Option<String>,
    /// CAS RN.
    pub cas: Option<String>,
    /// Technique.
    pub technique: Technique,
    /// Review status.
    pub status: Status,
    /// NMR solvent of the reference.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub solvent: Option<String>,
    /// Things to know about this hit (for example a solvent that differs from the unknown's).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub notes: Vec<String>,
}

/// A candidate that scored high enough to be listed but was ruled out.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Excluded {
    /// The combined score it had.
    pub score: f64,
    /// Library spectrum id.
    pub spectrum_id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Compound name.
    pub name: String,
    /// Formula.
    pub formula: Option<String>,
    /// Why it was ruled out.
    pub reason: String,
}

/// A hit with every score equal to `score`, for tests.
#[cfg(test)]
pub(crate) fn test_hit(compound_id: i64, name: &str, score: f64) -> Hit {
    use crate::score::Overlap;
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
            entropy: None,
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
