//! The library page: every spectrum, or those the find box's text query matches (the text
//! index, as `whorl find`), filtered by technique, status, tag and instrument and by numeric
//! ranges of the metadata (the compound's average molar mass from its formula, the date
//! acquired), sorted by a column (compound name, technique, date acquired, status) through the
//! query string, so sorting works by links alone, without a script; in pages.

use askama::Template;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, State};
use axum::response::Response;
use axum::routing::get;
use serde::Deserialize;
use whorl::library::{Browse, BrowseSort, Capability, Status};
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
    tag: Option<String>,
    instrument: Option<String>,
    sort: Option<String>,
    order: Option<String>,
    page: Option<usize>,
}

/// The columns the list sorts by (`sort=`), with what the summary says.
const SORTS: [(&str, &str); 4] = [
    ("name", "compound name"),
    ("technique", "technique"),
    ("date", "date acquired"),
    ("status", "status"),
];

/// A column heading: its label, and for a sortable column the link that sorts by it.
struct Header {
    label: &'static str,
    num: bool,
    /// The link sorting by this column ("" when it does not sort).
    href: String,
    /// `aria-sort` of the column sorted by ("" for the others; WAI-ARIA 1.2 puts it on one).
    aria_sort: &'static str,
    /// The arrow shown beside the sorted column's label.
    arrow: &'static str,
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
    /// The date acquired, as recorded ("" when none is).
    acquired: String,
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
    tag: String,
    instrument: String,
    sort: String,
    order: String,
    headers: Vec<Header>,
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
    let sort = f.sort.clone().unwrap_or_default().trim().to_string();
    let sort_label = match SORTS.iter().find(|(k, _)| *k == sort) {
        Some((_, label)) => Some(*label),
        None if sort.is_empty() => None,
        None => {
            return b.fail(
                "Library",
                ApiError::input(
                    format!("'{sort}' is not a column the list sorts by"),
                    "sort by name, technique, date or status (the column headings' links)",
                ),
            );
        }
    };
    let descending = match f.order.as_deref().map(str::trim).unwrap_or("") {
        "" | "asc" => false,
        "desc" => true,
        other => {
            return b.fail(
                "Library",
                ApiError::input(
                    format!("'{other}' is not an order"),
                    "give order=asc or order=desc",
                ),
            );
        }
    };
    let tag = f.tag.clone().unwrap_or_default().trim().to_string();
    let instrument = f.instrument.clone().unwrap_or_default().trim().to_string();
    let mut browse = Browse {
        found: None,
        technique,
        status,
        tag: Some(tag.clone()).filter(|t| !t.is_empty()),
        instrument: Some(instrument.clone()).filter(|i| !i.is_empty()),
        mass: ranges.mass,
        acquired: ranges.acquired.clone(),
        sort: match sort.as_str() {
            "name" => BrowseSort::Name,
            "technique" => BrowseSort::Technique,
            "status" => BrowseSort::Status,
            "date" => BrowseSort::Date,
            _ => BrowseSort::Natural,
        },
        descending,
        page: f.page.unwrap_or(1),
        per_page: PAGE,
    };
    let query = q.clone();
    // Filtered, sorted and paged in SQL: only the shown page's metadata is read.
    let browsed = state
        .with_library(move |lib| {
            if !query.is_empty() {
                let found = lib.text().find(&query, MOST_FOUND)?;
                browse.found = Some(found.iter().map(|f| f.1).collect());
            }
            Ok::<_, ApiError>(lib.browse(&browse)?)
        })
        .await;
    let browsed = match browsed {
        Ok(r) => r,
        Err(e) => return b.fail("Library", e),
    };
    let (total, pages, page) = (browsed.total, browsed.pages, browsed.page);
    let rows: Vec<Row> = browsed
        .rows
        .into_iter()
        .map(|s| Row {
            mass: mass_text(s.metadata.formula.as_deref()),
            id: s.id,
            name: s.metadata.name,
            formula: s.metadata.formula.unwrap_or_default(),
            cas: s.metadata.cas.unwrap_or_default(),
            technique: s.technique.name().to_string(),
            status: s.status.name().to_string(),
            revision: s.revision,
            acquired: s.metadata.acquired.unwrap_or_default(),
        })
        .collect();
    let link = |p: usize, sort: &str, order: &str| {
        let mut s = format!("/library?page={p}");
        for (k, v) in [
            ("sort", sort),
            ("order", order),
            ("q", q.as_str()),
            ("technique", f.technique.as_deref().unwrap_or("")),
            ("status", f.status.as_deref().unwrap_or("")),
            ("mass_min", f.mass_min.as_deref().unwrap_or("")),
            ("mass_max", f.mass_max.as_deref().unwrap_or("")),
            ("acquired_from", f.acquired_from.as_deref().unwrap_or("")),
            ("acquired_to", f.acquired_to.as_deref().unwrap_or("")),
            ("tag", tag.as_str()),
            ("instrument", instrument.as_str()),
        ] {
            if !v.is_empty() {
                s.push_str(&format!("&{k}={}", encode(v)));
            }
        }
        s
    };
    let order = if descending { "desc" } else { "asc" };
    let summary = match (q.is_empty(), total, sort_label) {
        (_, 0, _) => "No spectrum matches.".to_string(),
        (_, n, Some(label)) => format!(
            "{n} spectra; by {label}, {}.",
            if descending {
                "descending"
            } else {
                "ascending"
            }
        ),
        (true, n, None) => format!("{n} spectra; by id."),
        (false, n, None) => format!("{n} spectra match, most relevant first."),
    };
    let headers = [
        ("spectrum", "", true),
        ("compound", "name", false),
        ("formula", "", false),
        ("CAS RN", "", false),
        ("molar mass", "", true),
        ("technique", "technique", false),
        ("status", "status", false),
        ("revision", "", true),
        ("acquired", "date", false),
    ]
    .into_iter()
    .map(|(label, key, num)| {
        let current = !key.is_empty() && key == sort;
        Header {
            label,
            num,
            // The sorted column's link turns the order round; another column's sorts up.
            href: if key.is_empty() {
                String::new()
            } else {
                link(
                    1,
                    key,
                    if current && !descending {
                        "desc"
                    } else {
                        "asc"
                    },
                )
            },
            aria_sort: match (current, descending) {
                (false, _) => "",
                (true, false) => "ascending",
                (true, true) => "descending",
            },
            arrow: match (current, descending) {
                (false, _) => "",
                (true, false) => "\u{2191}",
                (true, true) => "\u{2193}",
            },
        }
    })
    .collect();
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
        tag: tag.clone(),
        instrument: instrument.clone(),
        sort: sort.clone(),
        order: if sort.is_empty() {
            String::new()
        } else {
            order.to_string()
        },
        headers,
        summary,
        rows,
        page,
        pages,
        previous: if page > 1 {
            link(page - 1, &sort, order)
        } else {
            String::new()
        },
        next: if page < pages {
            link(page + 1, &sort, order)
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
