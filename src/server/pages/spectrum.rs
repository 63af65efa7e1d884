//! A spectrum's page: its metadata, its plot, its nearest library spectra (with a warning
//! when one of another compound scores as high as a strong candidate), its revisions and what
//! each changed, its sign-offs, its history as a timeline (who, when, signed in or asserted)
//! and its peaks.

use askama::Template;
use axum::extract::rejection::{PathRejection, QueryRejection};
use axum::extract::{Path, Query, State};
use axum::response::Response;
use axum::routing::get;
use serde::Deserialize;
use serde_json::Value;
use whorl::library::{Capability, Event, Library, Review, SpectrumRecord, Status};
use whorl::prepare::Prepared;
use whorl::search::{Hit, Request};

use super::super::auth::ToView;
use super::super::error::ApiError;
use super::super::routes::{Access, Routes};
use super::super::state::AppState;
use super::plot::{self, PlotView};
use super::{Browser, Layout, render, when};

/// The spectrum route.
pub fn router() -> Routes {
    Routes::new().add(
        "GET",
        "/spectra/{id}",
        Access::Needs(Capability::View),
        get(page),
    )
}

/// Nearest library spectra listed.
const NEIGHBOURS: usize = 5;

/// One neighbour as listed.
pub struct NeighbourRow {
    pub score: String,
    pub name: String,
    pub formula: String,
    pub id: i64,
    pub status: String,
}

/// One event as the timeline shows it.
pub struct EventRow {
    pub seq: i64,
    pub action: String,
    pub actor: String,
    pub identity: String,
    pub when: String,
    pub summary: String,
}

/// One revision as listed.
pub struct RevisionRow {
    pub number: i64,
    pub when: String,
    pub by: String,
    pub reason: String,
    pub changed: String,
}

/// What a spectrum's pages show, read in one go on the blocking pool.
pub struct Facts {
    pub record: SpectrumRecord,
    pub prepared: Prepared,
    pub grid: whorl::technique::Grid,
    pub neighbours: Vec<Hit>,
    pub neighbour_spectra: Vec<Prepared>,
    pub strong_score: f64,
    pub reviews: Vec<Review>,
    pub events: Vec<Event>,
    pub revisions: Vec<RevisionRow>,
    pub withdrawn: Option<String>,
}

/// Reads everything a spectrum's page shows. The neighbours are found by searching the
/// library (verified and pending spectra, default scoring of the technique) with the
/// spectrum's own prepared form, the same search an unknown gets, itself left out.
pub fn facts(lib: &Library, id: i64, plotted_neighbours: usize) -> Result<Facts, ApiError> {
    let record = lib.spectrum(id)?;
    let prepared = lib.prepared(id)?;
    let grid = lib.recipe(record.technique)?.grid.clone();
    let mut request = Request::new(record.technique);
    request.top = NEIGHBOURS + 1;
    request.statuses = vec![Status::Verified, Status::Pending];
    let strong_score = whorl::search::confidence(record.technique, &request.params).strong_score;
    let mut neighbours = whorl::search::search(lib, &prepared, &request)?.hits;
    neighbours.retain(|h| h.spectrum_id != id);
    neighbours.truncate(NEIGHBOURS);
    let neighbour_spectra = neighbours
        .iter()
        .take(plotted_neighbours)
        .map(|h| lib.prepared(h.spectrum_id))
        .collect::<whorl::Result<Vec<_>>>()?;
    let mut revisions = Vec::new();
    let mut before: Option<Value> = None;
    for n in 1..=record.revision {
        let (r, info) = lib.spectrum_at(id, n)?;
        let now = serde_json::to_value(&r.metadata).map_err(whorl::Error::from)?;
        revisions.push(RevisionRow {
            number: n,
            when: when(&info.created_at),
            by: info.created_by,
            reason: info.reason.unwrap_or_default(),
            changed: match &before {
                None => "first revision".into(),
                Some(b) => changed_fields(b, &now),
            },
        });
        before = Some(now);
    }
    Ok(Facts {
        reviews: lib.reviews(id)?,
        events: lib.spectrum_log(id)?,
        withdrawn: lib.withdrawn_reason(id)?,
        record,
        prepared,
        grid,
        neighbours,
        neighbour_spectra,
        strong_score,
        revisions,
    })
}

/// The metadata fields that differ between two revisions, by name.
fn changed_fields(before: &Value, after: &Value) -> String {
    let empty = serde_json::Map::new();
    let (a, b) = (
        before.as_object().unwrap_or(&empty),
        after.as_object().unwrap_or(&empty),
    );
    let mut keys: Vec<&String> = a.keys().chain(b.keys()).collect();
    keys.sort();
    keys.dedup();
    let changed: Vec<String> = keys
        .into_iter()
        .filter(|k| a.get(*k) != b.get(*k))
        .map(|k| match (a.get(k), b.get(k)) {
            (Some(x), Some(y)) => format!("{k}: {} \u{2192} {}", show(x), show(y)),
            (None, Some(y)) => format!("{k}: set to {}", show(y)),
            (Some(x), None) => format!("{k}: {} removed", show(x)),
            (None, None) => k.clone(),
        })
        .collect();
    if changed.is_empty() {
        "nothing in the metadata".into()
    } else {
        changed.join("; ")
    }
}

/// A metadata value as text.
fn show(v: &Value) -> String {
    match v {
        Value::String(s) => s.clone(),
        Value::Array(items) => items.iter().map(show).collect::<Vec<_>>().join(", "),
        Value::Null => String::new(),
        Value::Object(m) => m
            .iter()
            .map(|(k, v)| format!("{k}: {}", show(v)))
            .collect::<Vec<_>>()
            .join("; "),
        other => other.to_string(),
    }
}

/// A spectrum's metadata as (field, value) rows, empty fields left out.
pub fn metadata_rows(r: &SpectrumRecord) -> Vec<(String, String)> {
    let Ok(Value::Object(m)) = serde_json::to_value(&r.metadata) else {
        return Vec::new();
    };
    let mut rows = Vec::new();
    for (k, v) in m {
        if k == "extra" {
            if let Value::Object(extra) = v {
                rows.extend(extra.iter().map(|(k, v)| (k.clone(), show(v))));
            }
            continue;
        }
        let text = show(&v);
        if !text.is_empty() {
            rows.push((k.replace('_', " "), text));
        }
    }
    rows
}

/// The neighbours as rows, and the near-duplicate warnings: a spectrum of another compound
/// that scores at or above the technique's strong-candidate score against this one, so that
/// a search could not tell the two compounds apart.
pub fn neighbour_rows(f: &Facts) -> (Vec<NeighbourRow>, Vec<String>) {
    let rows = f
        .neighbours
        .iter()
        .map(|h| NeighbourRow {
            score: format!("{:.3}", h.score),
            name: h.name.clone(),
            formula: h.formula.clone().unwrap_or_default(),
            id: h.spectrum_id,
            status: h.status.name().to_string(),
        })
        .collect();
    let warnings = f
        .neighbours
        .iter()
        .filter(|h| h.compound_id != f.record.compound_id && h.score >= f.strong_score)
        .map(|h| {
            format!(
                "Near-duplicate of another compound: spectrum {} ({}) scores {:.3} against this one, at or above the strong-candidate score {:.2}; a search could not tell the two compounds apart by this technique alone.",
                h.spectrum_id, h.name, h.score, f.strong_score
            )
        })
        .collect();
    (rows, warnings)
}

/// The events as timeline rows, newest first.
pub fn event_rows(events: &[Event]) -> Vec<EventRow> {
    events
        .iter()
        .rev()
        .map(|e| EventRow {
            seq: e.seq,
            action: e.action.clone(),
            actor: e.actor.clone(),
            identity: e.identity.clone(),
            when: when(&e.at),
            summary: summary(&e.payload),
        })
        .collect()
}

/// The few payload fields people read in a timeline.
pub fn summary(p: &Value) -> String {
    [
        "decision", "revision", "from", "into", "reason", "meaning", "name", "role", "status",
    ]
    .iter()
    .filter_map(|k| p.get(*k).map(|v| format!("{k} {}", show(v))))
    .filter(|s| s.len() < 200)
    .collect::<Vec<_>>()
    .join(", ")
}

/// The peaks as (position, height, width) text.
pub fn peak_rows(p: &Prepared) -> Vec<(String, String, String)> {
    p.peaks
        .iter()
        .map(|k| {
            (
                format!("{:.2}", k.x),
                format!("{:.3}", k.height),
                format!("{:.2}", k.width),
            )
        })
        .collect()
}

#[derive(Template)]
#[template(path = "spectrum.html")]
struct SpectrumPage {
    layout: Layout,
    id: i64,
    name: String,
    notice: String,
    status: String,
    withdrawn: String,
    technique: String,
    revision: i64,
    metadata: Vec<(String, String)>,
    file_name: String,
    points: usize,
    x_unit: String,
    y_unit: String,
    file_sha256: String,
    submitted_by: String,
    imported_by: String,
    created_at: String,
    pending: bool,
    can_sign: bool,
    plots: Vec<PlotView>,
    duplicates: Vec<String>,
    neighbours: Vec<NeighbourRow>,
    revisions: Vec<RevisionRow>,
    reviews: Vec<Review>,
    events: Vec<EventRow>,
    peaks: Vec<(String, String, String)>,
    x_unit_symbol: String,
}

#[derive(Deserialize)]
struct Shown {
    /// Set after a sign-off: says what was signed.
    signed: Option<String>,
    /// Set after a submission from the submit page: "added" or "present".
    submitted: Option<String>,
}

async fn page(
    State(state): State<AppState>,
    b: Browser<ToView>,
    id: Result<Path<i64>, PathRejection>,
    shown: Result<Query<Shown>, QueryRejection>,
) -> Response {
    let id = match id {
        Ok(Path(id)) => id,
        Err(e) => return b.fail("No such spectrum", e.into()),
    };
    let f = match state.with_library(move |lib| facts(lib, id, 0)).await {
        Ok(f) => f,
        Err(e) => return b.fail("No such spectrum", e),
    };
    let r = &f.record;
    let label = format!("spectrum {id}: {}", r.metadata.name);
    let plots = match plot::spectra(
        format!("spectrum-{id}"),
        format!("Spectrum {id} as prepared, scaled to its maximum"),
        &f.grid,
        &[(&label, &f.prepared)],
    ) {
        Ok(p) => vec![p],
        Err(e) => return b.fail("Plot failed", e),
    };
    let (neighbours, duplicates) = neighbour_rows(&f);
    let shown = shown.ok().map(|Query(s)| s);
    let (signed, submitted) = shown.map(|s| (s.signed, s.submitted)).unwrap_or_default();
    let notice = match (signed.as_deref(), submitted.as_deref()) {
        (Some(d @ ("approved" | "rejected")), _) => format!(
            "Your signature is recorded: the current revision is {d}, signed by {} now.",
            b.caller.account.name
        ),
        (_, Some("added")) => format!(
            "Saved: spectrum {id} is pending, submitted by {}; another account with the sign-off role must review it before searches use it as verified.",
            b.caller.account.name
        ),
        (_, Some("present")) => format!(
            "Not saved again: the same raw points are already spectrum {id} ({}).",
            r.status.name()
        ),
        _ => String::new(),
    };
    let page = SpectrumPage {
        layout: b.layout(format!("Spectrum {id}"), ""),
        id,
        name: r.metadata.name.clone(),
        notice,
        status: r.status.name().to_string(),
        withdrawn: f.withdrawn.clone().unwrap_or_default(),
        technique: r.technique.title().to_string(),
        revision: r.revision,
        metadata: metadata_rows(r),
        file_name: r.file_name.clone(),
        points: r.points,
        x_unit: r.x_unit.clone(),
        y_unit: r.y_unit.clone(),
        file_sha256: r.file_sha256.clone(),
        submitted_by: r.submitted_by.clone(),
        imported_by: r.imported_by.clone().unwrap_or_default(),
        created_at: when(&r.created_at),
        pending: r.status == Status::Pending,
        can_sign: b.caller.account.can(Capability::SignOff),
        plots,
        duplicates,
        neighbours,
        revisions: f.revisions,
        reviews: f
            .reviews
            .into_iter()
            .map(|mut r| {
                r.at = when(&r.at);
                r
            })
            .collect(),
        events: event_rows(&f.events),
        peaks: peak_rows(&f.prepared),
        x_unit_symbol: r.technique.x_unit_symbol().to_string(),
    };
    render(&page)
}
