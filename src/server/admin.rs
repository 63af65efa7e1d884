//! `POST /api/v1/check`: the library's full check (`whorl check`), for curators and
//! administrators.

use axum::Json;
use axum::extract::State;
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use axum::routing::post;
use serde_json::json;
use whorl::library::Capability;

use super::auth::{Allowed, ToCurate};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;

/// The administration routes.
pub fn router() -> Routes {
    Routes::new().add(
        "POST",
        "/api/v1/check",
        Access::Needs(Capability::Curate),
        post(check),
    )
}

/// Runs `whorl check` on the library: the audit chain, the event replay, raw hashes,
/// re-preparation, state hash and derived stores (rebuilt where damaged or behind); the
/// result is then recorded in the audit trail as a `check` event by the caller, signed in
/// (`Library::record_check`), which the audit-trail page shows as the last check. The
/// answer is the report `whorl check --json` prints, with the state hash; 200 when nothing is
/// inconsistent, 409 with the same report when something is.
#[utoipa::path(post, path = "/api/v1/check", tag = "audit",
    responses((status = 200, description = "No inconsistency: the check report"),
        (status = 409, description = "Inconsistencies found: the check report lists them"),
        (status = 403, description = "Curators and administrators only")))]
pub async fn check(
    State(state): State<AppState>,
    Allowed(caller, _): Allowed<ToCurate>,
) -> Result<Response, ApiError> {
    tracing::info!(account = %caller.account.name, "check");
    let (report, state_hash) = run_check(&state, caller.account.name.clone()).await?;
    let clean = report.findings.is_empty();
    let mut body = serde_json::to_value(&report).map_err(whorl::Error::from)?;
    body["state_hash"] = json!(state_hash);
    let status = if clean {
        StatusCode::OK
    } else {
        body["kind"] = json!("inconsistent");
        body["message"] = json!(format!("{} inconsistencies found", report.findings.len()));
        body["hint"] =
            json!("see the findings; a library edited outside whorl needs restoring from a backup");
        StatusCode::CONFLICT
    };
    Ok((status, Json(body)).into_response())
}

/// Runs the check as `actor` (signed in) and records its result in the audit trail; the
/// report and the state hash.
pub async fn run_check(
    state: &AppState,
    actor: String,
) -> Result<(whorl::library::CheckReport, String), ApiError> {
    state
        .write_as(move |lib| {
            let report = lib.check(&|_, _| {})?;
            lib.record_check(&actor, &report)?;
            Ok((report, lib.state_hash()?))
        })
        .await
}
