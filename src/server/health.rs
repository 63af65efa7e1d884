//! `GET /health`: the server is up and its library opens.

use axum::Json;
use axum::extract::State;
use axum::routing::get;
use serde_json::{Value, json};

use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;

/// The health route.
pub fn router() -> Routes {
    Routes::new().add("GET", "/health", Access::Public, get(health))
}

/// The server is up and its library opens.
#[utoipa::path(get, path = "/health", tag = "server",
    responses((status = 200, description = "Up; the library opens", content_type = "application/json")))]
pub async fn health(State(state): State<AppState>) -> Result<Json<Value>, ApiError> {
    state.with_library(|_| Ok(())).await?;
    Ok(Json(json!({
        "status": "ok",
        "version": env!("CARGO_PKG_VERSION"),
        "schema_version": whorl::library::SCHEMA_VERSION,
    })))
}
