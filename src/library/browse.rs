//! One page of the library's list, filtered, sorted and paged in SQL: the library page of the
//! server reads the metadata of the rows it shows only, whatever the library's size.

use rusqlite::types::Value;

use super::Library;
use crate::error::Result;
use crate::spectrum::{Metadata, Status};
use crate::technique::Technique;

/// The column a [`Browse`] sorts by; ties are broken by spectrum id, ascending.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum BrowseSort {
    /// By spectrum id, or by the order of [`Browse::found`] when it is given (relevance).
    #[default]
    Natural,
    /// By compound name, letters compared without case (SQLite's `lower()`: ASCII letters).
    Name,
    /// By technique name.
    Technique,
    /// By review status name.
    Status,
    /// By date acquired as recorded; rows without one come last in either order.
    Date,
}

/// What one page of the list asks for. Every filter left `None` lets every row through.
#[derive(Debug, Clone, Default)]
pub struct Browse {
    /// Only these spectra, in this order (the text index's hits, most relevant first).
    pub found: Option<Vec<i64>>,
    /// Only this technique.
    pub technique: Option<Technique>,
    /// Only this status.
    pub status: Option<Status>,
    /// Only spectra with this tag (case ignored, ASCII letters).
    pub tag: Option<String>,
    /// Only spectra whose instrument contains this (case ignored, ASCII letters).
    pub instrument: Option<String>,
    /// Average molar mass (g/mol, from the formula) from and to, inclusive; a spectrum whose
    /// formula is missing or cannot be weighed is left out when either bound is given.
    pub mass: (Option<f64>, Option<f64>),
    /// Date acquired (YYYY-MM-DD) from and to, inclusive, compared with the first ten
    /// characters of the recorded date; a spectrum without a valid date is left out when
    /// either bound is given.
    pub acquired: (Option<String>, Option<String>),
    /// The sort column.
    pub sort: BrowseSort,
    /// Descending rather than ascending.
    pub descending: bool,
    /// The page wanted, from 1 (clamped to the pages there are).
    pub page: usize,
    /// Rows per page (at least 1).
    pub per_page: usize,
}

/// One row of a page.
#[derive(Debug, Clone)]
pub struct Listed {
    /// Spectrum id.
    pub id: i64,
    /// Technique.
    pub technique: Technique,
    /// Review status.
    pub status: Status,
    /// Current revision.
    pub revision: i64,
    /// Metadata of the current revision.
    pub metadata: Metadata,
}

/// A page of the list with the count of every row the filters let through.
#[derive(Debug, Clone)]
pub struct Browsed {
    /// Rows matching, on every page.
    pub total: usize,
    /// Pages (at least 1).
    pub pages: usize,
    /// The page given (the one asked for, clamped to 1..=pages).
    pub page: usize,
    /// The page's rows, in order.
    pub rows: Vec<Listed>,
}

/// The average molar mass (g/mol) of a formula, when it can be weighed.
fn molar_mass(formula: &str) -> Option<f64> {
    let f = crate::chem::parse_formula(formula).ok()?;
    crate::chem::average_mass(&f).ok()
}

impl Library {
    /// One page of the list: the filters and the sort in SQL, the count of every matching row,
    /// and the metadata of the page's rows only (the molar mass range reads the formulas of
    /// the rows the other filters leave, since a mass comes from parsing a formula).
    pub fn browse(&self, b: &Browse) -> Result<Browsed> {
        let acquired = "json_extract(r.metadata, '$.acquired')";
        let day = format!("substr(trim({acquired}), 1, 10)");
        let mut from = String::from(
            "FROM spectrum s JOIN revision r ON r.spectrum_id = s.id AND r.number = s.current_revision",
        );
        let mut clauses: Vec<String> = Vec::new();
        let mut args: Vec<Value> = Vec::new();
        let arg = |args: &mut Vec<Value>, v: Value| {
            args.push(v);
            format!("?{}", args.len())
        };
        if let Some(found) = &b.found {
            let p = arg(&mut args, Value::Text(serde_json::to_string(found)?));
            from.push_str(&format!(" JOIN json_each({p}) j ON j.value = s.id"));
        }
        if let Some(t) = b.technique {
            let p = arg(&mut args, Value::Text(t.name().to_string()));
            clauses.push(format!("s.technique = {p}"));
        }
        if let Some(st) = b.status {
            let p = arg(&mut args, Value::Text(st.name().to_string()));
            clauses.push(format!("s.status = {p}"));
        }
        if let Some(tag) = b.tag.as_deref().filter(|t| !t.is_empty()) {
            let p = arg(&mut args, Value::Text(tag.to_string()));
            clauses.push(format!(
                "EXISTS (SELECT 1 FROM json_each(r.metadata, '$.tags') t WHERE lower(t.value) = lower({p}))"
            ));
        }
        if let Some(ins) = b.instrument.as_deref().filter(|t| !t.is_empty()) {
            let p = arg(&mut args, Value::Text(ins.to_string()));
            clauses.push(format!(
                "instr(lower(coalesce(json_extract(r.metadata, '$.instrument'), '')), lower({p})) > 0"
            ));
        }
        if b.acquired.0.is_some() || b.acquired.1.is_some() {
            // A valid date is its own normal form (SQLite's date() turns 2025-02-30 into
            // 2025-03-02, and anything that is no date into NULL).
            clauses.push(format!("date({day}) IS {day}"));
            if let Some(lo) = &b.acquired.0 {
                let p = arg(&mut args, Value::Text(lo.clone()));
                clauses.push(format!("{day} >= {p}"));
            }
            if let Some(hi) = &b.acquired.1 {
                let p = arg(&mut args, Value::Text(hi.clone()));
                clauses.push(format!("{day} <= {p}"));
            }
        }
        let filtered = |clauses: &[String]| {
            if clauses.is_empty() {
                from.clone()
            } else {
                format!("{from} WHERE {}", clauses.join(" AND "))
            }
        };
        if b.mass.0.is_some() || b.mass.1.is_some() {
            // The formulas of the rows the other filters leave, weighed here.
            let sql = format!(
                "SELECT s.id, json_extract(r.metadata, '$.formula') {}",
                filtered(&clauses)
            );
            let mut stmt = self.conn.prepare(&sql)?;
            let rows = stmt.query_map(rusqlite::params_from_iter(args.iter()), |r| {
                Ok((r.get::<_, i64>(0)?, r.get::<_, Option<String>>(1)?))
            })?;
            let mut kept = Vec::new();
            for row in rows {
                let (id, formula) = row?;
                let fits = formula.as_deref().and_then(molar_mass).is_some_and(|m| {
                    b.mass.0.is_none_or(|lo| m >= lo) && b.mass.1.is_none_or(|hi| m <= hi)
                });
                if fits {
                    kept.push(id);
                }
            }
            let p = arg(&mut args, Value::Text(serde_json::to_string(&kept)?));
            clauses.push(format!("s.id IN (SELECT value FROM json_each({p}))"));
        }
        let body = filtered(&clauses);
        let total: i64 = self.conn.query_row(
            &format!("SELECT count(*) {body}"),
            rusqlite::params_from_iter(args.iter()),
            |r| r.get(0),
        )?;
        let total = total as usize;
        let per_page = b.per_page.max(1);
        let pages = total.div_ceil(per_page).max(1);
        let page = b.page.clamp(1, pages);
        let dir = if b.descending { "DESC" } else { "ASC" };
        let order = match b.sort {
            BrowseSort::Natural if b.found.is_some() => "j.key ASC, s.id ASC".to_string(),
            BrowseSort::Natural => "s.id ASC".to_string(),
            BrowseSort::Name => {
                format!("lower(json_extract(r.metadata, '$.name')) {dir}, s.id ASC")
            }
            BrowseSort::Technique => format!("s.technique {dir}, s.id ASC"),
            BrowseSort::Status => format!("s.status {dir}, s.id ASC"),
            BrowseSort::Date => format!(
                "coalesce({acquired}, '') = '' ASC, coalesce({acquired}, '') {dir}, s.id ASC"
            ),
        };
        let limit = arg(&mut args, Value::Integer(per_page as i64));
        let offset = arg(&mut args, Value::Integer(((page - 1) * per_page) as i64));
        let sql = format!(
            "SELECT s.id, s.technique, s.status, s.current_revision, r.metadata {body}
             ORDER BY {order} LIMIT {limit} OFFSET {offset}"
        );
        let mut stmt = self.conn.prepare(&sql)?;
        let rows = stmt.query_map(rusqlite::params_from_iter(args.iter()), |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, String>(1)?,
                r.get::<_, String>(2)?,
                r.get::<_, i64>(3)?,
                r.get::<_, String>(4)?,
            ))
        })?;
        let mut out = Vec::with_capacity(per_page);
        for row in rows {
            let (id, technique, status, revision, metadata) = row?;
            out.push(Listed {
                id,
                technique: technique.parse()?,
                status: status.parse()?,
                revision,
                metadata: serde_json::from_str(&metadata)?,
            });
        }
        Ok(Browsed {
            total,
            pages,
            page,
            rows: out,
        })
    }
}
