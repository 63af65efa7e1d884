//! `/api/v1/compounds`: the compounds spectra belong to, listed and shown (anyone who may
//! view), and merged when two rows turn out to be one substance (curators), as `whorl
//! compound` does on the command line.

use axum::Json;
use axum::extract::rejection::{JsonRejection, PathRejection};
use axum::extract::{Path, State};
use axum::routing::{get, post};
use serde::Deserialize;
use serde_json::{Value, json};
use whorl::library::Capability;

use super::auth::{Allowed, ToCurate, ToView};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;

/// The compound routes.
pub fn router() -> Routes {
    let view = Access::Needs(Capability::View);
    Routes::new()
        .add("GET", "/api/v1/compounds", view, get(list))
        .add("GET", "/api/v1/compounds/{id}", view, get(show))
        .add(
            "POST",
            "/api/v1/compounds/{id}/merge",
            Access::Needs(Capability::Curate),
            post(merge),
        )
}

/// Every compound with its identity key (`cas:`, `inchikey:` or `name:`), its spectra and the
/// compound it was merged into, if it was.
#[utoipa::path(get, path = "/api/v1/compounds", tag = "compounds",
    responses((status = 200, description = "The compounds, by id")))]
pub async fn list(
    State(state): State<AppState>,
    _: Allowed<ToView>,
) -> Result<Json<Value>, ApiError> {
    let compounds = state.with_library(|lib| Ok(lib.compounds()?)).await?;
    Ok(Json(json!({ "compounds": compounds })))
}

/// One compound, and the other compounds of the same name (candidates for a merge).
#[utoipa::path(get, path = "/api/v1/compounds/{id}", tag = "compounds",
    params(("id" = i64, Path, description = "Compound id")),
    responses((status = 200, description = "The compound"), (status = 404, description = "No such compound")))]
pub async fn show(
    State(state): State<AppState>,
    _: Allowed<ToView>,
    id: Result<Path<i64>, PathRejection>,
) -> Result<Json<Value>, ApiError> {
    let Path(id) = id?;
    let value = state
        .with_library(move |lib| {
            Ok(json!({
                "compound": lib.compound(id)?,
                "same_name": lib.compounds_named_alike(id)?,
            }))
        })
        .await?;
    Ok(Json(value))
}

/// A merge of the compound in the path into another.
#[derive(Deserialize, utoipa::ToSchema)]
pub struct MergeForm {
    /// The compound the spectra go to.
    pub into: i64,
    /// Why the two are one substance, kept in the audit trail.
    pub reason: String,
    /// Merge although the two formulas on record differ (say which is wrong in the reason).
    #[serde(default)]
    pub formulas_differ: bool,
}

/// Moves every spectrum of the compound in the path to compound `into`, as the signed-in
/// account, recorded as one `compound-merge` event with its reason.
#[utoipa::path(post, path = "/api/v1/compounds/{id}/merge", tag = "compounds",
    params(("id" = i64, Path, description = "The compound merged away")), request_body = MergeForm,
    responses((status = 200, description = "Merged"),
        (status = 400, description = "No reason, the same compound twice, or formulas that differ"),
        (status = 403, description = "The role may not curate"),
        (status = 404, description = "No such compound")))]
pub async fn merge(
    State(state): State<AppState>,
    Allowed(caller, ..): Allowed<ToCurate>,
    id: Result<Path<i64>, PathRejection>,
    body: Result<Json<MergeForm>, JsonRejection>,
) -> Result<Json<Value>, ApiError> {
    let (Path(from), Json(body)) = (id?, body?);
    let by = caller.account.name.clone();
    let merge = state
        .write_as(move |lib| {
            Ok(lib.merge_compounds(from, body.into, &by, &body.reason, body.formulas_differ)?)
        })
        .await?;
    Ok(Json(json!({ "merge": merge, "by": caller.account.name })))
}
