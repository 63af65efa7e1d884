//! The submit page, in two steps. A single file with its metadata is first read, checked and
//! prepared exactly as `whorl add` and `POST /api/v1/spectra` do (`whorl::library::stage`), and
//! searched against the library for its nearest spectra; the preview shows the prepared plot
//! and every warning (plausibility, formula, coverage, near duplicates) with nothing saved. The
//! upload stays on the server under a random id, held for the account and tied to the session
//! that made it; the confirm form names it by that id and by the file's SHA-256, and saves it
//! through `Library::store` as the signed-in account (never an identity from the form).
//!
//! A manifest with its files goes through the import of `whorl import` and
//! `POST /api/v1/import` (`import_manifest_as`), with a result per row.

use std::path::Path as FsPath;

use askama::Template;
use axum::Extension;
use axum::extract::multipart::MultipartRejection;
use axum::extract::rejection::{FormRejection, PathRejection, QueryRejection};
use axum::extract::{Form, Multipart, Path, Query, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Redirect, Response};
use axum::routing::{get, post};
use serde::Deserialize;
use whorl::library::{
    Capability, Library, Metadata, Outcome, Staged, Status, Submission, read_manifest, stage,
};
use whorl::search::{Hit, Request};
use whorl::spectrum::{XUnit, YUnit, sha256_hex};
use whorl::technique::Technique;

use super::super::auth::ToSubmit;
use super::super::error::ApiError;
use super::super::import::import_manifest_as;
use super::super::routes::{Access, Routes};
use super::super::state::AppState;
use super::super::upload::{Upload, relative_name, safe_name};
use super::plot::{self, PlotView};
use super::spectrum::{NeighbourRow, peak_rows};
use super::{Browser, Choice, Held, Layout, gone, render, techniques};

/// Nearest library spectra listed with the preview (the first two are drawn with it).
const NEIGHBOURS: usize = 5;
/// Neighbours drawn over the submission.
const PLOTTED: usize = 2;

/// The submit routes.
pub fn router(held: &Held) -> Routes {
    let submit = Access::Needs(Capability::Submit);
    let h = Extension(held.clone());
    Routes::new()
        .add("GET", "/submit", submit, get(form))
        .add("POST", "/submit", submit, post(preview).layer(h.clone()))
        .add("GET", "/submit/{key}", submit, get(shown).layer(h.clone()))
        .add(
            "POST",
            "/submit/{key}/confirm",
            submit,
            post(confirm).layer(h.clone()),
        )
        .add(
            "POST",
            "/submit/{key}/discard",
            submit,
            post(discard).layer(h),
        )
        .add("POST", "/submit/manifest", submit, post(manifest))
}

/// A submission awaiting confirmation, as the server holds it.
pub struct Awaiting {
    /// The session's CSRF token when it was held: only that session may confirm it.
    session: String,
    /// The file's sanitised name.
    file_name: String,
    /// Its bytes, as uploaded.
    bytes: Vec<u8>,
    /// Their SHA-256, shown on the preview and repeated by the confirm form.
    sha256: String,
    technique: Technique,
    metadata: Metadata,
    x_unit: Option<XUnit>,
    y_unit: Option<YUnit>,
    /// The submission as staged for the preview.
    staged: Staged,
    /// Every warning of the checks, in words.
    warnings: Vec<String>,
    /// The nearest library spectra, and the prepared forms of the first [`PLOTTED`].
    neighbours: Vec<Hit>,
    neighbour_spectra: Vec<whorl::prepare::Prepared>,
    grid: whorl::technique::Grid,
}

#[derive(Template)]
#[template(path = "submit.html")]
struct SubmitPage {
    layout: Layout,
    /// A preview was just discarded (`?discarded=1`).
    discarded: bool,
    techniques: Vec<Choice>,
    x_units: Vec<Choice>,
    y_units: Vec<Choice>,
}

fn choices(names: &[&'static str]) -> Vec<Choice> {
    names
        .iter()
        .map(|&n| Choice {
            value: n,
            label: n,
            selected: false,
        })
        .collect()
}

/// The submit page's query: `discarded=1` after a preview was discarded.
#[derive(Deserialize)]
struct FormQuery {
    discarded: Option<String>,
}

async fn form(b: Browser<ToSubmit>, query: Result<Query<FormQuery>, QueryRejection>) -> Response {
    let discarded = query.ok().and_then(|Query(q)| q.discarded).is_some();
    render(&SubmitPage {
        layout: b.layout("Submit", "/submit"),
        discarded,
        techniques: techniques(""),
        x_units: choices(&["um", "nm"]),
        y_units: choices(&[
            "absorbance",
            "transmittance",
            "transmittance-percent",
            "counts",
            "relative",
            "intensity",
        ]),
    })
}

const FIELDS: [&str; 15] = [
    "csrf",
    "extra",
    "technique",
    "name",
    "formula",
    "cas",
    "synonyms",
    "tags",
    "solvent",
    "source",
    "instrument",
    "acquired",
    "note",
    "y_unit",
    "x_unit",
];

/// A multipart form from a browser without the parts of inputs left empty (a file input
/// with nothing chosen sends an empty part without a file name).
async fn read_form(
    form: Result<Multipart, MultipartRejection>,
    file_parts: &[&str],
    fields: &[&str],
    repeat: bool,
) -> Result<Upload, ApiError> {
    let mut form = Upload::read_parts(form?, file_parts, fields, repeat).await?;
    form.files
        .retain(|(_, name, bytes)| !(name.is_empty() && bytes.is_empty()));
    form.fields.retain(|(_, v)| !v.is_empty());
    Ok(form)
}

/// The metadata of the single-file form, as `POST /api/v1/spectra` takes it (synonyms one a
/// line, since names hold commas; tags separated by commas).
fn metadata(form: &Upload) -> Result<Metadata, ApiError> {
    let text = |k: &str| form.field(k).map(str::to_string);
    let name = text("name").ok_or_else(|| {
        ApiError::input("the form has no compound name", "give the compound's name")
    })?;
    let list = |k: &str, sep: &[char]| -> Vec<String> {
        form.field(k)
            .unwrap_or_default()
            .split(sep)
            .map(str::trim)
            .filter(|s| !s.is_empty())
            .map(str::to_string)
            .collect()
    };
    Ok(Metadata {
        name,
        formula: text("formula"),
        cas: text("cas"),
        synonyms: list("synonyms", &['\n', '\r']),
        tags: list("tags", &[',']),
        solvent: text("solvent"),
        source: text("source"),
        instrument: text("instrument"),
        acquired: text("acquired"),
        notes: text("note"),
        // One KEY=VALUE a line, read as `whorl add --set` reads its pairs; the keys' own
        // rules are checked with the rest when the submission is staged.
        extra: whorl::spectrum::extra_fields(
            form.field("extra")
                .unwrap_or_default()
                .lines()
                .map(str::trim)
                .filter(|l| !l.is_empty()),
            "extra field",
            "one KEY=VALUE a line, e.g. ri=1012",
        )?,
    })
}

/// Whether a library hit is of the compound submitted: its CAS RN when both have one, else
/// its name ignoring case (the library's own compound key).
fn same_compound(m: &Metadata, h: &Hit) -> bool {
    match (&m.cas, &h.cas) {
        (Some(a), Some(b)) => a == b,
        _ => m.name.to_lowercase() == h.name.to_lowercase(),
    }
}

/// Stages a submission from the held bytes and looks up its nearest library spectra; nothing
/// is written. Returns the staged spectrum, the warnings, the neighbours and their spectra.
#[allow(clippy::type_complexity)]
fn check(
    lib: &Library,
    submission: Submission,
) -> whorl::Result<(
    Staged,
    Vec<String>,
    Vec<Hit>,
    Vec<whorl::prepare::Prepared>,
    whorl::technique::Grid,
)> {
    let staged = stage(lib.recipes(), submission)?;
    let technique = staged.submission.technique;
    let mut warnings = staged.prepared.warnings.clone();
    if let Some(c) = staged.prepared.coverage {
        warnings.push(format!(
            "Coverage: the file covers {:.0} to {:.0} {}, less than the library's grid; scores compare it with an unknown over the range both cover.",
            c.lo,
            c.hi,
            technique.x_unit_symbol()
        ));
    }
    let grid = lib.recipe(technique)?.grid.clone();
    let mut request = Request::new(technique);
    request.top = NEIGHBOURS;
    request.statuses = vec![Status::Verified, Status::Pending];
    let strong = whorl::search::confidence(technique, &request.params).strong_score;
    let neighbours = whorl::search::search(lib, &staged.prepared, &request)?.hits;
    let m = &staged.submission.metadata;
    for h in &neighbours {
        if h.score >= 0.9999 && same_compound(m, h) {
            warnings.push(format!(
                "Possibly already in the library: spectrum {} ({}) scores {:.4} against this file; the same raw points are stored once, and saving them again only names that spectrum.",
                h.spectrum_id, h.name, h.score
            ));
        } else if !same_compound(m, h) && h.score >= strong {
            warnings.push(format!(
                "Near-duplicate of another compound: spectrum {} ({}) scores {:.3} against this file, at or above the strong-candidate score {:.2}; a search could not tell the two compounds apart by this technique alone.",
                h.spectrum_id, h.name, h.score, strong
            ));
        }
    }
    let spectra = neighbours
        .iter()
        .take(PLOTTED)
        .map(|h| lib.prepared(h.spectrum_id))
        .collect::<whorl::Result<Vec<_>>>()?;
    Ok((staged, warnings, neighbours, spectra, grid))
}

/// Writes held bytes into a fresh temporary folder under their name, for the library's reader
/// (which names the file in its errors and keeps its name as the spectrum's file name).
fn written(dir: &FsPath, name: &str, bytes: &[u8]) -> whorl::Result<std::path::PathBuf> {
    let path = dir.join(name);
    std::fs::write(&path, bytes).map_err(|e| whorl::Error::io("writing the uploaded file", e))?;
    Ok(path)
}

async fn preview(
    State(state): State<AppState>,
    Extension(held): Extension<Held>,
    b: Browser<ToSubmit>,
    form: Result<Multipart, MultipartRejection>,
) -> Response {
    let form = match read_form(form, &["file"], &FIELDS, false).await {
        Ok(f) => f,
        Err(e) => return b.fail("Submission refused", e),
    };
    if let Some(r) = b.csrf_refused(form.field("csrf")) {
        return r;
    }
    match hold(&state, &held, &b, &form).await {
        Ok(key) => Redirect::to(&format!("/submit/{key}")).into_response(),
        Err(e) => b.fail("Submission refused", e),
    }
}

/// Checks the single-file form and holds the submission; returns its key.
async fn hold(
    state: &AppState,
    held: &Held,
    b: &Browser<ToSubmit>,
    form: &Upload,
) -> Result<String, ApiError> {
    let Some((_, raw_name, bytes)) = form.files.iter().find(|f| f.0 == "file") else {
        return Err(ApiError::input(
            "no file was chosen",
            "choose the reference spectrum's file",
        ));
    };
    let technique: Technique = form.required(
        "technique",
        "choose the technique: IR, Raman, EI-MS, 1H NMR or 13C NMR",
    )?;
    let metadata = metadata(form)?;
    let x_unit: Option<XUnit> = form.parsed("x_unit")?;
    let y_unit: Option<YUnit> = form.parsed("y_unit")?;
    let file_name = safe_name(raw_name);
    let max_body = state.options.max_body;
    // Refused before the checks run when the upload could not be held anyway.
    held.room(b.caller.account.id, bytes.len(), max_body)?;
    let bytes = bytes.clone();
    let account = b.caller.account.name.clone();
    let (name, data, m) = (file_name.clone(), bytes.clone(), metadata.clone());
    let (staged, warnings, neighbours, neighbour_spectra, grid) = state
        .with_library(move |lib| {
            let dir = tempfile::tempdir()
                .map_err(|e| whorl::Error::io("making a temporary folder", e))?;
            let submission = Submission {
                path: written(dir.path(), &name, &data)?,
                technique,
                metadata: m,
                x_unit,
                y_unit,
                submitted_by: account,
            };
            let prefix = format!("{}/", dir.path().display());
            check(lib, submission).map_err(|e| {
                let hint = e.hint().unwrap_or_default().to_string();
                if e.is_input() {
                    ApiError::input(e.to_string().replace(&prefix, ""), hint)
                } else {
                    ApiError::from(e)
                }
            })
        })
        .await?;
    tracing::info!(account = %b.caller.account.name, %technique, "submission previewed");
    held.put(
        b.caller.account.id,
        bytes.len(),
        max_body,
        Awaiting {
            session: b.csrf.clone(),
            sha256: sha256_hex(&bytes),
            file_name,
            bytes,
            technique,
            metadata,
            x_unit,
            y_unit,
            staged,
            warnings,
            neighbours,
            neighbour_spectra,
            grid,
        },
    )
}

#[derive(Template)]
#[template(path = "submit_preview.html")]
struct PreviewPage {
    layout: Layout,
    key: String,
    file: String,
    sha256: String,
    technique: String,
    metadata: Vec<(String, String)>,
    points: usize,
    warnings: Vec<String>,
    plots: Vec<PlotView>,
    neighbours: Vec<NeighbourRow>,
    peaks: Vec<(String, String, String)>,
    x_unit_symbol: String,
}

/// The submission's metadata as (field, value) rows, empty fields left out.
fn metadata_rows(m: &Metadata) -> Vec<(String, String)> {
    let mut rows = vec![("name".to_string(), m.name.clone())];
    let optional = [
        ("formula", &m.formula),
        ("CAS RN", &m.cas),
        ("solvent", &m.solvent),
        ("source", &m.source),
        ("instrument", &m.instrument),
        ("acquired", &m.acquired),
        ("note", &m.notes),
    ];
    rows.extend(
        optional
            .into_iter()
            .filter_map(|(k, v)| v.as_ref().map(|v| (k.to_string(), v.clone()))),
    );
    if !m.synonyms.is_empty() {
        rows.push(("synonyms".into(), m.synonyms.join("; ")));
    }
    if !m.tags.is_empty() {
        rows.push(("tags".into(), m.tags.join(", ")));
    }
    rows.extend(m.extra.iter().map(|(k, v)| (k.clone(), v.clone())));
    rows
}

async fn shown(
    Extension(held): Extension<Held>,
    b: Browser<ToSubmit>,
    key: Result<Path<String>, PathRejection>,
) -> Response {
    let Ok(Path(key)) = key else {
        return gone(&b, "submission", "the submit page");
    };
    let Some(a) = held.get::<Awaiting>(b.caller.account.id, &key) else {
        return gone(&b, "submission", "the submit page");
    };
    let s = &a.staged;
    let label = format!("to submit: {}", s.submission.metadata.name);
    let labels: Vec<String> = a
        .neighbours
        .iter()
        .map(|h| format!("library: spectrum {}, {}", h.spectrum_id, h.name))
        .collect();
    let mut series = vec![(label.as_str(), &s.prepared)];
    series.extend(labels.iter().map(String::as_str).zip(&a.neighbour_spectra));
    let caption = if a.neighbour_spectra.is_empty() {
        format!("{} as prepared, scaled to its maximum", a.file_name)
    } else {
        format!(
            "{} as prepared over its {} nearest library spectra, each scaled to its maximum",
            a.file_name,
            a.neighbour_spectra.len()
        )
    };
    let plots = match plot::spectra("submission".into(), caption, &a.grid, &series) {
        Ok(p) => vec![p],
        Err(e) => return b.fail("Plot failed", e),
    };
    render(&PreviewPage {
        layout: b.layout("Check before saving", "/submit"),
        key,
        file: a.file_name.clone(),
        sha256: a.sha256.clone(),
        technique: a.technique.title().to_string(),
        metadata: metadata_rows(&s.submission.metadata),
        points: s.raw.points.len(),
        warnings: a.warnings.clone(),
        plots,
        neighbours: a
            .neighbours
            .iter()
            .map(|h| NeighbourRow {
                score: format!("{:.3}", h.score),
                name: h.name.clone(),
                formula: h.formula.clone().unwrap_or_default(),
                id: h.spectrum_id,
                status: h.status.name().to_string(),
            })
            .collect(),
        peaks: peak_rows(&s.prepared),
        x_unit_symbol: a.technique.x_unit_symbol().to_string(),
    })
}

#[derive(Deserialize)]
struct ConfirmForm {
    csrf: Option<String>,
    sha256: Option<String>,
}

/// The form of a discard: only the session's token.
#[derive(Deserialize)]
struct DiscardForm {
    csrf: Option<String>,
}

/// Lets go of a held preview at once, freeing the room it took in the account's share of the
/// server's memory, instead of keeping it for the two hours; nothing is saved. Only the
/// session that previewed it may discard it.
async fn discard(
    Extension(held): Extension<Held>,
    b: Browser<ToSubmit>,
    key: Result<Path<String>, PathRejection>,
    body: Result<Form<DiscardForm>, FormRejection>,
) -> Response {
    let csrf = body.ok().and_then(|Form(f)| f.csrf);
    if let Some(r) = b.csrf_refused(csrf.as_deref()) {
        return r;
    }
    let Ok(Path(key)) = key else {
        return gone(&b, "submission", "the submit page");
    };
    match held.get::<Awaiting>(b.caller.account.id, &key) {
        Some(a) if a.session == b.csrf => {}
        _ => return gone(&b, "submission", "the submit page"),
    }
    if held.take::<Awaiting>(b.caller.account.id, &key).is_none() {
        return gone(&b, "submission", "the submit page");
    }
    Redirect::to("/submit?discarded=1").into_response()
}

async fn confirm(
    State(state): State<AppState>,
    Extension(held): Extension<Held>,
    b: Browser<ToSubmit>,
    key: Result<Path<String>, PathRejection>,
    body: Result<Form<ConfirmForm>, FormRejection>,
) -> Response {
    let body = body.map(|Form(f)| f).unwrap_or(ConfirmForm {
        csrf: None,
        sha256: None,
    });
    if let Some(r) = b.csrf_refused(body.csrf.as_deref()) {
        return r;
    }
    let Ok(Path(key)) = key else {
        return gone(&b, "submission", "the submit page");
    };
    let Some(a) = held.get::<Awaiting>(b.caller.account.id, &key) else {
        return gone(&b, "submission", "the submit page");
    };
    // Only the session that previewed it confirms it, and only the file it previewed: the
    // bytes held must still hash to what the preview showed and the form repeats.
    if a.session != b.csrf {
        return gone(&b, "submission", "the submit page");
    }
    if body.sha256.as_deref() != Some(a.sha256.as_str()) || sha256_hex(&a.bytes) != a.sha256 {
        return b.fail(
            "Submission refused",
            ApiError::input(
                "the confirmation does not name the file that was previewed, so nothing was saved",
                "submit the file again and confirm it from its own preview",
            ),
        );
    }
    let Some(a) = held.take::<Awaiting>(b.caller.account.id, &key) else {
        return gone(&b, "submission", "the submit page");
    };
    let actor = b.caller.account.name.clone();
    let saved = state
        .write_as(move |lib| {
            let dir = tempfile::tempdir()
                .map_err(|e| whorl::Error::io("making a temporary folder", e))?;
            // Staged again from the held bytes, with the library's recipes as they are now:
            // the same path as `whorl add` and `POST /api/v1/spectra`.
            let submission = Submission {
                path: written(dir.path(), &a.file_name, &a.bytes)?,
                technique: a.technique,
                metadata: a.metadata.clone(),
                x_unit: a.x_unit,
                y_unit: a.y_unit,
                submitted_by: actor.clone(),
            };
            let staged = stage(lib.recipes(), submission)?;
            let outcome = lib
                .store(std::slice::from_ref(&staged), &actor, true)?
                .pop()
                .ok_or_else(|| ApiError::internal("store returned no outcome"))??;
            Ok(outcome)
        })
        .await;
    match saved {
        Ok(Outcome::Added { spectrum_id, .. }) => {
            tracing::info!(account = %b.caller.account.name, spectrum_id, "submitted");
            Redirect::to(&format!("/spectra/{spectrum_id}?submitted=added")).into_response()
        }
        Ok(Outcome::AlreadyPresent { spectrum_id }) => {
            Redirect::to(&format!("/spectra/{spectrum_id}?submitted=present")).into_response()
        }
        Err(e) => b.fail("Submission failed", e),
    }
}

/// One manifest row's result as the page lists it.
pub struct RowResult {
    line: usize,
    file: String,
    result: &'static str,
    spectrum: Option<i64>,
    detail: String,
}

#[derive(Template)]
#[template(path = "submit_manifest.html")]
struct ManifestPage {
    layout: Layout,
    manifest: String,
    summary: String,
    refused: bool,
    rows: Vec<RowResult>,
    notes: Vec<String>,
}

async fn manifest(
    State(state): State<AppState>,
    b: Browser<ToSubmit>,
    form: Result<Multipart, MultipartRejection>,
) -> Response {
    let form = match read_form(
        form,
        &["manifest", "file"],
        &["csrf", "all_or_nothing"],
        true,
    )
    .await
    {
        Ok(f) => f,
        Err(e) => return b.fail("Import refused", e),
    };
    if let Some(r) = b.csrf_refused(form.field("csrf")) {
        return r;
    }
    match import(&state, &b, form).await {
        Ok(page) => {
            let mut r = render(&page);
            if page.refused {
                *r.status_mut() = StatusCode::UNPROCESSABLE_ENTITY;
            }
            r
        }
        Err(e) => b.fail("Import refused", e),
    }
}

/// Imports a manifest and its files (chosen in a browser, so each file arrives under its
/// name alone): each file is placed where the manifest's `file` column names it, matched by
/// its name, and the manifest is imported as the signed-in account.
async fn import(
    state: &AppState,
    b: &Browser<ToSubmit>,
    form: Upload,
) -> Result<ManifestPage, ApiError> {
    let manifests: Vec<_> = form.files.iter().filter(|f| f.0 == "manifest").collect();
    let [(_, manifest_name, manifest_bytes)] = manifests[..] else {
        return Err(ApiError::input(
            "choose exactly one manifest",
            "the manifest is the CSV that lists the files (file,technique,name,...)",
        ));
    };
    let manifest_name = safe_name(manifest_name);
    let manifest_bytes = manifest_bytes.clone();
    let mut files: Vec<(String, Vec<u8>)> = Vec::new();
    for (_, name, bytes) in form.files.iter().filter(|f| f.0 == "file") {
        let name = safe_name(name);
        if files.iter().any(|f| f.0 == name) || name == manifest_name {
            return Err(ApiError::input(
                format!("two files are named '{name}'; nothing was imported"),
                "choose each file once",
            ));
        }
        files.push((name, bytes.clone()));
    }
    let all_or_nothing = form.field("all_or_nothing").is_some();
    let actor = b.caller.account.name.clone();
    tracing::info!(account = %actor, files = files.len(), "import page");
    let shown_name = manifest_name.clone();
    let (report, notes, prefix) = state
        .write_as(move |lib| {
            let dir = tempfile::tempdir()
                .map_err(|e| whorl::Error::io("making a temporary folder", e))?;
            let prefix = format!("{}/", dir.path().display());
            let manifest = written(dir.path(), &manifest_name, &manifest_bytes)?;
            let located = |e: whorl::Error| {
                let hint = e.hint().unwrap_or_default().to_string();
                if e.is_input() {
                    ApiError::input(e.to_string().replace(&prefix, ""), hint)
                } else {
                    ApiError::from(e)
                }
            };
            // Where the manifest puts each file: the paths of its `file` column by name.
            let rows = read_manifest(&manifest, &actor).map_err(located)?;
            let mut notes = Vec::new();
            for (name, bytes) in &files {
                let places: Vec<std::path::PathBuf> = rows
                    .iter()
                    .filter(|r| safe_name(&r.file) == *name)
                    .filter_map(|r| relative_name(&r.file).ok())
                    .collect();
                if places.is_empty() {
                    notes.push(format!(
                        "{name}: no row of the manifest names this file; it was not imported"
                    ));
                }
                for place in places {
                    let path = dir.path().join(place);
                    if let Some(parent) = path.parent() {
                        std::fs::create_dir_all(parent)
                            .map_err(|e| whorl::Error::io("making a folder for the upload", e))?;
                    }
                    std::fs::write(&path, bytes)
                        .map_err(|e| whorl::Error::io("writing an uploaded file", e))?;
                }
            }
            let report =
                import_manifest_as(lib, &manifest, &actor, all_or_nothing).map_err(located)?;
            Ok((report, notes, prefix))
        })
        .await?;
    let rows: Vec<RowResult> = report
        .rows
        .iter()
        .map(|r| match &r.outcome {
            Ok(Outcome::Added { spectrum_id, .. }) => RowResult {
                line: r.line,
                file: r.file.clone(),
                result: if report.rolled_back {
                    "not stored (rolled back)"
                } else {
                    "added, pending"
                },
                spectrum: (!report.rolled_back).then_some(*spectrum_id),
                detail: r.warnings.join("; "),
            },
            Ok(Outcome::AlreadyPresent { spectrum_id }) => RowResult {
                line: r.line,
                file: r.file.clone(),
                result: "already present",
                spectrum: Some(*spectrum_id),
                detail: r.warnings.join("; "),
            },
            Err(e) => RowResult {
                line: r.line,
                file: r.file.clone(),
                result: "refused",
                spectrum: None,
                detail: format!(
                    "{}{}",
                    e.to_string().replace(&prefix, ""),
                    e.hint()
                        .map(|h| format!(" (hint: {h})"))
                        .unwrap_or_default()
                ),
            },
        })
        .collect();
    let rejected = report.rejected().count();
    let summary = if report.rolled_back {
        format!(
            "{rejected} of {} rows were refused, so nothing was imported (all or nothing).",
            rows.len()
        )
    } else {
        format!(
            "{} added (pending a sign-off), {} already present, {rejected} refused, of {} rows.",
            report.imported(),
            report.already_present(),
            rows.len()
        )
    };
    let mut notes = notes;
    if let Some(c) = report.coverage_note() {
        notes.push(c);
    }
    Ok(ManifestPage {
        layout: b.layout("Manifest imported", "/submit"),
        manifest: shown_name,
        summary,
        refused: rejected > 0,
        rows,
        notes,
    })
}
