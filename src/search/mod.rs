//! Ranking library spectra against an unknown: a search is planned once ([`Plan`]), ranked
//! through the vector cache or by scoring every candidate, limited by constraints, judged for
//! confidence, reported, fused across techniques, fitted as a mixture, and replayed.

mod confidence;
mod constraints;
mod fusion;
mod hit;
mod identify;
mod mixture;
mod plan;
mod policy;
mod provenance;
mod rank;
mod references;
mod replay;
mod report;
mod retention;
mod scan;
mod twins;
mod warning;

pub use crate::config::{IdentityPolicy, Thresholds};
pub use confidence::{
    Confidence, Evidence, THRESHOLDS, Threshold, Verdict, confidence, confidence_for, is_confident,
    verdict,
};
pub use constraints::{Constraints, RI_KEY, RI_PHASE_KEY, RiWindow};
pub use fusion::{DISAGREE_OUTSIDE, FUSION_RULE, FusedCompound, Fusion, TechniqueEvidence, fuse};
pub use hit::{Excluded, Hit};
pub use identify::{
    Identification, IdentifyOptions, IdentifyReport, TechniqueRun, identify, identify_with_searches,
};
pub use mixture::{
    CANDIDATES, COELUTION_MIN_ABUNDANCE, COELUTION_UNEXPLAINED, Component, DEFAULT_COMPONENTS,
    MAX_COMPONENTS, MIN_GAIN, MIN_RELATIVE_GAIN, Mixture, MixtureSettings, UnexplainedIon,
    fit_mixture, fit_mixture_with, two_explain_more,
};
pub use plan::{Given, Plan, Request, Unknown};
pub use policy::{Objection, PolicyVerdict, judge};
pub use provenance::{Provenance, provenance};
pub use rank::{HitList, Ranking, search, search_exact, search_many};
pub use references::references;
pub use replay::{Replay, load_saved, replay};
pub use report::{
    LibraryStamp, Parameters, Report, UnknownStamp, keep_points, run_search, search_file,
    search_files, search_files_each, search_points,
};
pub use retention::{linear_retention_index, parse_alkanes, retention_index};
pub use scan::{Trace, rank, rank_traced};
pub use twins::{TWIN_SIMILARITY, TWIN_SWAP_RATE, reference_similarity, similar_references};
pub use warning::{Warning, WarningCode};
