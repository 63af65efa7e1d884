//! The review queue: the pending spectra, each opened on its own page with its plot over its
//! nearest library spectra and its peak table; the sign-off form there needs the password
//! again and goes through the API's signed review (`spectra::review`: the four-eyes rule by
//! account, 21 CFR Part 11 §11.50 and §11.200). Nothing can be approved from the list.

use std::marker::PhantomData;

use askama::Template;
use axum::Json;
use axum::extract::rejection::{FormRejection, PathRejection};
use axum::extract::{Form, Path, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Redirect, Response};
use axum::routing::{get, post};
use serde::Deserialize;
use whorl::library::{Capability, Decision, Status, Summary, same_person};

use super::super::auth::{Allowed, ToSignOff};
use super::super::error::ApiError;
use super::super::routes::{Access, Routes};
use super::super::spectra::{SignOff, review};
use super::super::state::AppState;
use super::plot::{self, PlotView};
use super::spectrum::{Facts, NeighbourRow, facts, metadata_rows, neighbour_rows, peak_rows};
use super::{Browser, Layout, render, when};

/// Neighbours drawn with the spectrum under review.
const PLOTTED: usize = 2;

/// The review routes.
pub fn router() -> Routes {
    let sign = Access::Needs(Capability::SignOff);
    Routes::new()
        .add("GET", "/review", sign, get(queue))
        .add("GET", "/review/{id}", sign, get(page))
        .add("POST", "/review/{id}", sign, post(sign_off))
}

#[derive(Template)]
#[template(path = "review_queue.html")]
struct QueuePage {
    layout: Layout,
    rows: Vec<Summary>,
}

async fn queue(State(state): State<AppState>, b: Browser<ToSignOff>) -> Response {
    let rows = state
        .with_library(|lib| {
            let mut list = lib.list(None)?;
            list.retain(|s| s.status == Status::Pending);
            Ok(list)
        })
        .await;
    match rows {
        Ok(rows) => render(&QueuePage {
            layout: b.layout("Review queue", "/review"),
            rows,
        }),
        Err(e) => b.fail("Review queue", e),
    }
}

#[derive(Template)]
#[template(path = "review.html")]
struct ReviewPage {
    layout: Layout,
    id: i64,
    name: String,
    problem: String,
    hint: String,
    own: bool,
    status: String,
    pending: bool,
    technique: String,
    revision: i64,
    metadata: Vec<(String, String)>,
    submitted_by: String,
    created_at: String,
    plots: Vec<PlotView>,
    duplicates: Vec<String>,
    neighbours: Vec<NeighbourRow>,
    peaks: Vec<(String, String, String)>,
    x_unit_symbol: String,
    approve_meaning: &'static str,
    reject_meaning: &'static str,
}

fn review_page(
    b: &Browser<ToSignOff>,
    f: &Facts,
    problem: String,
    hint: String,
) -> Result<ReviewPage, ApiError> {
    let r = &f.record;
    let id = r.id;
    let me = &b.caller.account.name;
    let own = same_person(me, &r.submitted_by)
        || r.imported_by.as_deref().is_some_and(|i| same_person(me, i))
        || f.revisions
            .last()
            .is_some_and(|rev| same_person(me, &rev.by));
    let label = format!("under review: spectrum {id}, {}", r.metadata.name);
    let labels: Vec<String> = f
        .neighbours
        .iter()
        .map(|h| format!("library: spectrum {}, {}", h.spectrum_id, h.name))
        .collect();
    let mut series = vec![(label.as_str(), &f.prepared)];
    series.extend(labels.iter().map(String::as_str).zip(&f.neighbour_spectra));
    let caption = if f.neighbour_spectra.is_empty() {
        format!("Spectrum {id} as prepared")
    } else {
        format!(
            "Spectrum {id} over its {} nearest library spectra, each scaled to its maximum",
            f.neighbour_spectra.len()
        )
    };
    let plots = vec![plot::spectra(
        format!("review-{id}"),
        caption,
        &f.grid,
        &series,
    )?];
    let (neighbours, duplicates) = neighbour_rows(f);
    Ok(ReviewPage {
        layout: b.layout(format!("Review spectrum {id}"), "/review"),
        id,
        name: r.metadata.name.clone(),
        problem,
        hint,
        own,
        status: r.status.name().to_string(),
        pending: r.status == Status::Pending,
        technique: r.technique.title().to_string(),
        revision: r.revision,
        metadata: metadata_rows(r),
        submitted_by: r.submitted_by.clone(),
        created_at: when(&r.created_at),
        plots,
        duplicates,
        neighbours,
        peaks: peak_rows(&f.prepared),
        x_unit_symbol: r.technique.x_unit_symbol().to_string(),
        approve_meaning: Decision::Approve.default_meaning(),
        reject_meaning: Decision::Reject.default_meaning(),
    })
}

async fn show(
    state: &AppState,
    b: &Browser<ToSignOff>,
    id: i64,
    status: StatusCode,
    problem: String,
    hint: String,
) -> Response {
    let f = match state.with_library(move |lib| facts(lib, id, PLOTTED)).await {
        Ok(f) => f,
        Err(e) => return b.fail("No such spectrum", e),
    };
    match review_page(b, &f, problem, hint) {
        Ok(p) => {
            let mut r = render(&p);
            *r.status_mut() = status;
            r
        }
        Err(e) => b.fail("Review", e),
    }
}

async fn page(
    State(state): State<AppState>,
    b: Browser<ToSignOff>,
    id: Result<Path<i64>, PathRejection>,
) -> Response {
    match id {
        Ok(Path(id)) => show(&state, &b, id, StatusCode::OK, String::new(), String::new()).await,
        Err(e) => b.fail("No such spectrum", e.into()),
    }
}

#[derive(Deserialize)]
struct SignOffForm {
    csrf: Option<String>,
    decision: Option<String>,
    note: Option<String>,
    password: Option<String>,
}

async fn sign_off(
    State(state): State<AppState>,
    b: Browser<ToSignOff>,
    id: Result<Path<i64>, PathRejection>,
    body: Result<Form<SignOffForm>, FormRejection>,
) -> Response {
    let id = match id {
        Ok(Path(id)) => id,
        Err(e) => return b.fail("No such spectrum", e.into()),
    };
    let form = match body {
        Ok(Form(f)) => f,
        Err(e) => {
            return b.fail(
                "Sign-off refused",
                ApiError::input(e.body_text(), "sign from the review page's form"),
            );
        }
    };
    if let Some(r) = b.csrf_refused(form.csrf.as_deref()) {
        return r;
    }
    let Some(decision) = form.decision.filter(|d| !d.is_empty()) else {
        return show(
            &state,
            &b,
            id,
            StatusCode::BAD_REQUEST,
            "no decision was chosen".into(),
            "Choose verify or reject, then sign with your password.".into(),
        )
        .await;
    };
    let signed = review(
        State(state.clone()),
        Allowed(b.caller.clone(), PhantomData),
        Ok(Path(id)),
        Ok(Json(SignOff {
            decision,
            meaning: None,
            note: form.note.filter(|n| !n.trim().is_empty()),
            password: form.password.unwrap_or_default(),
        })),
    )
    .await;
    match signed {
        Ok(Json(v)) => {
            let decision = v["decision"].as_str().unwrap_or("signed").to_string();
            Redirect::to(&format!("/spectra/{id}?signed={decision}")).into_response()
        }
        Err(e) => {
            let hint = if e.message.contains("the reviewer must be someone else") {
                "Four-eyes rule: another account with the sign-off role must review this spectrum; nothing was signed.".to_string()
            } else {
                e.hint.clone()
            };
            show(&state, &b, id, e.status, e.message.clone(), hint).await
        }
    }
}
