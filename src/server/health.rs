//! `GET /health`: the server is up and its library opens.

use axum::Json;
use axum::extract::State;
use axum::http::StatusCode;
use axum::routing::get;
use serde_json::{Value, json};

use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;

/// The health route.
pub fn router() -> Routes {
    Routes::new().add("GET", "/health", Access::Public, get(health))
}

/// The server is up and its library opens. A library handle kept from an earlier request is
/// checked to still read the database file at the served path (`Library::catch_up`), so a
/// library folder moved or removed under the server answers 503, not "ok".
#[utoipa::path(get, path = "/health", tag = "server",
    responses((status = 200, description = "Up; the library opens", content_type = "application/json"),
        (status = 503, description = "The library does not open", content_type = "application/json")))]
pub async fn health(State(state): State<AppState>) -> Result<Json<Value>, ApiError> {
    if let Err(e) = state.with_library(|_| Ok(())).await {
        // The route is public: the reason (which names paths) goes to the log only.
        tracing::error!(error = ?e, "health: the library does not open");
        return Err(ApiError::new(
            StatusCode::SERVICE_UNAVAILABLE,
            "unavailable",
            "the server is up, but its library does not open",
            "see the server log for the reason (the request id is in x-request-id)",
        ));
    }
    Ok(Json(json!({
        "status": "ok",
        "version": env!("CARGO_PKG_VERSION"),
        "schema_version": whorl::library::SCHEMA_VERSION,
    })))
}
