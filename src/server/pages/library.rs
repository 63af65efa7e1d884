//! The library page: every spectrum, or those the find box's text query matches (the text
//! index, as `whorl find`), filtered by technique and status, in pages.

use askama::Template;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, State};
use axum::response::Response;
use axum::routing::get;
use serde::Deserialize;
use whorl::library::{Capability, Status};
use whorl::technique::Technique;

use super::super::auth::ToView;
use super::super::error::ApiError;
use super::super::routes::{Access, Routes};
use super::super::state::AppState;
use super::{Browser, Choice, Layout, render, techniques};

/// Rows per page.
const PAGE: usize = 50;
/// The most matches the find box ranks.
const MOST_FOUND: usize = 5000;

/// The library route.
pub fn router() -> Routes {
    Routes::new().add(
        "GET",
        "/library",
        Access::Needs(Capability::View),
        get(page),
    )
}

#[derive(Deserialize, Default)]
struct Filter {
    q: Option<String>,
    technique: Option<String>,
    status: Option<String>,
    page: Option<usize>,
}

struct Row {
    id: i64,
    name: String,
    formula: String,
    cas: String,
    technique: String,
    status: String,
    revision: i64,
}

#[derive(Template)]
#[template(path = "library.html")]
struct LibraryPage {
    layout: Layout,
    q: String,
    techniques: Vec<Choice>,
    statuses: Vec<Choice>,
    summary: String,
    rows: Vec<Row>,
    page: usize,
    pages: usize,
    previous: String,
    next: String,
}

async fn page(
    State(state): State<AppState>,
    b: Browser<ToView>,
    filter: Result<Query<Filter>, QueryRejection>,
) -> Response {
    let f = filter.map(|Query(f)| f).unwrap_or_default();
    let q = f.q.clone().unwrap_or_default().trim().to_string();
    let technique = match f.technique.as_deref().filter(|t| !t.is_empty()) {
        None => None,
        Some(t) => match t.parse::<Technique>() {
            Ok(t) => Some(t),
            Err(e) => return b.fail("Library", e.into()),
        },
    };
    let status = match f.status.as_deref().filter(|s| !s.is_empty()) {
        None => None,
        Some(s) => match s.parse::<Status>() {
            Ok(s) => Some(s),
            Err(e) => return b.fail("Library", e.into()),
        },
    };
    let query = q.clone();
    let rows = state
        .with_library(move |lib| {
            let mut rows: Vec<Row> = if query.is_empty() {
                lib.list(technique)?
                    .into_iter()
                    .map(|s| Row {
                        id: s.id,
                        name: s.name,
                        formula: s.formula.unwrap_or_default(),
                        cas: s.cas.unwrap_or_default(),
                        technique: s.technique.name().to_string(),
                        status: s.status.name().to_string(),
                        revision: s.revision,
                    })
                    .collect()
            } else {
                let found = lib.text().find(&query, MOST_FOUND)?;
                let ids: Vec<i64> = found.iter().map(|f| f.1).collect();
                let mut records: std::collections::HashMap<i64, whorl::library::HitRecord> = lib
                    .hit_records(&ids)?
                    .into_iter()
                    .map(|r| (r.id, r))
                    .collect();
                ids.iter()
                    .filter_map(|id| records.remove(id))
                    .filter(|r| technique.is_none_or(|t| r.technique == t))
                    .map(|r| Row {
                        id: r.id,
                        name: r.metadata.name,
                        formula: r.metadata.formula.unwrap_or_default(),
                        cas: r.metadata.cas.unwrap_or_default(),
                        technique: r.technique.name().to_string(),
                        status: r.status.name().to_string(),
                        revision: 0,
                    })
                    .collect()
            };
            if let Some(s) = status {
                rows.retain(|r| r.status == s.name());
            }
            Ok::<_, ApiError>(rows)
        })
        .await;
    let mut rows = match rows {
        Ok(r) => r,
        Err(e) => return b.fail("Library", e),
    };
    let total = rows.len();
    let pages = total.div_ceil(PAGE).max(1);
    let page = f.page.unwrap_or(1).clamp(1, pages);
    let rows: Vec<Row> = rows.drain(..).skip((page - 1) * PAGE).take(PAGE).collect();
    let link = |p: usize| {
        let mut s = format!("/library?page={p}");
        for (k, v) in [
            ("q", q.as_str()),
            ("technique", f.technique.as_deref().unwrap_or("")),
            ("status", f.status.as_deref().unwrap_or("")),
        ] {
            if !v.is_empty() {
                s.push_str(&format!("&{k}={}", encode(v)));
            }
        }
        s
    };
    let summary = match (q.is_empty(), total) {
        (_, 0) => "No spectrum matches.".to_string(),
        (true, n) => format!("{n} spectra; by id."),
        (false, n) => format!("{n} spectra match, most relevant first."),
    };
    render(&LibraryPage {
        layout: b.layout("Library", "/library"),
        q: q.clone(),
        techniques: techniques(f.technique.as_deref().unwrap_or("")),
        statuses: ["verified", "pending", "withdrawn"]
            .into_iter()
            .map(|s| Choice {
                value: s,
                label: s,
                selected: f.status.as_deref() == Some(s),
            })
            .collect(),
        summary,
        rows,
        page,
        pages,
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
    })
}

/// Percent-encodes a query-string value (RFC 3986 unreserved characters kept).
pub fn encode(v: &str) -> String {
    v.bytes()
        .map(|b| match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'-' | b'.' | b'_' | b'~' => {
                (b as char).to_string()
            }
            _ => format!("%{b:02X}"),
        })
        .collect()
}
