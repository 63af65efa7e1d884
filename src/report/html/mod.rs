//! Self-contained HTML reports: one file, no scripts, no network, plots as inline SVG.
//!
//! Every string that comes from a user, a file or the library (file names, compound names,
//! queries, paths) passes through [`escape`]; the page also declares a content security
//! policy that allows no script and no fetch, so that even a missed escape could not run code
//! or reach the network when the file is opened.
//!
//! [`search_page`] and [`identify_page`] are the two pages; `section` renders one query's
//! section of either, [`page`] wraps sections in the document with its style and the caution.

mod identify;
mod section;

pub use identify::identify_page;
pub use section::query_section;

use std::fmt::Write as _;

use crate::error::Result;
use crate::prepare::Prepared;
use crate::search::{Provenance, Report};

/// One query to render: its report, the unknown as prepared, and the prepared references of
/// the first hits in rank order (`references[i]` belongs to `report.hits[i]`; hits beyond
/// the end get no plot).
#[derive(Debug, Clone, Copy)]
pub struct Query<'a> {
    /// The search report.
    pub report: &'a Report,
    /// The unknown, prepared with the library's recipe.
    pub unknown: &'a Prepared,
    /// References of the top hits, in rank order.
    pub references: &'a [Prepared],
}

/// A whole page for one search.
pub fn search_page(query: &Query<'_>) -> Result<String> {
    search_page_with(query, None)
}

/// A whole page for one search written for a case: the case section (sample, analyst, the
/// provenance of each hit's reference) before the search's own section.
pub fn search_page_for_case(query: &Query<'_>, case: &Case<'_>) -> Result<String> {
    search_page_with(query, Some(case))
}

fn search_page_with(query: &Query<'_>, case: Option<&Case<'_>>) -> Result<String> {
    let r = query.report;
    let title = format!("Search of {}", file_name(&r.unknown.file));
    let lede = format!(
        "{} unknown searched against {} library spectra; {} hits listed, the first {} laid over the unknown.",
        r.unknown.technique.title(),
        r.candidates,
        r.hits.len(),
        query.references.len().min(r.hits.len())
    );
    let mut sections = Vec::with_capacity(2);
    if let Some(case) = case {
        sections.push(case_section(
            case.sample,
            case.analyst,
            &[(None, case.provenance)],
        ));
    }
    sections.push(query_section(query, None)?);
    Ok(page(
        &title,
        &lede,
        &r.tool_version,
        &r.searched_at,
        &sections,
    ))
}

/// The case a report is written for, as the analyst gives it, and where each hit's reference
/// comes from.
#[derive(Debug, Clone, Copy)]
pub struct Case<'a> {
    /// Sample or case id.
    pub sample: Option<&'a str>,
    /// The analyst who ran the search.
    pub analyst: Option<&'a str>,
    /// The provenance of the hits' references, in rank order.
    pub provenance: &'a [Provenance],
}

/// The case an `identify` report is written for: as [`Case`], with the provenance of each
/// technique's hits (`provenance[i]` belongs to the page's `queries[i]`).
#[derive(Debug, Clone, Copy)]
pub struct IdentifyCase<'a> {
    /// Sample or case id.
    pub sample: Option<&'a str>,
    /// The analyst who ran the identification.
    pub analyst: Option<&'a str>,
    /// Per query, the provenance of its hits' references, in rank order.
    pub provenance: &'a [Vec<Provenance>],
}

/// The case section: the case facts, then a table per group of hits (one for a search, one
/// per technique for `identify`) with each hit's reference provenance.
pub(super) fn case_section(
    sample: Option<&str>,
    analyst: Option<&str>,
    groups: &[(Option<&str>, &[Provenance])],
) -> String {
    let given = |v: Option<&str>| match v {
        Some(v) => escape(v),
        None => "<span class=\"muted\">not given</span>".to_string(),
    };
    let mut s = String::from("<section class=\"case\" id=\"case\">\n<h2>Case</h2>\n");
    w(
        &mut s,
        format_args!(
            "<dl class=\"facts\">\n<dt>sample</dt><dd>{}</dd>\n<dt>analyst</dt><dd>{}</dd>\n</dl>\n",
            given(sample),
            given(analyst)
        ),
    );
    s.push_str("<h3>Where the hits' references come from</h3>\n");
    for (heading, provenance) in groups {
        if let Some(h) = heading {
            w(&mut s, format_args!("<h4>{}</h4>\n", escape(h)));
        }
        s.push_str("<div class=\"wide\"><table class=\"hits provenance\">\n<thead><tr><th class=\"num\">rank</th><th>compound</th><th class=\"num\">spectrum</th><th>status</th><th class=\"num\">revision</th><th>approved by</th><th>approved at</th><th>sign-off</th></tr></thead>\n<tbody>\n");
        for p in *provenance {
            let kind = if p.detail.is_empty() {
                escape(&p.kind)
            } else {
                format!("{}: {}", escape(&p.kind), escape(&p.detail))
            };
            w(
                &mut s,
                format_args!(
                    "<tr><td class=\"num\">{}</td><td class=\"name\">{}</td><td class=\"num\">{}</td><td>{}</td><td class=\"num\">{}</td><td>{}</td><td>{}</td><td class=\"name\">{}</td></tr>\n",
                    p.rank,
                    escape(&p.name),
                    p.spectrum_id,
                    escape(&p.status),
                    p.revision,
                    escape(p.approved_by.as_deref().unwrap_or("")),
                    escape(p.approved_at.as_deref().unwrap_or("")),
                    kind
                ),
            );
        }
        s.push_str("</tbody>\n</table></div>\n");
    }
    s.push_str("</section>\n");
    s
}

/// Wraps sections in a complete page with the caution at the top and the bottom.
pub fn page(title: &str, lede: &str, version: &str, at: &str, sections: &[String]) -> String {
    let mut s = String::with_capacity(sections.iter().map(String::len).sum::<usize>() + 8192);
    s.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    // No script may run and nothing may be fetched: the report is a document, not an app.
    s.push_str("<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\">\n");
    s.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    w(
        &mut s,
        format_args!(
            "<meta name=\"generator\" content=\"whorl {}\">\n<title>{} \u{2013} whorl</title>\n",
            escape(version),
            escape(title)
        ),
    );
    w(
        &mut s,
        format_args!("<style>\n{STYLE}</style>\n</head>\n<body>\n<main>\n"),
    );
    w(
        &mut s,
        format_args!(
            "<header>\n<p class=\"kicker\">whorl report</p>\n<h1>{}</h1>\n<p class=\"lede\">{}</p>\n</header>\n",
            escape(title),
            escape(lede)
        ),
    );
    let caution = format!(
        "<aside class=\"caution\" role=\"note\"><strong>Caution.</strong> {}</aside>\n",
        escape(crate::CAUTION)
    );
    s.push_str(&caution);
    for section in sections {
        s.push_str(section);
    }
    s.push_str(&caution);
    w(
        &mut s,
        format_args!(
            "<footer>Written by whorl {} at {}. The file is self-contained: it loads nothing and runs no script.</footer>\n</main>\n</body>\n</html>\n",
            escape(version),
            escape(at)
        ),
    );
    s
}

/// Escapes text for HTML element content and quoted attribute values; also valid in XML
/// (SVG): control characters other than tab and line breaks, which XML 1.0 does not allow
/// even as character references (W3C XML 1.0, section 2.2, `Char`), and invisible format
/// characters are written as visible `\u{..}` escapes.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '\t' | '\n' | '\r' => out.push(c),
            c if c.is_control()
                || matches!(c, '\u{200b}'..='\u{200f}' | '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}' | '\u{feff}') =>
            {
                out.push_str(&c.escape_unicode().to_string())
            }
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

pub(super) fn code(text: &str) -> String {
    format!("<code>{}</code>", escape(text))
}

pub(super) fn file_name(path: &str) -> String {
    std::path::Path::new(path)
        .file_name()
        .map(|f| f.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.to_string())
}

pub(super) fn w(s: &mut String, args: std::fmt::Arguments<'_>) {
    s.write_fmt(args).expect("writing to a String cannot fail");
}

/// The page's look: plain, print-friendly, numbers in tabular figures.
const STYLE: &str = r#":root { --ink: #1a1a1a; --muted: #5c5c5c; --rule: #d0d0d0; --tint: #f4f4f2; }
.muted { color: var(--muted); }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff; font: 16px/1.5 system-ui, "DejaVu Sans", "Liberation Sans", sans-serif; }
main { max-width: 1080px; margin: 0 auto; padding: 24px 28px 48px; }
header { border-bottom: 3px solid var(--ink); margin-bottom: 18px; }
.kicker { margin: 0; font-size: 13px; letter-spacing: 0.12em; text-transform: uppercase; color: var(--muted); }
h1 { margin: 2px 0 4px; font-size: 28px; font-weight: 650; word-break: break-all; }
.lede { margin: 0 0 12px; color: var(--muted); }
h2 { font-size: 22px; margin: 28px 0 10px; padding-bottom: 4px; border-bottom: 1px solid var(--rule); }
h3 { font-size: 18px; margin: 22px 0 8px; }
.caution { margin: 16px 0; padding: 10px 14px; background: #fff6e0; border-left: 6px solid #e69f00; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 3px 18px; margin: 0; }
dl.facts dt { color: var(--muted); }
dl.facts dd { margin: 0; overflow-wrap: anywhere; }
code { font: 14px/1.4 ui-monospace, "DejaVu Sans Mono", monospace; }
ul.warnings { margin: 14px 0; padding: 8px 14px 8px 34px; border: 2px dashed #b35c00; }
table.hits { border-collapse: collapse; width: 100%; font-variant-numeric: tabular-nums; }
table.hits th, table.hits td { padding: 4px 8px; white-space: nowrap; border-bottom: 1px solid var(--rule); text-align: left; }
table.hits thead th { border-bottom: 2px solid var(--ink); font-weight: 600; }
table.hits .num { text-align: right; }
table.hits td.name, table.hits td.wrap { white-space: normal; }
.wide { overflow-x: auto; }
table.hits tr.first td { font-weight: 650; background: var(--tint); }
.note { color: var(--muted); font-size: 14px; }
figure { margin: 18px 0 26px; break-inside: avoid; }
figcaption { font-weight: 600; margin-bottom: 4px; }
figcaption .rank { display: inline-block; min-width: 1.6em; padding: 0 6px; margin-right: 4px; border: 2px solid var(--ink); text-align: center; }
figcaption .facts-inline { font-weight: 400; color: var(--muted); font-size: 14px; }
figure svg { display: block; width: 100%; height: auto; border: 1px solid var(--rule); }
details { margin-top: 14px; }
pre { background: var(--tint); padding: 10px; overflow-x: auto; font-size: 13px; }
footer { margin-top: 28px; font-size: 13px; color: var(--muted); }
a { color: #0a5a8c; }
@media print { main { max-width: none; padding: 0; } .wide { overflow: visible; } table.hits tr { break-inside: avoid; } h2, h3, h4, figcaption { break-after: avoid-page; } figure svg { border: none; } a { color: inherit; text-decoration: none; } }
"#;

#[cfg(test)]
mod tests {
    use crate::report::fixtures::{ir, search_page_for};

    #[test]
    fn metadata_never_becomes_markup() {
        let evil = "<script>alert(1)</script>";
        let (a, b) = (ir(&[(1715.0, 1.0)]), ir(&[(1600.0, 1.0)]));
        let refs = [(evil, &a), ("\" onload=\"alert(2)", &b)];
        let html = search_page_for("/data/<img src=x>.csv", &refs, None);
        assert!(!html.contains("<script"), "a script element got through");
        assert!(!html.contains("<img"), "an img element got through");
        assert!(!html.contains("\" onload=\""), "an attribute got through");
        assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
        assert!(html.contains("&lt;img src=x&gt;.csv"));
        // And a query string with markup in it.
        let html = search_page_for("u.csv", &refs, Some("name:script OR \"<b>\""));
        assert!(html.contains("&lt;b&gt;"), "the query is shown");
        assert!(!html.contains("<b>"));
    }
}
