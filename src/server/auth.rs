//! Who is calling: a session cookie or a bearer token resolved to an account (the `Caller`
//! extractor), and the capability a route needs (the `Allowed<N>` extractor). Handlers name
//! them in their signatures, so who may call a route is written where the route is.
//!
//! The identity of every write comes from here, never from a request body.

use std::marker::PhantomData;
use std::time::{Duration, Instant};

use axum::extract::FromRequestParts;
use axum::http::header;
use axum::http::request::Parts;
use whorl::library::{Account, Capability};
use whorl::spectrum::sha256_hex;

use super::error::ApiError;
use super::state::{AppState, Failures};

/// The name of the session cookie.
pub const SESSION_COOKIE: &str = "whorl_session";

/// How the caller proved who they are.
#[derive(Debug, Clone)]
pub enum Credential {
    /// A browser session (the SHA-256 of its cookie value).
    Session(String),
    /// A bearer token (its id).
    Token(i64),
}

/// A signed-in caller.
#[derive(Debug, Clone)]
pub struct Caller {
    /// The account, as stored now (a disabled account never gets here).
    pub account: Account,
    /// Session or token.
    pub credential: Credential,
}

/// The value of a cookie in a request.
pub fn cookie<'a>(parts: &'a Parts, name: &str) -> Option<&'a str> {
    parts
        .headers
        .get_all(header::COOKIE)
        .iter()
        .filter_map(|v| v.to_str().ok())
        .flat_map(|v| v.split(';'))
        .filter_map(|kv| kv.trim().split_once('='))
        .find(|(k, _)| *k == name)
        .map(|(_, v)| v)
}

fn bearer(parts: &Parts) -> Option<&str> {
    let v = parts.headers.get(header::AUTHORIZATION)?.to_str().ok()?;
    let (scheme, token) = v.split_once(' ')?;
    scheme.eq_ignore_ascii_case("bearer").then(|| token.trim())
}

impl FromRequestParts<AppState> for Caller {
    type Rejection = ApiError;

    async fn from_request_parts(parts: &mut Parts, state: &AppState) -> Result<Self, ApiError> {
        if let Some(secret) = bearer(parts).map(str::to_string) {
            let now = whorl::library::now();
            let found = state
                .with_library(move |lib| Ok(lib.account_for_token(&secret, &now)?))
                .await?;
            let Some((id, account)) = found else {
                tracing::info!("bearer token refused (unknown, revoked or expired)");
                return Err(ApiError::unauthorized());
            };
            tracing::info!(token = id, account = %account.name, "bearer token used");
            return Ok(Caller {
                account,
                credential: Credential::Token(id),
            });
        }
        let Some(value) = cookie(parts, SESSION_COOKIE) else {
            return Err(ApiError::unauthorized());
        };
        let key = sha256_hex(value.as_bytes());
        let account_id = {
            let mut sessions = state.sessions.lock().unwrap_or_else(|e| e.into_inner());
            let now = Instant::now();
            let Some(s) = sessions.get_mut(&key) else {
                return Err(ApiError::unauthorized());
            };
            if now.duration_since(s.last_seen) > state.options.idle_timeout
                || now.duration_since(s.created) > state.options.session_lifetime
            {
                sessions.remove(&key);
                return Err(ApiError::unauthorized());
            }
            s.last_seen = now;
            s.account_id
        };
        let account = state
            .with_library(move |lib| Ok(lib.account_by_id(account_id)?))
            .await?
            .filter(Account::is_active)
            .ok_or_else(ApiError::unauthorized)?;
        Ok(Caller {
            account,
            credential: Credential::Session(key),
        })
    }
}

/// A capability a route needs, as a type for [`Allowed`].
pub trait Needs: Send + Sync + 'static {
    /// The capability.
    const CAPABILITY: Capability;
}

macro_rules! needs {
    ($($name:ident => $cap:ident),* $(,)?) => {$(
        #[doc = concat!("The route needs `", stringify!($cap), "`.")]
        pub struct $name;
        impl Needs for $name {
            const CAPABILITY: Capability = Capability::$cap;
        }
    )*};
}

needs!(ToView => View, ToSubmit => Submit, ToSignOff => SignOff, ToCurate => Curate, ToAdminister => Administer);

/// A caller whose role grants `N::CAPABILITY`; anyone else is refused with 403 (or 401 when
/// not signed in).
pub struct Allowed<N: Needs>(pub Caller, pub PhantomData<N>);

impl<N: Needs> FromRequestParts<AppState> for Allowed<N> {
    type Rejection = ApiError;

    async fn from_request_parts(parts: &mut Parts, state: &AppState) -> Result<Self, ApiError> {
        let caller = Caller::from_request_parts(parts, state).await?;
        if !caller.account.can(N::CAPABILITY) {
            return Err(ApiError::forbidden(format!(
                "the account {} (role {}) may not do this: it needs the {:?} capability",
                caller.account.name,
                caller.account.role,
                N::CAPABILITY
            )));
        }
        Ok(Allowed(caller, PhantomData))
    }
}

/// Failed sign-ins allowed before the back-off starts, per account.
pub const FREE_FAILURES_ACCOUNT: u32 = 3;
/// Failed sign-ins allowed before the back-off starts, per address.
pub const FREE_FAILURES_ADDRESS: u32 = 20;
/// Failed sign-ins of one account after which it is locked out (an audited event).
pub const LOCKOUT_AFTER: u32 = 10;
/// How long a lock-out lasts.
pub const LOCKOUT: Duration = Duration::from_secs(15 * 60);
/// The longest back-off between two attempts.
pub const MAX_BACKOFF: Duration = Duration::from_secs(60);
/// Failures older than this are forgotten.
pub const FORGET_AFTER: Duration = Duration::from_secs(15 * 60);

/// The wait after `count` failures: none for the first `free`, then doubling from 1 s up to
/// [`MAX_BACKOFF`] (exponential back-off, common practice for throttling password guessing).
pub fn backoff(count: u32, free: u32) -> Duration {
    if count < free {
        return Duration::ZERO;
    }
    let exp = (count - free).min(16);
    Duration::from_secs(1u64 << exp).min(MAX_BACKOFF)
}

/// How long the caller must still wait before trying `key` again, if at all.
pub fn wait_for(state: &AppState, key: &str, free: u32) -> Option<Duration> {
    let failures = state.failures.lock().unwrap_or_else(|e| e.into_inner());
    let f = failures.get(key)?;
    let since = f.last.elapsed();
    if since > FORGET_AFTER {
        return None;
    }
    backoff(f.count, free)
        .checked_sub(since)
        .filter(|d| !d.is_zero())
}

/// Records one failure of `key`; returns the count now.
pub fn record_failure(state: &AppState, key: &str) -> u32 {
    let mut failures = state.failures.lock().unwrap_or_else(|e| e.into_inner());
    let now = Instant::now();
    let f = failures.entry(key.to_string()).or_insert(Failures {
        count: 0,
        last: now,
    });
    if now.duration_since(f.last) > FORGET_AFTER {
        f.count = 0;
    }
    f.count += 1;
    f.last = now;
    f.count
}

/// Forgets the failures of `key` (after a successful sign-in).
pub fn forget_failures(state: &AppState, key: &str) {
    state
        .failures
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .remove(key);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn backoff_doubles_after_the_free_attempts_and_is_capped() {
        assert_eq!(backoff(0, 3), Duration::ZERO);
        assert_eq!(backoff(2, 3), Duration::ZERO);
        assert_eq!(backoff(3, 3), Duration::from_secs(1));
        assert_eq!(backoff(4, 3), Duration::from_secs(2));
        assert_eq!(backoff(6, 3), Duration::from_secs(8));
        assert_eq!(backoff(40, 3), MAX_BACKOFF);
    }
}
