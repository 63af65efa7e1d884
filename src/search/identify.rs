//! `identify`: several unknowns of one sample, one per technique, each searched with its
//! technique's default scoring, fused per compound and judged against the identity policy.

use serde::Serialize;

use super::report::search_file_cut;
use super::{
    Confidence, Constraints, Fusion, Given, Hit, LibraryStamp, Parameters, PolicyVerdict, Report,
    Request, Unknown, UnknownStamp, fuse, judge,
};
use crate::config::{Config, IdentityPolicy};
use crate::error::{Error, Result};
use crate::library::Library;
use crate::prepare::Prepared;
use crate::technique::Technique;

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
    pub warnings: Vec<super::Warning>,
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

/// How `identify` searches: the constraints and length of the fused list, the identity policy,
/// and the library's own search settings.
pub struct IdentifyOptions<'a> {
    /// Constraints applied to every technique's search.
    pub constraints: Constraints,
    /// Compounds listed.
    pub top: usize,
    /// What the evidence must show to meet the library's identification criteria.
    pub policy: IdentityPolicy,
    /// The library's settings (`whorl.toml`), taken by each technique's request.
    pub config: &'a Config,
}

/// Searches each unknown against the library with its technique's default scoring (adjusted
/// by `options.configure`) and the given constraints, fuses the hit lists per compound
/// ([`fuse`]) and judges the result against the identity policy ([`judge`]).
pub fn identify(
    library: &Library,
    unknowns: &[Unknown],
    options: &IdentifyOptions<'_>,
) -> Result<IdentifyReport> {
    identify_with_searches(library, unknowns, options).map(|i| i.report)
}

/// What [`identify_with_searches`] found: the identification, and each technique's own search
/// in the order given, for a report that shows them one by one.
pub struct Identification {
    /// The fused identification.
    pub report: IdentifyReport,
    /// Each technique's search as a search asking for `options.top` hits reports it, and the
    /// unknown as prepared (its overlays need it).
    pub searches: Vec<(Report, Prepared)>,
}

/// [`identify`], keeping each technique's search: every unknown is read, prepared and
/// searched once, and its section is the same hit list cut to the fused list's length.
pub fn identify_with_searches(
    library: &Library,
    unknowns: &[Unknown],
    options: &IdentifyOptions<'_>,
) -> Result<Identification> {
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
    let mut searches = Vec::new();
    for u in unknowns {
        let mut request = Request::resolve(u.technique, &Given::default(), options.config);
        // Fusion ranks every compound each technique scored, so every candidate is listed.
        request.top = usize::MAX;
        request.constraints = options.constraints.clone();
        // A retention index is a fact of the GC run: it constrains the EI search alone.
        if u.technique != Technique::MsEi {
            request.constraints.ri = None;
        }
        let (report, section, prepared) = search_file_cut(library, u, &request, options.top)?;
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
        searches.push((section, prepared));
    }
    let borrowed: Vec<(Technique, &[Hit])> =
        hit_lists.iter().map(|(t, h)| (*t, h.as_slice())).collect();
    let fusion = fuse(&borrowed, options.top);
    let confidence: Vec<Confidence> = runs.iter().map(|r| r.confidence).collect();
    let policy = judge(&options.policy, &borrowed, &confidence, &fusion);
    let report = IdentifyReport {
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        searched_at: crate::library::now(),
        library: LibraryStamp::of(library)?,
        runs,
        fusion,
        policy,
        caution: crate::CAUTION.to_string(),
    };
    Ok(Identification { report, searches })
}
