//! The search page: an unknown uploaded with the search's main options, searched as
//! `POST /api/v1/search` and `whorl search` search it (`whorl::search::search_file`), and
//! its result on a page of its own: the verdict first, the hits, an overlay per top hit (the
//! mirror plot for EI-MS), a link to the printable report, and a form to search the same
//! file again as another technique.

use std::path::Path as FsPath;
use std::sync::Arc;

use askama::Template;
use axum::Extension;
use axum::extract::multipart::MultipartRejection;
use axum::extract::rejection::{FormRejection, PathRejection};
use axum::extract::{Form, Multipart, Path, State};
use axum::response::{IntoResponse, Redirect, Response};
use axum::routing::{get, post};
use serde::Deserialize;
use whorl::library::{Capability, Status};
use whorl::prepare::Prepared;
use whorl::search::{Given, Report, Request, Unknown, search_file};
use whorl::technique::Technique;

use super::super::auth::ToView;
use super::super::error::ApiError;
use super::super::routes::{Access, Routes};
use super::super::state::AppState;
use super::super::upload::Upload;
use super::plot::{self, PlotView};
use super::{Browser, Held, Layout, gone, render, techniques};

/// Overlays drawn on the result page (the hit list may be longer).
pub const PLOTS: usize = 5;
/// The most hits a page lists.
const MOST_HITS: usize = 100;

/// The search routes.
pub fn router(held: &Held) -> Routes {
    let view = Access::Needs(Capability::View);
    let h = Extension(held.clone());
    Routes::new()
        .add("GET", "/search", view, get(form))
        .add("POST", "/search", view, post(upload).layer(h.clone()))
        .add("GET", "/search/{key}", view, get(result).layer(h.clone()))
        .add("POST", "/search/{key}/again", view, post(again).layer(h))
}

/// A search as the server holds it between the upload and the pages that show it.
pub struct Searched {
    /// The uploaded file's (sanitised) name and bytes, to search again.
    pub file_name: String,
    /// Its bytes.
    pub bytes: Vec<u8>,
    /// How the technique was chosen, when the server suggested it.
    pub suggested: String,
    /// The sample or case id given.
    pub sample: String,
    /// Pending references searched too.
    pub include_pending: bool,
    /// The report.
    pub report: Report,
    /// The unknown as prepared.
    pub unknown: Prepared,
    /// The prepared references of the first hits.
    pub references: Vec<Prepared>,
}

#[derive(Template)]
#[template(path = "search.html")]
struct SearchPage {
    layout: Layout,
    techniques: Vec<super::Choice>,
    top: usize,
}

async fn form(b: Browser<ToView>) -> Response {
    render(&SearchPage {
        layout: b.layout("Search", "/search"),
        techniques: techniques(""),
        top: 10,
    })
}

/// A technique named in a file name: `u03.ir.csv`, `sample_raman.txt`, `x.nmr-1h.csv`.
fn technique_in_name(name: &str) -> Option<Technique> {
    let lower = name.to_lowercase();
    lower.split(['.', '_', ' ']).find_map(|part| match part {
        "ir" | "ftir" => Some(Technique::Ir),
        "raman" => Some(Technique::Raman),
        "ms-ei" | "ei" | "ms" | "eims" => Some(Technique::MsEi),
        "nmr-1h" | "1h" | "h1" => Some(Technique::Nmr1h),
        "nmr-13c" | "13c" | "c13" => Some(Technique::Nmr13c),
        _ => None,
    })
}

/// The technique suggested for an uploaded file, and why: its name when it names one that
/// fits its points, else what its points look like (the reader's own ranges).
fn suggest(name: &str, bytes: &[u8]) -> Result<(Technique, String), ApiError> {
    let path = FsPath::new(name);
    let points = whorl::spectrum::read_points_from_bytes(path, bytes, Technique::Ir)
        .or_else(|_| whorl::spectrum::read_points_from_bytes(path, bytes, Technique::Nmr13c))?;
    let looks = whorl::spectrum::looks_like(&points.points);
    let named = technique_in_name(name);
    match (named, looks) {
        (Some(t), Some((_, ts))) if ts.contains(&t) => Ok((
            t,
            "suggested from the file name, which fits its x range".to_string(),
        )),
        (_, Some((what, ts))) => {
            let others: Vec<&str> = ts[1..].iter().map(|t| t.name()).collect();
            let also = if others.is_empty() {
                String::new()
            } else {
                format!("; it could also be {}", others.join(", "))
            };
            Ok((
                ts[0],
                format!("suggested: the file looks like {what}{also}"),
            ))
        }
        (Some(t), None) => Ok((t, "suggested from the file name".to_string())),
        (None, None) => Err(ApiError::input(
            format!("{name}: whorl cannot tell which technique this file holds"),
            "choose the technique in the form and search again",
        )),
    }
}

struct Options {
    technique: Option<Technique>,
    top: usize,
    include_pending: bool,
    sample: String,
    /// The retention-index window (EI-MS), from the form's `ri` and `ri_window`.
    constraints: whorl::search::Constraints,
}

/// Runs the search on the blocking pool and holds the result; returns its key.
async fn run(
    state: &AppState,
    held: &Held,
    b: &Browser<ToView>,
    file_name: String,
    bytes: Vec<u8>,
    o: Options,
) -> Result<String, ApiError> {
    let (technique, suggested) = match o.technique {
        Some(t) => (t, String::new()),
        None => suggest(&file_name, &bytes)?,
    };
    let max_body = state.options.max_body;
    held.room(b.caller.account.id, bytes.len(), max_body)?;
    let root = state.options.library.clone();
    let top = o.top.clamp(1, MOST_HITS);
    let include_pending = o.include_pending;
    let constraints = o.constraints.clone();
    let (name, data) = (file_name.clone(), bytes.clone());
    let (report, unknown, references) = state
        .with_library(move |lib| {
            let dir = tempfile::tempdir()
                .map_err(|e| whorl::Error::io("making a temporary folder", e))?;
            let path = dir.path().join(&name);
            std::fs::write(&path, &data)
                .map_err(|e| whorl::Error::io("writing the uploaded file", e))?;
            let config = whorl::config::Config::load(&root)?;
            let given = Given {
                params: None,
                peak_tolerance: None,
                top: Some(top),
                solvent: None,
            };
            let mut request = Request::resolve(technique, &given, &config);
            if include_pending {
                request.statuses.push(Status::Pending);
            }
            request.constraints = constraints;
            let unknown = Unknown {
                technique,
                file: path,
                x_unit: None,
                y_unit: None,
                solvent: request.solvent,
            };
            let (report, prepared) = search_file(lib, &unknown, &request)?;
            let references = whorl::search::references(lib, &report, PLOTS)?;
            Ok((report, prepared, references))
        })
        .await?;
    tracing::info!(account = %b.caller.account.name, %technique, "search page");
    held.put(
        b.caller.account.id,
        bytes.len(),
        max_body,
        Searched {
            file_name,
            bytes,
            suggested,
            sample: o.sample,
            include_pending,
            report,
            unknown,
            references,
        },
    )
}

const FIELDS: [&str; 7] = [
    "csrf",
    "technique",
    "top",
    "include_pending",
    "sample",
    "ri",
    "ri_window",
];

async fn upload(
    State(state): State<AppState>,
    Extension(held): Extension<Held>,
    b: Browser<ToView>,
    form: Result<Multipart, MultipartRejection>,
) -> Response {
    let form = match form {
        Ok(f) => Upload::read(f, &FIELDS).await,
        Err(e) => Err(e.into()),
    };
    let form = match form {
        Ok(f) => f,
        Err(e) => return b.fail("Search refused", e),
    };
    if let Some(r) = b.csrf_refused(form.field("csrf")) {
        return r;
    }
    let Some((file_name, bytes)) = form
        .files
        .iter()
        .find(|f| f.0 == "file")
        .map(|(_, name, bytes)| (name.clone(), bytes.clone()))
    else {
        return b.fail(
            "Search refused",
            ApiError::input("no file was chosen", "choose the unknown's spectrum file"),
        );
    };
    let technique = match form.field("technique") {
        None | Some("auto" | "") => None,
        Some(t) => match t.parse::<Technique>() {
            Ok(t) => Some(t),
            Err(e) => return b.fail("Search refused", e.into()),
        },
    };
    let top = match form.field("top").filter(|v| !v.is_empty()) {
        None => 10,
        Some(v) => match v.parse::<usize>() {
            Ok(n) if n >= 1 => n,
            _ => {
                return b.fail(
                    "Search refused",
                    ApiError::input(
                        format!("hits to list: '{v}' is not a whole number of 1 or more"),
                        "give the number of hits, e.g. 10",
                    ),
                );
            }
        },
    };
    let constraints = match super::super::identify::constraints(&form) {
        Ok(c) => c,
        Err(e) => return b.fail("Search refused", e),
    };
    let options = Options {
        technique,
        top,
        include_pending: form.field("include_pending").is_some(),
        sample: form.field("sample").unwrap_or_default().to_string(),
        constraints,
    };
    match run(&state, &held, &b, file_name, bytes, options).await {
        Ok(key) => Redirect::to(&format!("/search/{key}")).into_response(),
        Err(e) => b.fail("Search failed", e),
    }
}

#[derive(Deserialize)]
struct AgainForm {
    csrf: Option<String>,
    technique: String,
    top: Option<String>,
}

async fn again(
    State(state): State<AppState>,
    Extension(held): Extension<Held>,
    b: Browser<ToView>,
    key: Result<Path<String>, PathRejection>,
    body: Result<Form<AgainForm>, FormRejection>,
) -> Response {
    let Ok(Form(body)) = body else {
        return b.fail(
            "Search refused",
            ApiError::input("the form was incomplete", "choose a technique"),
        );
    };
    if let Some(r) = b.csrf_refused(body.csrf.as_deref()) {
        return r;
    }
    let Ok(Path(key)) = key else {
        return gone(&b, "search", "the search page");
    };
    let Some(before) = held.get::<Searched>(b.caller.account.id, &key) else {
        return gone(&b, "search", "the search page");
    };
    let technique = match body.technique.parse::<Technique>() {
        Ok(t) => t,
        Err(e) => return b.fail("Search refused", e.into()),
    };
    let top = body
        .top
        .and_then(|t| t.parse::<usize>().ok())
        .unwrap_or(before.report.parameters.top);
    // A retention index belongs to the GC run: kept for another EI search, dropped for
    // another technique.
    let mut constraints = before.report.parameters.constraints.clone();
    if technique != Technique::MsEi {
        constraints.ri = None;
    }
    let options = Options {
        technique: Some(technique),
        top,
        include_pending: before.include_pending,
        sample: before.sample.clone(),
        constraints,
    };
    let (name, bytes) = (before.file_name.clone(), before.bytes.clone());
    match run(&state, &held, &b, name, bytes, options).await {
        Ok(key) => Redirect::to(&format!("/search/{key}")).into_response(),
        Err(e) => b.fail("Search failed", e),
    }
}

/// One row of a hit list as the pages show it.
pub struct HitRow {
    pub rank: usize,
    pub score: String,
    pub spectral: String,
    pub peaks: String,
    pub name: String,
    pub formula: String,
    pub cas: String,
    pub id: i64,
    pub status: String,
}

/// The hit rows of a report.
pub fn hit_rows(r: &Report) -> Vec<HitRow> {
    r.hits
        .iter()
        .map(|h| HitRow {
            rank: h.rank,
            score: format!("{:.3}", h.score),
            spectral: format!("{:.3}", h.components.spectral),
            peaks: format!(
                "{}/{}",
                h.components.peak_overlap.matched, h.components.peak_overlap.reference_peaks
            ),
            name: h.name.clone(),
            formula: h.formula.clone().unwrap_or_default(),
            cas: h.cas.clone().unwrap_or_default(),
            id: h.spectrum_id,
            status: h.status.name().to_string(),
        })
        .collect()
}

/// The verdict as a heading word and a sentence ("Strong candidate:" ...).
pub fn verdict(r: &Report) -> (String, String, String) {
    match &r.verdict {
        Some(v) => {
            let sentence = v.sentence(&r.confidence);
            let (head, rest) = sentence
                .split_once(": ")
                .map(|(a, b)| (format!("{a}:"), b.to_string()))
                .unwrap_or((String::new(), sentence.clone()));
            (v.word().to_string(), head, rest)
        }
        None => (
            "none".into(),
            "No verdict:".into(),
            "this report carries none".into(),
        ),
    }
}

/// The plots of a held search: the unknown with all plotted hits on one axis (to stack or
/// subtract one from another) when there are two or more, then one overlay per hit.
pub fn plots(s: &Searched) -> Result<Vec<PlotView>, ApiError> {
    let r = &s.report;
    let grid = &r.parameters.recipe.grid;
    let labels: Vec<String> = r
        .hits
        .iter()
        .zip(&s.references)
        .map(|(h, _)| format!("hit {}: {}", h.rank, h.name))
        .collect();
    let mut together = Vec::new();
    if labels.len() >= 2 {
        let mut series: Vec<(&str, &Prepared)> = vec![(s.file_name.as_str(), &s.unknown)];
        series.extend(labels.iter().map(String::as_str).zip(&s.references));
        together.push(plot::spectra(
            "hits-together".to_string(),
            format!(
                "The unknown {} with its first {} hits",
                s.file_name,
                labels.len()
            ),
            grid,
            &series,
        )?);
    }
    let overlays: Vec<PlotView> = r
        .hits
        .iter()
        .zip(&s.references)
        .map(|(h, reference)| {
            let label = format!("{} (spectrum {})", h.name, h.spectrum_id);
            plot::overlay(
                format!("hit-{}", h.rank),
                format!(
                    "Hit {}: {} · score {:.3} · the unknown {} over spectrum {}",
                    h.rank, h.name, h.score, s.file_name, h.spectrum_id
                ),
                grid,
                (&s.file_name, &s.unknown),
                (&label, reference),
                r.parameters.score.peak_tolerance,
            )
        })
        .collect::<Result<_, _>>()?;
    together.extend(overlays);
    Ok(together)
}

#[derive(Template)]
#[template(path = "search_result.html")]
struct ResultPage {
    layout: Layout,
    id: String,
    file: String,
    verdict_word: String,
    verdict_head: String,
    verdict_text: String,
    technique: String,
    suggested: String,
    sample: String,
    /// The retention-index window, as "1642 +- 20" (empty when none was given).
    retention_index: String,
    candidates: usize,
    statuses: String,
    state_hash: String,
    searched_at: String,
    warnings: Vec<String>,
    techniques: Vec<super::Choice>,
    top: usize,
    measure: String,
    hits: Vec<HitRow>,
    plots: Vec<PlotView>,
    mirrored: bool,
}

async fn result(
    Extension(held): Extension<Held>,
    b: Browser<ToView>,
    key: Result<Path<String>, PathRejection>,
) -> Response {
    let Ok(Path(key)) = key else {
        return gone(&b, "search", "the search page");
    };
    let Some(s) = held.get::<Searched>(b.caller.account.id, &key) else {
        return gone(&b, "search", "the search page");
    };
    match result_page(&b, key, &s) {
        Ok(page) => render(&page),
        Err(e) => b.fail("Search failed", e),
    }
}

fn result_page(b: &Browser<ToView>, id: String, s: &Arc<Searched>) -> Result<ResultPage, ApiError> {
    let r = &s.report;
    let (verdict_word, verdict_head, verdict_text) = verdict(r);
    let t = r.unknown.technique;
    Ok(ResultPage {
        layout: b.layout(format!("Search of {}", s.file_name), "/search"),
        id,
        file: s.file_name.clone(),
        verdict_word,
        verdict_head,
        verdict_text,
        technique: t.title().to_string(),
        suggested: s.suggested.clone(),
        sample: s.sample.clone(),
        retention_index: r
            .parameters
            .constraints
            .ri
            .as_ref()
            .map(|w| format!("{} \u{b1} {}", w.value, w.window))
            .unwrap_or_default(),
        candidates: r.candidates,
        statuses: r
            .parameters
            .statuses
            .iter()
            .map(|s| s.name())
            .collect::<Vec<_>>()
            .join(", "),
        state_hash: r.library.state_hash.clone(),
        searched_at: super::when(&r.searched_at),
        warnings: r.warnings.iter().map(|w| w.message.clone()).collect(),
        techniques: techniques(t.name()),
        top: r.parameters.top,
        measure: r.parameters.score.measure.title().to_string(),
        hits: hit_rows(r),
        plots: plots(s)?,
        mirrored: t == Technique::MsEi,
    })
}
