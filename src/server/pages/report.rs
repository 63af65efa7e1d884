//! The printable report of a held search: the verdict first, the case facts (sample or case
//! id, analyst), each hit's provenance (who approved its reference, which revision, when, and
//! whether the sign-off was signed in, asserted or came with a bundle), the report `whorl
//! search --html` writes (`whorl::report::query_section`: facts, hit list and the static
//! overlays), a signature block for the analyst and the reviewer, and the caution. Its print
//! style sheet (`assets/whorl.css`, `@media print`) drops the navigation and the buttons and
//! keeps figures and the signature block whole, so the browser's print to PDF gives a clean
//! document.

use std::sync::Arc;

use askama::Template;
use axum::Extension;
use axum::extract::rejection::{PathRejection, QueryRejection};
use axum::extract::{Path, Query, State};
use axum::response::Response;
use axum::routing::get;
use serde::Deserialize;
use whorl::library::{Capability, Library};

use super::super::auth::ToView;
use super::super::error::ApiError;
use super::super::routes::{Access, Routes};
use super::super::state::AppState;
use super::search::{Searched, verdict};
use super::{Browser, Held, Layout, gone, render, when};

/// The report route.
pub fn router(held: &Held) -> Routes {
    Routes::new().add(
        "GET",
        "/search/{key}/report",
        Access::Needs(Capability::View),
        get(page).layer(Extension(held.clone())),
    )
}

/// The longest sample id or analyst name the page takes (the search form's limit).
const FIELD_MAX: usize = 120;

#[derive(Deserialize, Default)]
struct Fields {
    sample: Option<String>,
    analyst: Option<String>,
}

/// Where one hit's reference comes from.
pub struct Provenance {
    pub rank: usize,
    pub name: String,
    pub id: i64,
    pub status: String,
    /// The reference's current revision.
    pub revision: i64,
    /// Who approved the current revision ("" when nobody has).
    pub approved_by: String,
    pub approved_at: String,
    /// `signed-in`, `asserted`, or `imported` (a sign-off that came with a bundle).
    pub kind: String,
    /// What the row says beside the kind.
    pub detail: String,
}

#[derive(Template)]
#[template(path = "report.html")]
struct ReportPage {
    layout: Layout,
    id: String,
    file: String,
    verdict_word: String,
    verdict_head: String,
    verdict_text: String,
    sample: String,
    analyst: String,
    technique: String,
    searched_at: String,
    searched_by: String,
    state_hash: String,
    file_sha256: String,
    provenance: Vec<Provenance>,
    /// The report layer's section (escaped by it).
    section: String,
    printed_at: String,
}

/// The provenance of each hit's reference (`whorl::search::provenance`), its times as the
/// pages write them.
fn provenance(lib: &Library, s: &Searched) -> Result<Vec<Provenance>, ApiError> {
    Ok(whorl::search::provenance(lib, &s.report.hits)?
        .into_iter()
        .map(|p| Provenance {
            rank: p.rank,
            name: p.name,
            id: p.spectrum_id,
            status: p.status,
            revision: p.revision,
            approved_by: p.approved_by.unwrap_or_default(),
            approved_at: p.approved_at.as_deref().map(when).unwrap_or_default(),
            kind: p.kind,
            detail: p.detail,
        })
        .collect())
}

/// A field from the query, trimmed and cut to `FIELD_MAX` characters, else `default`.
fn field(given: Option<String>, default: &str) -> String {
    match given.map(|v| v.trim().to_string()) {
        Some(v) if !v.is_empty() => v.chars().take(FIELD_MAX).collect(),
        _ => default.to_string(),
    }
}

async fn page(
    State(state): State<AppState>,
    Extension(held): Extension<Held>,
    b: Browser<ToView>,
    key: Result<Path<String>, PathRejection>,
    fields: Result<Query<Fields>, QueryRejection>,
) -> Response {
    let Ok(Path(key)) = key else {
        return gone(&b, "search", "the search page");
    };
    let Some(s) = held.get::<Searched>(b.caller.account.id, &key) else {
        return gone(&b, "search", "the search page");
    };
    let Fields { sample, analyst } = fields.map(|Query(f)| f).unwrap_or_default();
    let held_search = Arc::clone(&s);
    let rows = state
        .with_library(move |lib| provenance(lib, &held_search))
        .await;
    let provenance = match rows {
        Ok(p) => p,
        Err(e) => return b.fail("Report failed", e),
    };
    // The report names the unknown by its file name, not by the server's temporary copy.
    let mut report = s.report.clone();
    report.unknown.file = s.file_name.clone();
    let r = &report;
    let section = whorl::report::query_section(
        &whorl::report::Query {
            report: r,
            unknown: &s.unknown,
            references: &s.references,
        },
        Some("The search in full"),
    );
    let section = match section {
        Ok(html) => html,
        Err(e) => return b.fail("Report failed", e.into()),
    };
    let (verdict_word, verdict_head, verdict_text) = verdict(r);
    let account = b.caller.account.name.clone();
    render(&ReportPage {
        layout: b.layout(format!("Report: search of {}", s.file_name), "/search"),
        id: key,
        file: s.file_name.clone(),
        verdict_word,
        verdict_head,
        verdict_text,
        sample: field(sample, &s.sample),
        analyst: field(analyst, &account),
        technique: r.unknown.technique.title().to_string(),
        searched_at: when(&r.searched_at),
        searched_by: account,
        state_hash: r.library.state_hash.clone(),
        file_sha256: r.unknown.sha256.clone(),
        provenance,
        section,
        printed_at: when(&chrono::Utc::now().to_rfc3339()),
    })
}
