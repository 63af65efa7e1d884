//! The audit-trail page: the library's events, newest first, filtered by spectrum, account,
//! action and date, in pages; each with who, when, whether the actor signed in or was
//! asserted, what it touched and the hash that chains it to the one before; above them the
//! chain's last check (when, by whom, what it found: the newest `check` event, which
//! `Library::record_check` appends), and for curators a button that runs the check now.

use askama::Template;
use axum::extract::rejection::FormRejection;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Form, Query, State};
use axum::response::{IntoResponse, Redirect, Response};
use axum::routing::{get, post};
use serde::Deserialize;
use whorl::library::{Capability, CheckRecord, Event};

use super::super::auth::{ToCurate, ToView};
use super::super::error::ApiError;
use super::super::routes::{Access, Routes};
use super::super::state::AppState;
use super::library::encode;
use super::spectrum::summary;
use super::{Browser, Layout, render, when};

/// Events a page.
const PAGE: usize = 100;

/// The audit-trail route.
pub fn router() -> Routes {
    Routes::new()
        .add("GET", "/audit", Access::Needs(Capability::View), get(page))
        .add(
            "POST",
            "/audit/check",
            Access::Needs(Capability::Curate),
            post(check_now),
        )
}

#[derive(Deserialize)]
struct CheckForm {
    csrf: Option<String>,
}

/// Runs the library's full check now (as `POST /api/v1/check` does), records it, and shows
/// the audit trail with its result on top.
async fn check_now(
    State(state): State<AppState>,
    b: Browser<ToCurate>,
    body: Result<Form<CheckForm>, FormRejection>,
) -> Response {
    let given = body.ok().and_then(|Form(f)| f.csrf);
    if let Some(r) = b.csrf_refused(given.as_deref()) {
        return r;
    }
    tracing::info!(account = %b.caller.account.name, "check from the audit page");
    match super::super::admin::run_check(&state, b.caller.account.name.clone()).await {
        Ok(_) => Redirect::to("/audit#last-check").into_response(),
        Err(e) => b.fail("Check failed", e),
    }
}

/// The last check as the page shows it.
struct LastCheck {
    seq: i64,
    when: String,
    by: String,
    identity: String,
    /// "No inconsistency" or "N inconsistencies".
    result: String,
    clean: bool,
    walked: String,
    findings: Vec<String>,
    /// Findings found but not kept in the event.
    more: usize,
}

fn last_check(c: CheckRecord) -> LastCheck {
    LastCheck {
        seq: c.seq,
        when: when(&c.at),
        by: c.by,
        identity: c.identity,
        result: match c.findings {
            0 => "no inconsistency".to_string(),
            1 => "1 inconsistency".to_string(),
            n => format!("{n} inconsistencies"),
        },
        clean: c.findings == 0,
        walked: format!("{} events and {} spectra", c.events, c.spectra),
        more: c.findings.saturating_sub(c.first_findings.len()),
        findings: c
            .first_findings
            .into_iter()
            .map(|f| format!("{}: {}", f.record, f.problem))
            .collect(),
    }
}

#[derive(Deserialize, Default)]
struct Filter {
    spectrum: Option<String>,
    account: Option<String>,
    action: Option<String>,
    from: Option<String>,
    to: Option<String>,
    page: Option<usize>,
}

struct Row {
    seq: i64,
    when: String,
    actor: String,
    identity: String,
    action: String,
    record: String,
    /// `/spectra/ID` for a spectrum's event, else "".
    link: String,
    summary: String,
    hash: String,
}

struct ActionChoice {
    value: String,
    selected: bool,
}

#[derive(Template)]
#[template(path = "audit.html")]
struct AuditPage {
    layout: Layout,
    checked: Option<LastCheck>,
    can_check: bool,
    spectrum: String,
    account: String,
    actions: Vec<ActionChoice>,
    from: String,
    to: String,
    summary: String,
    rows: Vec<Row>,
    page: usize,
    pages: usize,
    previous: String,
    next: String,
}

/// A date filter: `YYYY-MM-DD` (what an `<input type="date">` sends), or nothing.
fn date(field: &str, v: Option<&str>) -> Result<Option<String>, ApiError> {
    match v.map(str::trim).filter(|v| !v.is_empty()) {
        None => Ok(None),
        Some(d) => match chrono::NaiveDate::parse_from_str(d, "%Y-%m-%d") {
            Ok(d) => Ok(Some(d.format("%Y-%m-%d").to_string())),
            Err(_) => Err(ApiError::input(
                format!("{field}: '{d}' is not a date"),
                "give the date as YYYY-MM-DD, e.g. 2026-12-03",
            )),
        },
    }
}

/// The event's date (UTC) as `YYYY-MM-DD`.
fn day(e: &Event) -> String {
    chrono::DateTime::parse_from_rfc3339(&e.at)
        .map(|t| t.with_timezone(&chrono::Utc).format("%Y-%m-%d").to_string())
        .unwrap_or_else(|_| e.at.chars().take(10).collect())
}

async fn page(
    State(state): State<AppState>,
    b: Browser<ToView>,
    filter: Result<Query<Filter>, QueryRejection>,
) -> Response {
    let f = match filter {
        Ok(Query(f)) => f,
        Err(e) => return b.fail("Audit trail", e.into()),
    };
    let spectrum = f
        .spectrum
        .as_deref()
        .map(str::trim)
        .unwrap_or("")
        .to_string();
    let record = if spectrum.is_empty() {
        None
    } else {
        match spectrum.parse::<i64>() {
            Ok(id) if id > 0 => Some(format!("spectrum:{id}")),
            _ => {
                return b.fail(
                    "Audit trail",
                    ApiError::input(
                        format!("spectrum: '{spectrum}' is not a spectrum id"),
                        "give a spectrum's number, e.g. 12, or leave the field empty",
                    ),
                );
            }
        }
    };
    let (from, to) = match (date("from", f.from.as_deref()), date("to", f.to.as_deref())) {
        (Ok(a), Ok(b)) => (a, b),
        (Err(e), _) | (_, Err(e)) => return b.fail("Audit trail", e),
    };
    let account = f
        .account
        .as_deref()
        .map(str::trim)
        .unwrap_or("")
        .to_string();
    let action = f.action.as_deref().map(str::trim).unwrap_or("").to_string();

    let events = state
        .with_library(move |lib| {
            Ok::<_, ApiError>((lib.events(record.as_deref())?, lib.last_check()?))
        })
        .await;
    let (events, checked) = match events {
        Ok(e) => e,
        Err(e) => return b.fail("Audit trail", e),
    };
    let mut actions: Vec<String> = events.iter().map(|e| e.action.clone()).collect();
    actions.sort();
    actions.dedup();
    let wanted = account.to_lowercase();
    let mut rows: Vec<Row> = events
        .iter()
        .rev()
        .filter(|e| wanted.is_empty() || e.actor.to_lowercase() == wanted)
        .filter(|e| action.is_empty() || e.action == action)
        .filter(|e| {
            let d = day(e);
            from.as_ref().is_none_or(|f| &d >= f) && to.as_ref().is_none_or(|t| &d <= t)
        })
        .map(|e| Row {
            seq: e.seq,
            when: when(&e.at),
            actor: e.actor.clone(),
            identity: e.identity.clone(),
            action: e.action.clone(),
            link: e
                .record
                .strip_prefix("spectrum:")
                .map(|id| format!("/spectra/{id}"))
                .unwrap_or_default(),
            record: e.record.clone(),
            summary: summary(&e.payload),
            hash: e.hash.chars().take(12).collect(),
        })
        .collect();
    let total = rows.len();
    let pages = total.div_ceil(PAGE).max(1);
    let page = f.page.unwrap_or(1).clamp(1, pages);
    let rows: Vec<Row> = rows.drain(..).skip((page - 1) * PAGE).take(PAGE).collect();
    let from = from.unwrap_or_default();
    let to = to.unwrap_or_default();
    let link = |p: usize| {
        let mut s = format!("/audit?page={p}");
        for (k, v) in [
            ("spectrum", spectrum.as_str()),
            ("account", account.as_str()),
            ("action", action.as_str()),
            ("from", from.as_str()),
            ("to", to.as_str()),
        ] {
            if !v.is_empty() {
                s.push_str(&format!("&{k}={}", encode(v)));
            }
        }
        s
    };
    let summary = match total {
        0 => "No event matches.".to_string(),
        1 => "1 event, newest first.".to_string(),
        n => format!("{n} events, newest first."),
    };
    render(&AuditPage {
        layout: b.layout("Audit trail", "/audit"),
        checked: checked.map(last_check),
        can_check: b.caller.account.can(Capability::Curate),
        actions: actions
            .into_iter()
            .map(|a| ActionChoice {
                selected: a == action,
                value: a,
            })
            .collect(),
        previous: if page > 1 {
            link(page - 1)
        } else {
            String::new()
        },
        next: if page < pages {
            link(page + 1)
        } else {
            String::new()
        },
        spectrum,
        account,
        from,
        to,
        summary,
        rows,
        page,
        pages,
    })
}
