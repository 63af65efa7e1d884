//! `POST /api/v1/import`: a manifest and its files as one multipart form, imported as the
//! signed-in account through the library's own import (`read_manifest`, `import_rows`: the
//! code paths of `whorl import`), with a result per row.
//!
//! Plain multipart files only: no archive (zip, tar) is accepted, so nothing is unpacked.
//! Each file part is named by its path relative to the manifest (`spectra/a.csv`); an absolute
//! name or one with `..` refuses the whole upload before anything is written or imported.

use std::path::Path;

use axum::Json;
use axum::extract::multipart::MultipartRejection;
use axum::extract::{Multipart, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use axum::routing::post;
use serde_json::{Value, json};
use whorl::error::Location;
use whorl::library::{Capability, ImportReport, Outcome, import_rows, read_manifest, same_person};

use super::auth::{Allowed, ToSubmit};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;
use super::upload::{Upload, safe_name};

/// The import route.
pub fn router() -> Routes {
    Routes::new().add(
        "POST",
        "/api/v1/import",
        Access::Needs(Capability::Submit),
        post(import),
    )
}

/// A manifest and its files.
#[derive(utoipa::ToSchema)]
#[allow(dead_code)]
pub struct ImportForm {
    /// The manifest CSV, as `whorl import` reads it (file,technique,name,...). A
    /// `submitted_by` cell must name the signed-in account or be empty.
    #[schema(format = Binary, value_type = String)]
    manifest: Vec<u8>,
    /// One part per spectrum file (repeatable), its file name the path the manifest gives.
    #[schema(format = Binary, value_type = Vec<String>)]
    file: Vec<Vec<u8>>,
    /// "true": import nothing if any row is refused.
    all_or_nothing: Option<bool>,
}

/// Writes the upload into `dir`: the manifest under its sanitised name, each file under its
/// relative path. Returns the manifest's path.
fn unpack(form: &Upload, dir: &Path) -> Result<std::path::PathBuf, ApiError> {
    let manifests: Vec<_> = form.files.iter().filter(|f| f.0 == "manifest").collect();
    let [(_, manifest_name, manifest)] = manifests[..] else {
        return Err(ApiError::input(
            "the form needs exactly one 'manifest' part",
            "attach the manifest CSV as the 'manifest' part and each spectrum file as a 'file' part",
        ));
    };
    let manifest_name = safe_name(manifest_name);
    let mut seen = std::collections::HashSet::new();
    seen.insert(manifest_name.clone());
    for (_, name, bytes) in form.files.iter().filter(|f| f.0 == "file") {
        if !seen.insert(name.clone()) {
            return Err(ApiError::input(
                format!(
                    "two parts carry the name '{}'; nothing was imported",
                    whorl::error::excerpt(name, 80)
                ),
                "send each file once, under the path the manifest gives",
            ));
        }
        let path = dir.join(name);
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent)
                .map_err(|e| whorl::Error::io("making a folder for the upload", e))?;
        }
        std::fs::write(&path, bytes)
            .map_err(|e| whorl::Error::io("writing an uploaded file", e))?;
    }
    let path = dir.join(&manifest_name);
    std::fs::write(&path, manifest)
        .map_err(|e| whorl::Error::io("writing the uploaded manifest", e))?;
    Ok(path)
}

/// The report of an import as JSON, one entry per row, with the temporary folder left out of
/// every message (it names the files as the client sent them).
pub fn report_json(report: &ImportReport, dir: &Path) -> Value {
    let prefix = format!("{}/", dir.display());
    let clean = |s: String| s.replace(&prefix, "");
    let rows: Vec<Value> = report
        .rows
        .iter()
        .map(|r| match &r.outcome {
            Ok(Outcome::Added { spectrum_id, .. }) => json!({
                "line": r.line, "file": r.file, "result": "added",
                "spectrum_id": spectrum_id, "warnings": r.warnings,
            }),
            Ok(Outcome::AlreadyPresent { spectrum_id }) => json!({
                "line": r.line, "file": r.file, "result": "already-present",
                "spectrum_id": spectrum_id, "warnings": r.warnings,
            }),
            Err(e) => json!({
                "line": r.line, "file": r.file, "result": "rejected",
                "reason": clean(e.to_string()), "hint": e.hint(),
            }),
        })
        .collect();
    json!({
        "imported": report.imported(),
        "already_present": report.already_present(),
        "rejected": report.rejected().count(),
        "rolled_back": report.rolled_back,
        "coverage_note": report.coverage_note(),
        "rows": rows,
    })
}

/// Imports a manifest and its files in `dir` as `actor`: rows whose `submitted_by` names
/// someone else are refused (the server takes identity only from the session or token).
pub fn import_manifest_as(
    lib: &mut whorl::library::Library,
    manifest: &Path,
    actor: &str,
    all_or_nothing: bool,
) -> whorl::Result<ImportReport> {
    let mut rows = read_manifest(manifest, actor)?;
    for row in &mut rows {
        if let Ok(s) = &row.submission
            && !same_person(&s.submitted_by, actor)
        {
            row.submission = Err(whorl::Error::input(
                Location::line(manifest, row.line),
                format!(
                    "submitted_by names '{}', not the signed-in account '{actor}'",
                    whorl::error::excerpt(&s.submitted_by, 60)
                ),
                "leave submitted_by empty: the server records the signed-in account as the submitter",
            ));
        }
    }
    import_rows(lib, rows, actor, all_or_nothing, &|_| {})
}

/// Imports a manifest and its files as the signed-in account (rows start `pending`). 200 when
/// every row was stored or already present; 422 with the same per-row report when any row
/// was refused (with `all_or_nothing`, nothing is stored then); 400 when the manifest as a
/// whole is refused or a file name is unsafe; 413 past the size or file-count limits.
#[utoipa::path(post, path = "/api/v1/import", tag = "spectra",
    request_body(content = ImportForm, content_type = "multipart/form-data"),
    responses((status = 200, description = "Every row added or already present: {imported, already_present, rejected, rolled_back, rows: [{line, file, result, spectrum_id, warnings}]}"),
        (status = 422, description = "Some rows refused: kind, message, hint and the same per-row report"),
        (status = 400, description = "The manifest as a whole is refused, or a file name is absolute or climbs out with '..' (nothing imported)"),
        (status = 413, description = "Larger than --max-body, or more than 1000 files"),
        (status = 403, description = "The role may not submit")))]
pub async fn import(
    State(state): State<AppState>,
    Allowed(caller, _): Allowed<ToSubmit>,
    form: Result<Multipart, MultipartRejection>,
) -> Result<Response, ApiError> {
    let form = Upload::read_tree(form?, &["manifest", "file"], &["all_or_nothing"]).await?;
    let all_or_nothing = matches!(
        form.field("all_or_nothing"),
        Some("true" | "1" | "yes" | "on")
    );
    let actor = caller.account.name.clone();
    tracing::info!(account = %actor, files = form.files.len(), "import");
    let body = state
        .write_as(move |lib| {
            let dir = tempfile::tempdir()
                .map_err(|e| whorl::Error::io("making a temporary folder", e))?;
            let manifest = unpack(&form, dir.path())?;
            let report =
                import_manifest_as(lib, &manifest, &actor, all_or_nothing).map_err(|e| {
                    let prefix = format!("{}/", dir.path().display());
                    let hint = e.hint().unwrap_or_default().to_string();
                    if e.is_input() {
                        ApiError::input(e.to_string().replace(&prefix, ""), hint)
                    } else {
                        ApiError::from(e)
                    }
                })?;
            Ok(report_json(&report, dir.path()))
        })
        .await?;
    if body["rejected"].as_u64().unwrap_or(0) > 0 {
        let mut body = body;
        let message = if body["rolled_back"] == true {
            "rows were refused, so nothing was imported (all_or_nothing)"
        } else {
            "some rows were refused; the others were imported"
        };
        body["kind"] = json!("rows-rejected");
        body["message"] = json!(message);
        body["hint"] =
            json!("see each refused row's reason and hint, fix them and send those rows again");
        return Ok((StatusCode::UNPROCESSABLE_ENTITY, Json(body)).into_response());
    }
    Ok(Json(body).into_response())
}
