//! The accounts page, for administrators: the accounts with their roles and states; add one
//! (with an initial password, or none, to be set by `whorl account password`), change a role
//! with a reason, disable one with a reason. Each change goes through the library's own
//! audited calls, the ones `whorl account` makes (`add_account`, `set_password`, `set_role`,
//! `disable_account`), as the signed-in administrator.

use askama::Template;
use axum::extract::rejection::{FormRejection, PathRejection, QueryRejection};
use axum::extract::{Form, Path, Query, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Redirect, Response};
use axum::routing::{get, post};
use serde::Deserialize;
use whorl::library::{Account, Capability, MIN_PASSWORD_CHARS, Role};

use super::super::auth::ToAdminister;
use super::super::error::ApiError;
use super::super::routes::{Access, Routes};
use super::super::state::AppState;
use super::{Browser, Layout, render, when};

/// The accounts routes.
pub fn router() -> Routes {
    let admin = Access::Needs(Capability::Administer);
    Routes::new()
        .add("GET", "/accounts", admin, get(page))
        .add("POST", "/accounts", admin, post(add))
        .add("POST", "/accounts/{id}/role", admin, post(role))
        .add("POST", "/accounts/{id}/disable", admin, post(disable))
}

/// One account as listed.
struct Row {
    id: i64,
    name: String,
    role: String,
    password: &'static str,
    state: String,
    active: bool,
    since: String,
    /// The roles to change to, its own chosen.
    choices: Vec<RoleChoice>,
}

/// A role for a select box.
struct RoleChoice {
    value: &'static str,
    selected: bool,
}

#[derive(Template)]
#[template(path = "accounts.html")]
struct AccountsPage {
    layout: Layout,
    notice: String,
    problem: String,
    hint: String,
    rows: Vec<Row>,
    roles: Vec<&'static str>,
    min_password: usize,
}

fn rows(accounts: &[Account]) -> Vec<Row> {
    let now = whorl::library::now();
    accounts
        .iter()
        .map(|a| Row {
            id: a.id,
            name: a.name.clone(),
            role: a.role.to_string(),
            password: if a.has_password { "set" } else { "none" },
            state: match (&a.disabled_at, &a.locked_until) {
                (Some(at), _) => format!(
                    "disabled {}: {}",
                    when(at),
                    a.disabled_reason.clone().unwrap_or_default()
                ),
                (None, Some(until)) if *until > now => format!("locked until {}", when(until)),
                _ => "active".into(),
            },
            active: a.is_active(),
            since: when(&a.created_at),
            choices: Role::ALL
                .iter()
                .map(|r| RoleChoice {
                    value: r.as_str(),
                    selected: *r == a.role,
                })
                .collect(),
        })
        .collect()
}

#[derive(Deserialize)]
struct Done {
    done: Option<String>,
    id: Option<i64>,
}

/// The page, with a notice after a change or a problem after a refusal.
async fn show(
    state: &AppState,
    b: &Browser<ToAdminister>,
    status: StatusCode,
    notice: String,
    problem: (String, String),
) -> Response {
    let accounts = match state.with_library(|lib| Ok(lib.accounts()?)).await {
        Ok(a) => a,
        Err(e) => return b.fail("Accounts", e),
    };
    let mut r = render(&AccountsPage {
        layout: b.layout("Accounts", "/accounts"),
        notice,
        problem: problem.0,
        hint: problem.1,
        rows: rows(&accounts),
        roles: Role::ALL.iter().map(|r| r.as_str()).collect(),
        min_password: MIN_PASSWORD_CHARS,
    });
    *r.status_mut() = status;
    r
}

async fn page(
    State(state): State<AppState>,
    b: Browser<ToAdminister>,
    done: Result<Query<Done>, QueryRejection>,
) -> Response {
    let notice = match done.ok().map(|Query(d)| d) {
        Some(Done {
            done: Some(what),
            id: Some(id),
        }) => {
            let account = state
                .with_library(move |lib| Ok(lib.account_by_id(id)?))
                .await
                .ok()
                .flatten();
            match (what.as_str(), account) {
                ("added", Some(a)) if a.has_password => format!(
                    "Account {} added with the role {} and its initial password; ask its owner to change it with `whorl account password {}`.",
                    a.name, a.role, a.name
                ),
                ("added", Some(a)) => format!(
                    "Account {} added with the role {}; it has no password yet: set one with `whorl account password {}`.",
                    a.name, a.role, a.name
                ),
                ("role", Some(a)) => format!("Account {} now has the role {}.", a.name, a.role),
                ("disabled", Some(a)) => format!(
                    "Account {} is disabled; its sessions and tokens no longer work.",
                    a.name
                ),
                _ => String::new(),
            }
        }
        _ => String::new(),
    };
    show(&state, &b, StatusCode::OK, notice, Default::default()).await
}

/// A refusal shown on the page itself, the list as it is.
async fn refused(state: &AppState, b: &Browser<ToAdminister>, what: &str, e: ApiError) -> Response {
    show(
        state,
        b,
        e.status,
        String::new(),
        (format!("{what}: {}", e.message), e.hint),
    )
    .await
}

#[derive(Deserialize)]
struct AddForm {
    csrf: Option<String>,
    name: Option<String>,
    role: Option<String>,
    password: Option<String>,
    again: Option<String>,
}

async fn add(
    State(state): State<AppState>,
    b: Browser<ToAdminister>,
    body: Result<Form<AddForm>, FormRejection>,
) -> Response {
    let Ok(Form(f)) = body else {
        return b.fail(
            "Account not added",
            ApiError::input("the form was incomplete", "fill in the name and the role"),
        );
    };
    if let Some(r) = b.csrf_refused(f.csrf.as_deref()) {
        return r;
    }
    let what = "Account not added";
    let name = f.name.unwrap_or_default().trim().to_string();
    let role: Role = match f.role.unwrap_or_default().parse() {
        Ok(r) => r,
        Err(e) => return refused(&state, &b, what, ApiError::from(e)).await,
    };
    let password = f.password.unwrap_or_default();
    if password != f.again.unwrap_or_default() {
        return refused(
            &state,
            &b,
            what,
            ApiError::input(
                "the two passwords differ",
                "type the same initial password twice, or leave both empty",
            ),
        )
        .await;
    }
    let by = b.caller.account.name.clone();
    let added = state
        .write_as(move |lib| {
            // The password is checked (length) before the account is made, so that a refused
            // password leaves no account behind without one.
            if !password.is_empty() {
                whorl::library::check_password_rules(&password)?;
            }
            let a = lib.add_account(&name, role, &by)?;
            if !password.is_empty() {
                lib.set_password(&a.name, &password, &by)?;
            }
            Ok(a)
        })
        .await;
    match added {
        Ok(a) => Redirect::to(&format!("/accounts?done=added&id={}", a.id)).into_response(),
        Err(e) => refused(&state, &b, what, e).await,
    }
}

#[derive(Deserialize)]
struct ChangeForm {
    csrf: Option<String>,
    role: Option<String>,
    reason: Option<String>,
}

/// The account an id in the path names.
async fn account(
    state: &AppState,
    id: Result<Path<i64>, PathRejection>,
) -> Result<Account, ApiError> {
    let Path(id) = id?;
    state
        .with_library(move |lib| Ok(lib.account_by_id(id)?))
        .await?
        .ok_or_else(|| {
            ApiError::input(
                format!("there is no account {id}"),
                "reload the accounts page",
            )
        })
}

async fn role(
    State(state): State<AppState>,
    b: Browser<ToAdminister>,
    id: Result<Path<i64>, PathRejection>,
    body: Result<Form<ChangeForm>, FormRejection>,
) -> Response {
    let f = body.map(|Form(f)| f).unwrap_or(ChangeForm {
        csrf: None,
        role: None,
        reason: None,
    });
    if let Some(r) = b.csrf_refused(f.csrf.as_deref()) {
        return r;
    }
    let what = "Role not changed";
    let a = match account(&state, id).await {
        Ok(a) => a,
        Err(e) => return refused(&state, &b, what, e).await,
    };
    let role: Role = match f.role.unwrap_or_default().parse() {
        Ok(r) => r,
        Err(e) => return refused(&state, &b, what, ApiError::from(e)).await,
    };
    let reason = f.reason.unwrap_or_default();
    let by = b.caller.account.name.clone();
    let name = a.name.clone();
    match state
        .write_as(move |lib| Ok(lib.set_role(&name, role, &reason, &by)?))
        .await
    {
        Ok(a) => Redirect::to(&format!("/accounts?done=role&id={}", a.id)).into_response(),
        Err(e) => refused(&state, &b, what, e).await,
    }
}

async fn disable(
    State(state): State<AppState>,
    b: Browser<ToAdminister>,
    id: Result<Path<i64>, PathRejection>,
    body: Result<Form<ChangeForm>, FormRejection>,
) -> Response {
    let f = body.map(|Form(f)| f).unwrap_or(ChangeForm {
        csrf: None,
        role: None,
        reason: None,
    });
    if let Some(r) = b.csrf_refused(f.csrf.as_deref()) {
        return r;
    }
    let what = "Account not disabled";
    let a = match account(&state, id).await {
        Ok(a) => a,
        Err(e) => return refused(&state, &b, what, e).await,
    };
    if a.id == b.caller.account.id {
        return refused(
            &state,
            &b,
            what,
            ApiError::input(
                "you cannot disable the account you are signed in with",
                "ask another administrator, or use `whorl account disable` on the library's host",
            ),
        )
        .await;
    }
    let reason = f.reason.unwrap_or_default();
    let by = b.caller.account.name.clone();
    let name = a.name.clone();
    match state
        .write_as(move |lib| Ok(lib.disable_account(&name, &reason, &by)?))
        .await
    {
        Ok(a) => Redirect::to(&format!("/accounts?done=disabled&id={}", a.id)).into_response(),
        Err(e) => refused(&state, &b, what, e).await,
    }
}
