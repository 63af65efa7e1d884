//! `/api/v1/log` and `/api/v1/stats`: the audit trail and the library's counts.

use axum::Json;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, State};
use axum::routing::get;
use serde::Deserialize;
use serde_json::Value;
use whorl::library::Capability;

use super::auth::{Allowed, ToView};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;

/// The trail and stats routes.
pub fn router() -> Routes {
    let view = Access::Needs(Capability::View);
    Routes::new().add("GET", "/api/v1/log", view, get(log)).add(
        "GET",
        "/api/v1/stats",
        view,
        get(stats),
    )
}

/// Which events to list.
#[derive(Deserialize, utoipa::IntoParams)]
pub struct LogQuery {
    /// Only this record, e.g. `spectrum:12` or `account:3`.
    record: Option<String>,
}

/// The audit trail, oldest first, as `whorl log --json` prints it.
#[utoipa::path(get, path = "/api/v1/log", tag = "audit", params(LogQuery),
    responses((status = 200, description = "Events in sequence order")))]
pub async fn log(
    State(state): State<AppState>,
    _: Allowed<ToView>,
    q: Result<Query<LogQuery>, QueryRejection>,
) -> Result<Json<Value>, ApiError> {
    let Query(q) = q?;
    let events = state
        .with_library(move |lib| Ok(lib.events(q.record.as_deref())?))
        .await?;
    Ok(Json(
        serde_json::to_value(events).map_err(whorl::Error::from)?,
    ))
}

/// Counts, recipes and the library state hash, as `whorl stats --json` prints them.
#[utoipa::path(get, path = "/api/v1/stats", tag = "audit",
    responses((status = 200, description = "The library's statistics")))]
pub async fn stats(
    State(state): State<AppState>,
    _: Allowed<ToView>,
) -> Result<Json<Value>, ApiError> {
    let stats = state.with_library(|lib| Ok(lib.stats()?)).await?;
    Ok(Json(
        serde_json::to_value(stats).map_err(whorl::Error::from)?,
    ))
}
