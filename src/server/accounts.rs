//! `/api/v1/accounts`: the accounts, for administrators (changed through `whorl account`).

use axum::Json;
use axum::extract::State;
use axum::routing::get;
use serde_json::Value;
use whorl::library::Capability;

use super::auth::{Allowed, ToAdminister};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;

/// The accounts route.
pub fn router() -> Routes {
    Routes::new().add(
        "GET",
        "/api/v1/accounts",
        Access::Needs(Capability::Administer),
        get(list),
    )
}

/// The accounts with their roles and states (never a password hash).
#[utoipa::path(get, path = "/api/v1/accounts", tag = "accounts",
    responses((status = 200, description = "The accounts"), (status = 403, description = "Administrators only")))]
pub async fn list(
    State(state): State<AppState>,
    _: Allowed<ToAdminister>,
) -> Result<Json<Value>, ApiError> {
    let accounts = state.with_library(|lib| Ok(lib.accounts()?)).await?;
    Ok(Json(
        serde_json::to_value(accounts).map_err(whorl::Error::from)?,
    ))
}
