//! The library page: every spectrum, or those the find box's text query matches (the text
//! index, as `whorl find`), filtered by technique and status and by numeric ranges of the
//! metadata (the compound's average molar mass from its formula, the date acquired), in pages.

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
    mass_min: Option<String>,
    mass_max: Option<String>,
    acquired_from: Option<String>,
    acquired_to: Option<String>,
    page: Option<usize>,
}

/// The numeric ranges asked for; a bound left empty is open.
#[derive(Default, Clone)]
struct Ranges {
    mass: (Option<f64>, Option<f64>),
    acquired: (Option<String>, Option<String>),
}

impl Ranges {
    fn read(f: &Filter) -> Result<Ranges, ApiError> {
        let number = |field: &str, v: &Option<String>| -> Result<Option<f64>, ApiError> {
            match v.as_deref().map(str::trim).filter(|v| !v.is_empty()) {
                None => Ok(None),
                Some(t) => match t.parse::<f64>() {
                    Ok(x) if x.is_finite() && x >= 0.0 => Ok(Some(x)),
                    _ => Err(ApiError::input(
                        format!("{field}: '{t}' is not a molar mass"),
                        "give a number of g/mol, e.g. 58 or 120.5, or leave the field empty",
                    )),
                },
            }
        };
        let day = |field: &str, v: &Option<String>| -> Result<Option<String>, ApiError> {
            match v.as_deref().map(str::trim).filter(|v| !v.is_empty()) {
                None => Ok(None),
                Some(d) => chrono::NaiveDate::parse_from_str(d, "%Y-%m-%d")
                    .map(|d| Some(d.format("%Y-%m-%d").to_string()))
                    .map_err(|_| {
                        ApiError::input(
                            format!("{field}: '{d}' is not a date"),
                            "give the date as YYYY-MM-DD, e.g. 2025-05-28",
                        )
                    }),
            }
        };
        let r = Ranges {
            mass: (
                number("mass from", &f.mass_min)?,
                number("mass to", &f.mass_max)?,
            ),
            acquired: (
                day("acquired from", &f.acquired_from)?,
                day("acquired to", &f.acquired_to)?,
            ),
        };
        if let (Some(a), Some(b)) = r.mass
            && a > b
        {
            return Err(ApiError::input(
                format!("mass: from {a} is above to {b}"),
                "give the lower bound first, or swap the two",
            ));
        }
        Ok(r)
    }

    fn mass_given(&self) -> bool {
        self.mass.0.is_some() || self.mass.1.is_some()
    }

    fn acquired_given(&self) -> bool {
        self.acquired.0.is_some() || self.acquired.1.is_some()
    }

    /// Whether a molar mass (None: no formula, or one that cannot be weighed) is in range.
    fn mass_fits(&self, mass: Option<f64>) -> bool {
        if !self.mass_given() {
            return true;
        }
        mass.is_some_and(|m| {
            self.mass.0.is_none_or(|lo| m >= lo) && self.mass.1.is_none_or(|hi| m <= hi)
        })
    }

    /// Whether a date acquired (its first ten characters as YYYY-MM-DD) is in range.
    fn acquired_fits(&self, acquired: Option<&str>) -> bool {
        if !self.acquired_given() {
            return true;
        }
        let Some(d) = acquired
            .map(|a| a.trim().chars().take(10).collect::<String>())
            .filter(|d| chrono::NaiveDate::parse_from_str(d, "%Y-%m-%d").is_ok())
        else {
            return false;
        };
        self.acquired.0.as_ref().is_none_or(|lo| &d >= lo)
            && self.acquired.1.as_ref().is_none_or(|hi| &d <= hi)
    }
}

/// The average molar mass (g/mol) of a formula, when it can be weighed.
fn molar_mass(formula: Option<&str>) -> Option<f64> {
    let f = whorl::chem::parse_formula(formula?).ok()?;
    whorl::chem::average_mass(&f).ok()
}

struct Row {
    id: i64,
    name: String,
    formula: String,
    cas: String,
    technique: String,
    status: String,
    revision: i64,
    /// The average molar mass from the formula, g/mol ("" without one).
    mass: String,
}

#[derive(Template)]
#[template(path = "library.html")]
struct LibraryPage {
    layout: Layout,
    q: String,
    techniques: Vec<Choice>,
    statuses: Vec<Choice>,
    mass_min: String,
    mass_max: String,
    acquired_from: String,
    acquired_to: String,
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
    let ranges = match Ranges::read(&f) {
        Ok(r) => r,
        Err(e) => return b.fail("Library", e),
    };
    let wanted = ranges.clone();
    let query = q.clone();
    let rows = state
        .with_library(move |lib| {
            let mut rows: Vec<Row> = if query.is_empty() {
                lib.list(technique)?
                    .into_iter()
                    .map(|s| Row {
                        mass: mass_text(s.formula.as_deref()),
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
                        mass: mass_text(r.metadata.formula.as_deref()),
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
            rows.retain(|r| wanted.mass_fits(r.mass.parse::<f64>().ok()));
            if wanted.acquired_given() {
                let ids: Vec<i64> = rows.iter().map(|r| r.id).collect();
                let acquired: std::collections::HashMap<i64, Option<String>> = lib
                    .hit_records(&ids)?
                    .into_iter()
                    .map(|r| (r.id, r.metadata.acquired))
                    .collect();
                rows.retain(|r| {
                    wanted.acquired_fits(acquired.get(&r.id).and_then(|a| a.as_deref()))
                });
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
            ("mass_min", f.mass_min.as_deref().unwrap_or("")),
            ("mass_max", f.mass_max.as_deref().unwrap_or("")),
            ("acquired_from", f.acquired_from.as_deref().unwrap_or("")),
            ("acquired_to", f.acquired_to.as_deref().unwrap_or("")),
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
        mass_min: f.mass_min.clone().unwrap_or_default(),
        mass_max: f.mass_max.clone().unwrap_or_default(),
        acquired_from: f.acquired_from.clone().unwrap_or_default(),
        acquired_to: f.acquired_to.clone().unwrap_or_default(),
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

/// A molar mass for the list: two decimals, "" without a formula that can be weighed.
fn mass_text(formula: Option<&str>) -> String {
    molar_mass(formula)
        .map(|m| format!("{m:.2}"))
        .unwrap_or_default()
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
