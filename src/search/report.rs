//! The self-describing search report: the library and unknown it ran for, the parameters
//! that decided it, the hits, and the caution; and the searches that prepare unknown files
//! and write it.

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use super::confidence::Confidence;
use super::hit::{Excluded, Hit};
use super::plan::{Plan, Request, Unknown};
use super::rank::HitList;
use super::warning::{Warning, WarningCode};
use super::{Constraints, Thresholds};
use crate::error::Result;
use crate::library::{Library, Status};
use crate::prepare::Prepared;
use crate::score::ScoreParams;
use crate::technique::Technique;

/// The library a search ran against.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct LibraryStamp {
    /// Library folder.
    pub path: String,
    /// Library state hash at the time of the search. Searches saved before the term changed
    /// call it `fingerprint`, and still replay.
    #[serde(alias = "fingerprint")]
    pub state_hash: String,
    /// The last audit-trail event at the time of the search.
    pub last_event: i64,
}

impl LibraryStamp {
    /// The stamp of a library as it is now.
    pub fn of(library: &Library) -> Result<LibraryStamp> {
        Ok(LibraryStamp {
            path: library
                .root()
                .map(|p| p.display().to_string())
                .unwrap_or_else(|| ":memory:".into()),
            state_hash: library.state_hash()?,
            last_event: library.last_event()?,
        })
    }
}

/// The unknown a search ran for.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct UnknownStamp {
    /// The file as given.
    pub file: String,
    /// SHA-256 of the file bytes.
    pub sha256: String,
    /// Technique.
    pub technique: Technique,
    /// The x unit declared for the file, if not the technique's usual one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub x_unit: Option<crate::spectrum::XUnit>,
    /// The y unit used (declared or detected).
    pub y_unit: crate::spectrum::YUnit,
    /// NMR solvent, if declared.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub solvent: Option<String>,
    /// Peaks picked in the unknown.
    pub peaks: usize,
    /// The unknown's raw points as read from the file (file order, its own x unit) in their
    /// canonical encoding, hex: each x then y as little-endian f64, exact where decimal text
    /// need not be ([`crate::spectrum::encode_points`], the encoding of stored raw points).
    /// Kept in a saved search ([`keep_points`]) so that a replay needs no file; absent from
    /// `--json` output and from searches saved before they were kept.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub points: Option<String>,
    /// SHA-256 of the encoded points (as a stored spectrum's raw hash), which a replay verifies
    /// before it uses them.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub points_sha256: Option<String>,
}

/// Keeps the unknown's raw points in a report about to be saved, read again from its file
/// with the reader every search uses; refused if the file changed since the search read it.
pub fn keep_points(report: &mut Report) -> Result<()> {
    let path = std::path::Path::new(&report.unknown.file);
    let parsed = crate::spectrum::read_points(path, report.unknown.technique)?;
    if parsed.file_sha256 != report.unknown.sha256 {
        return Err(crate::Error::input(
            crate::error::Location::file(path),
            "the unknown changed while it was searched: the saved record would not describe the search",
            "search it again, and keep the file unchanged until the search is saved",
        ));
    }
    let bytes = crate::spectrum::encode_points(&parsed.points);
    report.unknown.points_sha256 = Some(crate::spectrum::sha256_hex(&bytes));
    report.unknown.points = Some(hex::encode(bytes));
    Ok(())
}

/// The parameters that decided the ranking.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Parameters {
    /// Hits asked for.
    pub top: usize,
    /// Metadata filter.
    #[serde(rename = "where", default, skip_serializing_if = "Option::is_none")]
    pub filter: Option<String>,
    /// Statuses searched.
    pub statuses: Vec<Status>,
    /// Score parameters.
    pub score: ScoreParams,
    /// Constraints applied to the hits.
    pub constraints: Constraints,
    /// Whether ruled-out candidates are listed.
    pub explain: bool,
    /// The preparation recipe of the technique.
    pub recipe: crate::prepare::Recipe,
    /// When the hit list warns.
    pub thresholds: Thresholds,
}

/// A complete, self-describing search result.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Report {
    /// whorl version.
    pub tool_version: String,
    /// When the search ran (UTC).
    pub searched_at: String,
    /// The library.
    pub library: LibraryStamp,
    /// The unknown.
    pub unknown: UnknownStamp,
    /// Parameters.
    pub parameters: Parameters,
    /// Library spectra compared.
    pub candidates: usize,
    /// Candidates the query or the constraints ruled out.
    pub excluded_count: usize,
    /// With `--explain`: ruled-out candidates that scored above the last hit, with the reason.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub excluded: Vec<Excluded>,
    /// Hits, best first.
    pub hits: Vec<Hit>,
    /// Hit 1 minus hit 2.
    pub margin: Option<f64>,
    /// The thresholds behind the warnings.
    pub confidence: Confidence,
    /// Warnings about the unknown's preparation and about the hit list, each with its code.
    pub warnings: Vec<Warning>,
    /// What the hit list comes to (absent in reports saved before verdicts existed).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub verdict: Option<crate::search::Verdict>,
    /// The caution that goes with every hit list.
    pub caution: String,
}

/// Prepares an unknown file with the library's recipe and searches it, returning the full report.
pub fn run_search(library: &Library, unknown: &Unknown, request: &Request) -> Result<Report> {
    search_file(library, unknown, request).map(|(report, _)| report)
}

/// [`run_search`], also returning the unknown as prepared, which a plotted report lays over
/// the references.
pub fn search_file(
    library: &Library,
    unknown: &Unknown,
    request: &Request,
) -> Result<(Report, Prepared)> {
    let plan = plan_for(library, std::slice::from_ref(unknown), request)?;
    let (raw, prepared) = read(&plan, unknown)?;
    let list = plan.search(library, &prepared)?;
    let report = make_report(library, &plan, unknown, raw, &prepared, list)?;
    Ok((report, prepared))
}

/// [`search_file`] of a request for every candidate (`top` of `usize::MAX`, without
/// `explain`), also reporting the same hit list cut to its first `n` hits exactly as a
/// search asking for `n` reports it: the full report, the cut one, and the prepared unknown.
pub(super) fn search_file_cut(
    library: &Library,
    unknown: &Unknown,
    request: &Request,
    n: usize,
) -> Result<(Report, Report, Prepared)> {
    debug_assert!(
        !request.explain,
        "a cut list would lose the candidates explain lists"
    );
    let plan = plan_for(library, std::slice::from_ref(unknown), request)?;
    let (raw, prepared) = read(&plan, unknown)?;
    let list = plan.search(library, &prepared)?;
    let mut cut = plan.clone();
    cut.request.top = n;
    let short = super::rank::cut(library, &cut.request, &list)?;
    let section = make_report(library, &cut, unknown, raw.clone(), &prepared, short)?;
    let report = make_report(library, &plan, unknown, raw, &prepared, list)?;
    Ok((report, section, prepared))
}

/// [`search_file`] of an unknown's raw points instead of its file (a replay of a saved
/// search that kept them): prepared as stored points are (`library::prepare_raw`), with the
/// y unit the search used; `unknown.file` only names it.
pub fn search_points(
    library: &Library,
    unknown: &Unknown,
    points: &[(f64, f64)],
    file_sha256: &str,
    request: &Request,
) -> Result<Report> {
    let plan = plan_for(library, std::slice::from_ref(unknown), request)?;
    let x_unit = unknown
        .x_unit
        .unwrap_or_else(|| crate::library::usual_x_unit(unknown.technique));
    let y_unit = match unknown.y_unit {
        Some(u) => u,
        None => {
            return Err(crate::Error::invalid(
                "the unknown's y unit is needed to prepare its saved points",
                "give the y unit the search used",
            ));
        }
    };
    let prepared = crate::library::prepare_raw(
        &unknown.file,
        &plan.recipe,
        points,
        x_unit,
        y_unit,
        unknown.solvent,
    )?;
    let raw = crate::spectrum::RawSpectrum {
        points: points.to_vec(),
        x_unit,
        y_unit: prepared.y_unit,
        file_sha256: file_sha256.to_string(),
    };
    let list = plan.search(library, &prepared)?;
    make_report(library, &plan, unknown, raw, &prepared, list)
}

/// Prepares several unknown files and searches them together ([`Plan::search_many`]): one
/// report per file, in order. Files are read and prepared in parallel. Searched together,
/// they share the request's technique and one solvent.
pub fn search_files(
    library: &Library,
    unknowns: &[Unknown],
    request: &Request,
) -> Result<Vec<Report>> {
    let plan = plan_for(library, unknowns, request)?;
    let read: Vec<(crate::spectrum::RawSpectrum, Prepared)> = unknowns
        .par_iter()
        .map(|u| read(&plan, u))
        .collect::<Result<_>>()?;
    let prepared: Vec<Prepared> = read.iter().map(|(_, p)| p.clone()).collect();
    let lists = plan.search_many(library, &prepared)?;
    unknowns
        .iter()
        .zip(read)
        .zip(lists)
        .map(|((u, (raw, p)), list)| make_report(library, &plan, u, raw, &p, list))
        .collect()
}

/// [`search_files`], going on past an unknown that cannot be read or prepared: its place in
/// the result holds its error, and the others are searched together as usual. A problem with
/// the search itself (the request, the library) is still an error for all of them.
pub fn search_files_each(
    library: &Library,
    unknowns: &[Unknown],
    request: &Request,
) -> Result<Vec<Result<Report>>> {
    let plan = plan_for(library, unknowns, request)?;
    let read: Vec<Result<(crate::spectrum::RawSpectrum, Prepared)>> =
        unknowns.par_iter().map(|u| read(&plan, u)).collect();
    let prepared: Vec<Prepared> = read
        .iter()
        .filter_map(|r| r.as_ref().ok().map(|(_, p)| p.clone()))
        .collect();
    let mut lists = plan.search_many(library, &prepared)?.into_iter();
    unknowns
        .iter()
        .zip(read)
        .map(|(u, r)| match r {
            Ok((raw, p)) => {
                let list = lists.next().expect("a hit list per prepared unknown");
                Ok(make_report(library, &plan, u, raw, &p, list))
            }
            Err(e) => Ok(Err(e)),
        })
        .collect()
}

/// The plan of a search of unknown files: the request for their technique, with their
/// solvent (hits note a solvent that differs from the unknown's).
fn plan_for(library: &Library, unknowns: &[Unknown], request: &Request) -> Result<Plan> {
    let solvent = unknowns.first().and_then(|u| u.solvent);
    if let Some(u) = unknowns
        .iter()
        .find(|u| u.technique != request.technique || u.solvent != solvent)
    {
        return Err(crate::Error::invalid(
            format!(
                "{} is a {} unknown{} in a search of {} unknowns{}",
                u.file.display(),
                u.technique,
                u.solvent.map(|s| format!(" in {s}")).unwrap_or_default(),
                request.technique,
                solvent.map(|s| format!(" in {s}")).unwrap_or_default(),
            ),
            "search unknowns of another technique or solvent separately",
        ));
    }
    let mut request = request.clone();
    request.solvent = solvent;
    Plan::new(library, &request)
}

/// Reads and prepares an unknown file with the plan's recipe.
fn read(plan: &Plan, u: &Unknown) -> Result<(crate::spectrum::RawSpectrum, Prepared)> {
    crate::library::read_and_prepare(&u.file, &plan.recipe, u.x_unit, u.y_unit, u.solvent)
}

fn make_report(
    library: &Library,
    plan: &Plan,
    u: &Unknown,
    raw: crate::spectrum::RawSpectrum,
    unknown: &Prepared,
    list: HitList,
) -> Result<Report> {
    let request = &plan.request;
    let mut warnings: Vec<Warning> = unknown
        .warnings
        .iter()
        .map(|w| Warning::new(WarningCode::UnknownPreparation, format!("unknown: {w}")))
        .collect();
    warnings.extend(list.warnings);
    let report = Report {
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        searched_at: crate::library::now(),
        library: LibraryStamp::of(library)?,
        unknown: UnknownStamp {
            file: u.file.display().to_string(),
            sha256: raw.file_sha256,
            technique: request.technique,
            x_unit: u.x_unit,
            y_unit: unknown.y_unit,
            solvent: u.solvent.map(|s| s.name().to_string()),
            peaks: unknown.peaks.len(),
            points: None,
            points_sha256: None,
        },
        parameters: Parameters {
            top: request.top,
            filter: request.filter.clone(),
            statuses: request.statuses.clone(),
            score: request.params.clone(),
            constraints: request.constraints.clone(),
            explain: request.explain,
            recipe: plan.recipe.clone(),
            thresholds: request.thresholds,
        },
        candidates: list.candidates,
        excluded_count: list.excluded_count,
        excluded: list.excluded,
        hits: list.hits,
        margin: list.margin,
        confidence: list.confidence,
        warnings,
        verdict: list.verdict,
        caution: crate::CAUTION.to_string(),
    };
    Ok(report)
}
