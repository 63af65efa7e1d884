//! The web pages: server-rendered HTML (askama templates in `templates/`, checked when the
//! crate compiles) over the same layers the JSON API uses, working without JavaScript (each
//! plot carries its spectra as JSON in `data-plot`, which `assets/plot.js` draws again with
//! zoom and pan). One file per page, each with its `router()`; this file holds what they share: the `Browser` extractor (a signed-in
//! browser session with the capability a page needs, and its CSRF token), the layout every
//! page extends, HTML error pages, and what the server holds between two requests of one
//! flow (`Held`: search results for the printable report, submissions awaiting confirmation).
//!
//! Forms that change anything carry a CSRF token in a hidden field, derived from the session
//! (the synchronizer token pattern of the OWASP Cross-Site Request Forgery Prevention Cheat
//! Sheet); a form without it or with another session's token is refused and changes nothing.

mod accounts;
mod assets;
mod audit;
mod identify;
mod library;
mod plot;
mod report;
mod review;
mod search;
mod sign_in;
mod spectrum;
mod submit;

use std::collections::HashMap;
use std::marker::PhantomData;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use askama::Template;
use axum::extract::FromRequestParts;
use axum::http::request::Parts;
use axum::http::{StatusCode, header};
use axum::response::{Html, IntoResponse, Redirect, Response};
use whorl::library::Capability;
use whorl::spectrum::sha256_hex;

use super::auth::{Allowed, Caller, Credential, Needs};
use super::error::ApiError;
use super::routes::Routes;
use super::state::AppState;

/// Every page, as routes.
pub fn router() -> Routes {
    let held = Held::default();
    sign_in::router()
        .merge(assets::router())
        .merge(search::router(&held))
        .merge(report::router(&held))
        .merge(library::router())
        .merge(spectrum::router())
        .merge(review::router())
        .merge(audit::router())
        .merge(submit::router(&held))
        .merge(identify::router())
        .merge(accounts::router())
}

/// The caution every page carries.
pub const CAUTION: &str = "A library match is evidence, not proof of identity. Every result here defers to the lab's accredited procedures, its qualified analysts and local regulations: confirm an identification by the lab's validated procedure (e.g. an independent second technique) before relying on it.";

/// One link of the navigation bar.
pub struct NavLink {
    /// Where it goes.
    pub href: &'static str,
    /// What it says.
    pub label: &'static str,
    /// The page shown now.
    pub current: bool,
}

/// What the base layout shows on every page.
pub struct Layout {
    /// The page's title.
    pub title: String,
    /// The signed-in account ("" when nobody is).
    pub account: String,
    /// Its role.
    pub role: String,
    /// The session's CSRF token, for the forms.
    pub csrf: String,
    /// The pages the role may use.
    pub nav: Vec<NavLink>,
    /// The caution.
    pub caution: &'static str,
    /// whorl's version.
    pub version: &'static str,
}

const PAGES: [(&str, &str, Capability); 7] = [
    ("/search", "Search", Capability::View),
    ("/identify", "Identify", Capability::View),
    ("/submit", "Submit", Capability::Submit),
    ("/library", "Library", Capability::View),
    ("/review", "Review queue", Capability::SignOff),
    ("/audit", "Audit trail", Capability::View),
    ("/accounts", "Accounts", Capability::Administer),
];

impl Layout {
    /// The layout for nobody signed in.
    pub fn anonymous(title: impl Into<String>) -> Layout {
        Layout {
            title: title.into(),
            account: String::new(),
            role: String::new(),
            csrf: String::new(),
            nav: Vec::new(),
            caution: CAUTION,
            version: env!("CARGO_PKG_VERSION"),
        }
    }
}

/// A signed-in browser session whose role grants `N::CAPABILITY`. Browsers (they ask for
/// text/html) that are not signed in are sent to the sign-in page and see refusals as pages;
/// other clients get the API's JSON errors. A bearer token is refused: pages are for people
/// in a browser, programs use the API.
pub struct Browser<N: Needs> {
    /// Who is signed in.
    pub caller: Caller,
    /// The session's CSRF token.
    pub csrf: String,
    _needs: PhantomData<N>,
}

/// Whether the client asks for HTML (a browser).
fn wants_html(parts: &Parts) -> bool {
    parts
        .headers
        .get(header::ACCEPT)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| v.contains("text/html"))
}

/// The CSRF token of a session: a hash of the session's own key (itself the SHA-256 of the
/// cookie's secret), which no other site can know or compute.
fn csrf_token(session_key: &str) -> String {
    sha256_hex(format!("whorl csrf token\0{session_key}").as_bytes())
}

/// Compares two strings in time independent of where they differ.
fn same_secret(a: &str, b: &str) -> bool {
    a.len() == b.len()
        && a.bytes()
            .zip(b.bytes())
            .fold(0u8, |acc, (x, y)| acc | (x ^ y))
            == 0
}

impl<N: Needs> FromRequestParts<AppState> for Browser<N> {
    type Rejection = Response;

    async fn from_request_parts(parts: &mut Parts, state: &AppState) -> Result<Self, Response> {
        let html = wants_html(parts);
        match Allowed::<N>::from_request_parts(parts, state).await {
            Ok(Allowed(caller, _)) => {
                let Credential::Session(key) = &caller.credential else {
                    return Err(ApiError::input(
                        "the web pages take a browser session, not a bearer token",
                        "call the JSON API under /api/v1 with the token, or sign in at /sign-in in a browser",
                    )
                    .into_response());
                };
                let csrf = csrf_token(key);
                Ok(Browser {
                    caller,
                    csrf,
                    _needs: PhantomData,
                })
            }
            Err(e) if html && e.status == StatusCode::UNAUTHORIZED => {
                Err(Redirect::to("/sign-in").into_response())
            }
            Err(e) if html => Err(error_page(
                Layout::anonymous("Not allowed"),
                e.status,
                "Not allowed",
                &e.message,
                &e.hint,
            )),
            Err(e) => Err(e.into_response()),
        }
    }
}

impl<N: Needs> Browser<N> {
    /// The layout of a page with this title, the navigation fitted to the role.
    pub fn layout(&self, title: impl Into<String>, current: &str) -> Layout {
        let account = &self.caller.account;
        Layout {
            title: title.into(),
            account: account.name.clone(),
            role: account.role.to_string(),
            csrf: self.csrf.clone(),
            nav: PAGES
                .iter()
                .filter(|(_, _, c)| account.can(*c))
                .map(|&(href, label, _)| NavLink {
                    href,
                    label,
                    current: href == current,
                })
                .collect(),
            caution: CAUTION,
            version: env!("CARGO_PKG_VERSION"),
        }
    }

    /// The refusal of a form whose CSRF token is missing or not this session's (nothing is
    /// changed), or `None` when the token is this session's.
    pub fn csrf_refused(&self, given: Option<&str>) -> Option<Response> {
        match given {
            Some(t) if same_secret(t, &self.csrf) => None,
            _ => Some(error_page(
                self.layout("Form refused", ""),
                StatusCode::FORBIDDEN,
                "Form refused",
                "This form's security token is missing or belongs to another session, so nothing was changed.",
                "Reload the page (sign in again if asked) and submit the form from there.",
            )),
        }
    }

    /// A library error shown as a page with this session's layout.
    pub fn fail(&self, title: &str, e: ApiError) -> Response {
        error_page(self.layout(title, ""), e.status, title, &e.message, &e.hint)
    }
}

#[derive(Template)]
#[template(path = "error.html")]
struct ErrorPage<'a> {
    layout: Layout,
    heading: &'a str,
    message: &'a str,
    hint: &'a str,
    back: &'a str,
}

/// An error as a page.
pub fn error_page(
    layout: Layout,
    status: StatusCode,
    heading: &str,
    message: &str,
    hint: &str,
) -> Response {
    let page = ErrorPage {
        layout,
        heading,
        message,
        hint,
        back: "/",
    };
    let mut r = render(&page);
    *r.status_mut() = status;
    r
}

/// A template rendered as an HTML answer.
pub fn render<T: Template>(t: &T) -> Response {
    match t.render() {
        Ok(html) => Html(html).into_response(),
        Err(e) => ApiError::internal(format!("rendering a page: {e}")).into_response(),
    }
}

/// How long the server holds a search result or a submission awaiting confirmation.
const HOLD_FOR: Duration = Duration::from_secs(2 * 60 * 60);
/// The most results and submissions held at once (the oldest are dropped first).
const HOLD_AT_MOST: usize = 200;
/// The uploaded bytes one account may have held at once, in request bodies (`--max-body`,
/// 32 MiB by default: 64 MiB), so one account cannot fill the server's memory.
const HELD_BODIES_PER_ACCOUNT: usize = 2;
/// The uploaded bytes all accounts together may have held at once, in request bodies
/// (512 MiB at the default `--max-body`).
const HELD_BODIES_IN_ALL: usize = 16;

/// One held item: owner account, when held, the uploaded bytes it holds, the item.
struct Item {
    owner: i64,
    at: Instant,
    bytes: usize,
    value: Arc<dyn std::any::Any + Send + Sync>,
}

/// Held items by id.
type Items = HashMap<String, Item>;

/// What one flow needs between two requests, held in memory under a random id and shown
/// only to the account that made it (a restart forgets it). Items expire after
/// [`HOLD_FOR`]; the uploaded bytes held are capped per account and in all (in multiples of
/// the largest request body), and an upload beyond either cap is refused, never made room
/// for by dropping another account's items.
#[derive(Clone, Default)]
pub struct Held {
    items: Arc<Mutex<Items>>,
}

fn mib(bytes: usize) -> String {
    format!("{:.1} MiB", bytes as f64 / (1024.0 * 1024.0))
}

impl Held {
    fn lock(&self) -> std::sync::MutexGuard<'_, Items> {
        let mut items = self.items.lock().unwrap_or_else(|e| e.into_inner());
        items.retain(|_, i| i.at.elapsed() < HOLD_FOR);
        items
    }

    /// Whether `account` may have `bytes` more uploaded bytes held, under a largest request
    /// body of `max_body` bytes; a refusal says how much is held and what to do.
    pub fn room(&self, account: i64, bytes: usize, max_body: usize) -> Result<(), ApiError> {
        room(&self.lock(), account, bytes, max_body)
    }

    /// Holds `value`, which keeps `bytes` uploaded bytes, for `account`; returns its id.
    /// Refused beyond the caps (see [`Held::room`]).
    pub fn put<T: Send + Sync + 'static>(
        &self,
        account: i64,
        bytes: usize,
        max_body: usize,
        value: T,
    ) -> Result<String, ApiError> {
        let id = hex::encode(whorl::library::random_bytes(16)?);
        let mut items = self.lock();
        room(&items, account, bytes, max_body)?;
        while items.len() >= HOLD_AT_MOST {
            let oldest = items
                .iter()
                .min_by_key(|(_, i)| i.at)
                .map(|(k, _)| k.clone());
            match oldest {
                Some(k) => items.remove(&k),
                None => break,
            };
        }
        items.insert(
            id.clone(),
            Item {
                owner: account,
                at: Instant::now(),
                bytes,
                value: Arc::new(value),
            },
        );
        Ok(id)
    }

    /// What `account` holds under `id`, if it is of type `T`.
    pub fn get<T: Send + Sync + 'static>(&self, account: i64, id: &str) -> Option<Arc<T>> {
        let items = self.lock();
        let item = items.get(id)?;
        if item.owner != account {
            return None;
        }
        item.value.clone().downcast::<T>().ok()
    }

    /// What `account` holds under `id`, if it is of type `T`, no longer held after this (a
    /// confirmation is used once).
    pub fn take<T: Send + Sync + 'static>(&self, account: i64, id: &str) -> Option<Arc<T>> {
        let found = self.get::<T>(account, id)?;
        let mut items = self.lock();
        items.remove(id).map(|_| found)
    }
}

fn room(items: &Items, account: i64, bytes: usize, max_body: usize) -> Result<(), ApiError> {
    let per_account = HELD_BODIES_PER_ACCOUNT.saturating_mul(max_body);
    let in_all = HELD_BODIES_IN_ALL.saturating_mul(max_body);
    let mine: usize = items
        .values()
        .filter(|i| i.owner == account)
        .map(|i| i.bytes)
        .sum();
    let all: usize = items.values().map(|i| i.bytes).sum();
    let too_much = |message: String, hint: &str| {
        // 429 (RFC 6585 section 4): a quota over time, as held uploads expire; not 413, which
        // the server keeps for a request body over --max-body.
        Err(ApiError::new(
            StatusCode::TOO_MANY_REQUESTS,
            "too-much-held",
            message,
            hint,
        ))
    };
    if mine.saturating_add(bytes) > per_account {
        return too_much(
            format!(
                "the server already holds {} of your uploads (previewed submissions and searches kept for their report); this {} would pass the {} it holds per account",
                mib(mine),
                mib(bytes),
                mib(per_account)
            ),
            "confirm the submissions you have previewed, or wait: held uploads are forgotten two hours after they were made",
        );
    }
    if all.saturating_add(bytes) > in_all {
        return too_much(
            format!(
                "the server holds {} of uploads for all accounts; this {} would pass the {} it holds in all",
                mib(all),
                mib(bytes),
                mib(in_all)
            ),
            "try again later: held uploads are forgotten two hours after they were made",
        );
    }
    Ok(())
}

/// The answer when a held item is gone (expired, restarted, or someone else's).
pub fn gone<N: Needs>(b: &Browser<N>, what: &str, again: &str) -> Response {
    error_page(
        b.layout("No longer held", ""),
        StatusCode::NOT_FOUND,
        "No longer held",
        &format!(
            "This {what} is no longer held by the server (they are kept for two hours and forgotten at a restart) or belongs to another account."
        ),
        &format!("Start again from {again}."),
    )
}

/// One option of a select box.
pub struct Choice {
    /// Its value.
    pub value: &'static str,
    /// What it says.
    pub label: &'static str,
    /// Chosen now.
    pub selected: bool,
}

/// The techniques for a select box, `selected` chosen.
pub fn techniques(selected: &str) -> Vec<Choice> {
    whorl::technique::Technique::ALL
        .iter()
        .map(|t| Choice {
            value: t.name(),
            label: t.title(),
            selected: t.name() == selected,
        })
        .collect()
}

/// A short UTC time for people: "2025-03-01 14:05:09 UTC" from RFC 3339.
pub fn when(rfc3339: &str) -> String {
    match chrono::DateTime::parse_from_rfc3339(rfc3339) {
        Ok(t) => t
            .with_timezone(&chrono::Utc)
            .format("%Y-%m-%d %H:%M:%S UTC")
            .to_string(),
        Err(_) => rfc3339.to_string(),
    }
}
