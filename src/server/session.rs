//! `/api/v1/session`: sign in (name and password to a server-side session), see who is signed
//! in, sign out.

use std::net::SocketAddr;
use std::time::Instant;

use axum::Json;
use axum::extract::rejection::JsonRejection;
use axum::extract::{ConnectInfo, State};
use axum::http::{HeaderMap, HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use axum::routing::{delete, get, post};
use serde::Deserialize;
use serde_json::json;
use whorl::library::{Capability, Person, random_bytes};
use whorl::spectrum::sha256_hex;

use super::auth::{
    Allowed, Caller, Credential, FREE_FAILURES_ACCOUNT, FREE_FAILURES_ADDRESS, LOCKOUT,
    LOCKOUT_AFTER, SESSION_COOKIE, ToView, forget_failures, record_failure, wait_for,
};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::{AppState, Session};

/// The session routes.
pub fn router() -> Routes {
    Routes::new()
        .add("POST", "/api/v1/session", Access::Public, post(sign_in))
        .add(
            "GET",
            "/api/v1/session",
            Access::Needs(Capability::View),
            get(who),
        )
        .add(
            "DELETE",
            "/api/v1/session",
            Access::Needs(Capability::View),
            delete(sign_out),
        )
}

/// A sign-in.
#[derive(Deserialize, utoipa::ToSchema)]
pub struct SignIn {
    /// The account's name.
    pub name: String,
    /// Its password.
    pub password: String,
}

fn refused() -> ApiError {
    ApiError::new(
        StatusCode::UNAUTHORIZED,
        "unauthorized",
        "the name or the password was not accepted",
        "check both; repeated failures make you wait longer before the next try",
    )
}

fn backed_off(wait: std::time::Duration) -> ApiError {
    let secs = wait.as_secs() + u64::from(wait.subsec_nanos() > 0);
    let mut e = ApiError::new(
        StatusCode::TOO_MANY_REQUESTS,
        "backoff",
        format!("too many failed sign-ins: wait {secs} s before the next try"),
        "wait for the time in Retry-After, then try again with the right password",
    );
    e.retry_after = Some(secs.max(1));
    e
}

/// The client's address: the peer's, or behind a TLS proxy (`--behind-tls-proxy`) the last
/// entry of `X-Forwarded-For`, the one the proxy itself appended (the entries before it come
/// from the client and prove nothing).
fn client_address(state: &AppState, peer: SocketAddr, headers: &HeaderMap) -> String {
    if state.options.behind_tls_proxy
        && let Some(last) = headers
            .get_all("x-forwarded-for")
            .iter()
            .filter_map(|v| v.to_str().ok())
            .flat_map(|v| v.split(','))
            .map(str::trim)
            .rfind(|v| v.parse::<std::net::IpAddr>().is_ok())
    {
        return last.to_string();
    }
    peer.ip().to_string()
}

/// Signs in with a name and password; answers with the account and sets the session cookie.
/// Failed sign-ins back off per account and per address; the tenth failure of an account in a
/// row locks it out for 15 minutes, recorded as an `account-lockout` event.
#[utoipa::path(post, path = "/api/v1/session", tag = "session", request_body = SignIn,
    responses((status = 200, description = "Signed in; the cookie is set"),
        (status = 401, description = "Name or password not accepted"),
        (status = 429, description = "Back-off: wait Retry-After seconds"),
        (status = 423, description = "The account is locked out")))]
pub async fn sign_in(
    State(state): State<AppState>,
    ConnectInfo(peer): ConnectInfo<SocketAddr>,
    request_headers: HeaderMap,
    body: Result<Json<SignIn>, JsonRejection>,
) -> Result<Response, ApiError> {
    let Json(body) = body?;
    let account_key = format!(
        "account:{}",
        Person::new(&body.name, "account")
            .map(|p| p.key().to_string())
            .unwrap_or_else(|_| body.name.trim().to_lowercase())
    );
    let client = client_address(&state, peer, &request_headers);
    let address_key = format!("address:{client}");
    for (key, free) in [
        (&account_key, FREE_FAILURES_ACCOUNT),
        (&address_key, FREE_FAILURES_ADDRESS),
    ] {
        if let Some(wait) = wait_for(&state, key, free) {
            return Err(backed_off(wait));
        }
    }
    let name = body.name.clone();
    let (existing, signed_in) = state
        .with_library(move |lib| {
            let existing = lib.account(&name).ok().flatten();
            let locked = existing
                .as_ref()
                .and_then(|a| a.locked_until.clone())
                .filter(|until| *until > whorl::library::now());
            if let Some(until) = locked {
                return Ok((existing, Err(until)));
            }
            Ok((existing, Ok(lib.check_password(&name, &body.password)?)))
        })
        .await?;
    let account = match signed_in {
        Err(until) => {
            return Err(ApiError::new(
                StatusCode::LOCKED,
                "locked",
                format!("the account is locked out until {until} after repeated failed sign-ins"),
                "wait until then, or ask an administrator",
            ));
        }
        Ok(Some(account)) => account,
        Ok(None) => {
            let n = record_failure(&state, &account_key);
            record_failure(&state, &address_key);
            tracing::info!(client = %client, failures = n, "sign-in refused");
            if n == LOCKOUT_AFTER
                && let Some(a) = existing
            {
                let until = (chrono::Utc::now()
                    + chrono::Duration::from_std(LOCKOUT).unwrap_or_default())
                .to_rfc3339_opts(chrono::SecondsFormat::Millis, true);
                let by = format!("server (from {client})");
                state
                    .write_as_server(move |lib| Ok(lib.lock_account(a.id, &until, n, &by)?))
                    .await?;
            }
            return Err(refused());
        }
    };
    forget_failures(&state, &account_key);
    let secret = hex::encode(random_bytes(32)?);
    let now = Instant::now();
    state
        .sessions
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .insert(
            sha256_hex(secret.as_bytes()),
            Session {
                account_id: account.id,
                created: now,
                last_seen: now,
            },
        );
    tracing::info!(account = %account.name, "signed in");
    let secure = if state.secure_cookies() {
        "; Secure"
    } else {
        ""
    };
    let cookie = format!(
        "{SESSION_COOKIE}={secret}; HttpOnly; SameSite=Strict; Path=/; Max-Age={}{secure}",
        state.options.session_lifetime.as_secs()
    );
    let mut headers = HeaderMap::new();
    headers.insert(
        header::SET_COOKIE,
        HeaderValue::from_str(&cookie).map_err(|e| ApiError::internal(e.to_string()))?,
    );
    Ok((
        headers,
        Json(json!({
            "account": account.name,
            "role": account.role,
            "idle_timeout_s": state.options.idle_timeout.as_secs(),
            "lifetime_s": state.options.session_lifetime.as_secs(),
        })),
    )
        .into_response())
}

/// The signed-in account and how it signed in.
#[utoipa::path(get, path = "/api/v1/session", tag = "session",
    responses((status = 200, description = "The account"), (status = 401, description = "Not signed in")))]
pub async fn who(Allowed(caller, ..): Allowed<ToView>) -> Json<serde_json::Value> {
    let via = match caller.credential {
        Credential::Session(_) => json!({ "session": true }),
        Credential::Token(id) => json!({ "token": id }),
    };
    Json(json!({ "account": caller.account.name, "role": caller.account.role, "via": via }))
}

/// Signs out: the session is revoked at once.
#[utoipa::path(delete, path = "/api/v1/session", tag = "session",
    responses((status = 204, description = "Signed out"), (status = 400, description = "Called with a token, not a session")))]
pub async fn sign_out(
    State(state): State<AppState>,
    caller: Caller,
) -> Result<impl IntoResponse, ApiError> {
    let Credential::Session(key) = caller.credential else {
        return Err(ApiError::input(
            "a bearer token has no session to end",
            "revoke the token with `whorl token revoke ID` instead",
        ));
    };
    state
        .sessions
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .remove(&key);
    tracing::info!(account = %caller.account.name, "signed out");
    let mut headers = HeaderMap::new();
    headers.insert(
        header::SET_COOKIE,
        HeaderValue::from_static("whorl_session=; HttpOnly; SameSite=Strict; Path=/; Max-Age=0"),
    );
    Ok((StatusCode::NO_CONTENT, headers))
}

#[cfg(test)]
mod tests {
    use std::time::Duration;

    use axum::body::Body;
    use axum::extract::connect_info::MockConnectInfo;
    use axum::http::Request;
    use tower::ServiceExt;
    use whorl::library::{Library, Role};

    use super::*;
    use crate::server::state::Options;

    async fn post_sign_in(app: axum::Router, name: &str, password: &str) -> StatusCode {
        let body = json!({ "name": name, "password": password }).to_string();
        let request = Request::post("/api/v1/session")
            .header("content-type", "application/json")
            .body(Body::from(body))
            .unwrap();
        app.oneshot(request).await.unwrap().status()
    }

    /// The server's router in process over a library on disk, with the lock-out path driven
    /// without waiting out the back-off: the failures before the last are aged past it.
    #[tokio::test]
    async fn the_tenth_failure_in_a_row_locks_the_account_and_is_an_event() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path().join("lib");
        let mut lib = Library::init(&root, "setup").unwrap();
        lib.add_account("erin", Role::Curator, "setup").unwrap();
        lib.set_password("erin", "the right passphrase", "setup")
            .unwrap();
        drop(lib);
        let state = AppState::new(Options {
            library: root.clone(),
            address: "127.0.0.1:0".parse().unwrap(),
            behind_tls_proxy: false,
            tls: None,
            inbox: None,
            idle_timeout: Duration::from_secs(60),
            session_lifetime: Duration::from_secs(3600),
            max_body: 1 << 20,
            request_timeout: Duration::from_secs(60),
        });
        let app = crate::server::app(state.clone())
            .layer(MockConnectInfo(SocketAddr::from(([127, 0, 0, 1], 9))));
        let key = format!("account:{}", Person::new("erin", "account").unwrap().key());
        for _ in 0..LOCKOUT_AFTER - 1 {
            record_failure(&state, &key);
        }
        let aged = Instant::now() - Duration::from_secs(61);
        state.failures.lock().unwrap().get_mut(&key).unwrap().last = aged;
        assert_eq!(
            post_sign_in(app.clone(), "ERIN", "a wrong passphrase").await,
            StatusCode::UNAUTHORIZED
        );
        // Locked: the right password is refused (423) once the back-off is aged past too.
        state.failures.lock().unwrap().get_mut(&key).unwrap().last = aged;
        assert_eq!(
            post_sign_in(app, "erin", "the right passphrase").await,
            StatusCode::LOCKED
        );
        let lib = Library::open(&root).unwrap();
        let event = lib.events(None).unwrap().pop().unwrap();
        assert_eq!(event.action, "account-lockout");
        assert_eq!(event.payload["failed_sign_ins"], LOCKOUT_AFTER);
        let account = lib.account("erin").unwrap().unwrap();
        assert!(account.locked_until.unwrap() > whorl::library::now());
    }
}
