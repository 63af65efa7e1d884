//! `/api/v1/accounts`: the accounts, for administrators (changed through `whorl account`).

use axum::Json;
use axum::extract::rejection::{JsonRejection, PathRejection};
use axum::extract::{Path, State};
use axum::routing::{get, post};
use serde_json::Value;
use whorl::library::{Capability, Role};

use super::auth::{Allowed, ToAdminister};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;

/// The accounts routes.
pub fn router() -> Routes {
    Routes::new()
        .add(
            "GET",
            "/api/v1/accounts",
            Access::Needs(Capability::Administer),
            get(list),
        )
        .add(
            "POST",
            "/api/v1/accounts/{name}/role",
            Access::Needs(Capability::Administer),
            post(set_role),
        )
}

/// A change of role.
#[derive(serde::Deserialize, utoipa::ToSchema)]
pub struct RoleChange {
    /// reader, submitter, signer, curator or admin.
    pub role: String,
    /// Why the role changes (kept in the audit trail).
    pub reason: String,
}

/// Changes an account's role as the signed-in administrator, audited as `account-role` with
/// the reason; the account's sessions and tokens carry the new role from their next request.
#[utoipa::path(post, path = "/api/v1/accounts/{name}/role", tag = "accounts",
    params(("name" = String, Path, description = "Account name")), request_body = RoleChange,
    responses((status = 200, description = "The account with its new role"),
        (status = 400, description = "Not a role, no reason, the same role, or the last administrator"),
        (status = 403, description = "Administrators only")))]
pub async fn set_role(
    State(state): State<AppState>,
    Allowed(caller, _): Allowed<ToAdminister>,
    name: Result<Path<String>, PathRejection>,
    body: Result<Json<RoleChange>, JsonRejection>,
) -> Result<Json<Value>, ApiError> {
    let (Path(name), Json(body)) = (name?, body?);
    let role: Role = body.role.parse()?;
    let by = caller.account.name.clone();
    let account = state
        .write_as(move |lib| Ok(lib.set_role(&name, role, &body.reason, &by)?))
        .await?;
    Ok(Json(
        serde_json::to_value(account).map_err(whorl::Error::from)?,
    ))
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
