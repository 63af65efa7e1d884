//! Self-contained HTML reports: one file, no scripts, no network, plots as inline SVG.
//!
//! Every string that comes from a user, a file or the library (file names, compound names,
//! queries, paths) passes through [`escape`]; the page also declares a content security
//! policy that allows no script and no fetch, so that even a missed escape could not run code
//! or reach the network when the file is opened.

use std::fmt::Write as _;

use crate::error::{Error, Result};
use crate::prepare::Prepared;
use crate::score::Measure;
use crate::search::{Hit, Report};

use super::plot;

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
    let r = query.report;
    let title = format!("Search of {}", file_name(&r.unknown.file));
    let lede = format!(
        "{} unknown searched against {} library spectra; {} hits listed, the first {} laid over the unknown.",
        r.unknown.technique.title(),
        r.candidates,
        r.hits.len(),
        query.references.len().min(r.hits.len())
    );
    let section = query_section(query, None)?;
    Ok(page(
        &title,
        &lede,
        &r.tool_version,
        &r.searched_at,
        &[section],
    ))
}

/// The section for one query: what was searched and how, the hit list, and one overlay per
/// top hit. `heading` defaults to the technique's name. Element ids are prefixed with the
/// technique, so sections of several techniques can share a page.
pub fn query_section(query: &Query<'_>, heading: Option<&str>) -> Result<String> {
    let r = query.report;
    let t = r.unknown.technique;
    let id = t.name();
    let p = &r.parameters;
    let mut s = String::new();
    let heading = heading
        .map(str::to_string)
        .unwrap_or_else(|| format!("{} search", t.title()));
    w(
        &mut s,
        format_args!("<section class=\"query\" id=\"{id}\">\n"),
    );
    w(&mut s, format_args!("<h2>{}</h2>\n", escape(&heading)));

    s.push_str("<dl class=\"facts\">\n");
    let mut fact = |k: &str, v: String| {
        w(&mut s, format_args!("<dt>{k}</dt><dd>{v}</dd>\n"));
    };
    fact("unknown file", code(&r.unknown.file));
    fact("file SHA-256", code(&r.unknown.sha256));
    let solvent = r
        .unknown
        .solvent
        .as_deref()
        .map(|s| format!("; solvent {}", escape(s)))
        .unwrap_or_default();
    fact(
        "technique",
        format!(
            "{} (y as {}{solvent}); {} peaks picked",
            escape(t.name()),
            escape(r.unknown.y_unit.name()),
            r.unknown.peaks
        ),
    );
    fact("library", code(&r.library.path));
    fact("library fingerprint", code(&r.library.fingerprint));
    fact(
        "searched",
        format!(
            "{} with whorl {}",
            escape(&r.searched_at),
            escape(&r.tool_version)
        ),
    );
    let sp = &p.score;
    fact(
        "ranking",
        format!(
            "{:.2} \u{D7} {} + {:.2} \u{D7} peak overlap (Jaccard); peaks match within {} {}",
            sp.spectral_weight,
            sp.measure.title(),
            1.0 - sp.spectral_weight,
            sp.peak_tolerance,
            t.x_unit_symbol()
        ),
    );
    let statuses: Vec<&str> = p.statuses.iter().map(|s| s.name()).collect();
    let filter = p
        .filter
        .as_deref()
        .map(|q| format!("; metadata query {}", code(q)))
        .unwrap_or_default();
    fact(
        "compared",
        format!(
            "{} library spectra ({}){filter}",
            r.candidates,
            escape(&statuses.join(", "))
        ),
    );
    let g = &p.recipe.grid;
    let masks: Vec<String> = g
        .masks
        .iter()
        .map(|(a, b)| format!("{a}\u{2013}{b}"))
        .collect();
    fact(
        "grid",
        format!(
            "{}\u{2013}{} {} in steps of {}{}",
            g.start,
            g.stop,
            t.x_unit_symbol(),
            g.step,
            if masks.is_empty() {
                String::new()
            } else {
                format!("; masked {}", masks.join(", "))
            }
        ),
    );
    fact(
        "warns when",
        format!(
            "best score below {}, or hits 1 and 2 of different compounds within {} ({})",
            r.confidence.weak_score,
            r.confidence.close_margin,
            if r.confidence.derived {
                "derived for this scoring"
            } else {
                "set for this library or not derived"
            }
        ),
    );
    s.push_str("</dl>\n");

    if !r.warnings.is_empty() {
        s.push_str("<ul class=\"warnings\">\n");
        for warning in &r.warnings {
            w(&mut s, format_args!("<li>{}</li>\n", escape(warning)));
        }
        s.push_str("</ul>\n");
    }

    s.push_str("<h3>Hits</h3>\n");
    hit_table(&mut s, r, query.references.len());
    if let Some(m) = r.margin {
        w(
            &mut s,
            format_args!(
                "<p class=\"note\">Hit 1 leads hit 2 by {m:.3}. Peaks: reference peaks matched one to one in the unknown.</p>\n"
            ),
        );
    }

    let plotted = query.references.len().min(r.hits.len());
    if plotted > 0 {
        s.push_str("<h3>Overlays</h3>\n");
        s.push_str(
            "<p class=\"note\">Each plot shows the prepared spectra that the scores compare, each scaled to its own maximum.</p>\n",
        );
    }
    for (hit, reference) in r.hits.iter().zip(query.references) {
        let svg = plot::overlay(
            &p.recipe.grid,
            (&file_name(&r.unknown.file), query.unknown),
            (
                &format!("{} (spectrum {})", hit.name, hit.spectrum_id),
                reference,
            ),
            sp.peak_tolerance,
        )?;
        w(
            &mut s,
            format_args!(
                "<figure id=\"{id}-hit-{rank}\" aria-label=\"unknown and hit {rank}, {name}\">\n<figcaption><span class=\"rank\">{rank}</span> {name} <span class=\"facts-inline\">{summary}</span></figcaption>\n{svg}</figure>\n",
                rank = hit.rank,
                name = escape(&hit.name),
                summary = hit_summary(hit, sp.measure),
            ),
        );
    }

    let json = serde_json::to_string_pretty(&r.parameters).map_err(Error::Json)?;
    w(
        &mut s,
        format_args!(
            "<details><summary>All parameters, as recorded</summary>\n<pre>{}</pre>\n</details>\n",
            escape(&json)
        ),
    );
    s.push_str("</section>\n");
    Ok(s)
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

/// Escapes text for HTML element content and quoted attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
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

fn hit_table(s: &mut String, r: &Report, plotted: usize) {
    let sp = &r.parameters.score;
    let other = if sp.measure == Measure::Cosine {
        Measure::Correlation
    } else {
        Measure::Cosine
    }
    .title();
    w(
        s,
        format_args!(
            "<table class=\"hits\">\n<thead><tr><th class=\"num\">rank</th><th class=\"num\">score</th><th class=\"num\">{}</th><th class=\"num\">{other}</th><th class=\"num\">peaks</th><th>compound</th><th>formula</th><th>CAS RN</th><th class=\"num\">spectrum</th><th>status</th><th>plot</th></tr></thead>\n<tbody>\n",
            sp.measure.title()
        ),
    );
    let id = r.unknown.technique.name();
    for h in &r.hits {
        let c = &h.components;
        let second = if sp.measure == Measure::Cosine {
            c.correlation.unwrap_or(c.cosine)
        } else {
            c.cosine
        };
        let o = &c.peak_overlap;
        let link = if h.rank <= plotted {
            format!("<a href=\"#{id}-hit-{}\">overlay</a>", h.rank)
        } else {
            String::new()
        };
        w(
            s,
            format_args!(
                "<tr{}><td class=\"num\">{}</td><td class=\"num\">{:.3}</td><td class=\"num\">{:.3}</td><td class=\"num\">{second:.3}</td><td class=\"num\">{}/{}</td><td class=\"name\">{}</td><td>{}</td><td>{}</td><td class=\"num\">{}</td><td>{}</td><td>{link}</td></tr>\n",
                if h.rank == 1 { " class=\"first\"" } else { "" },
                h.rank,
                h.score,
                c.spectral,
                o.matched,
                o.reference_peaks,
                escape(&h.name),
                escape(h.formula.as_deref().unwrap_or("")),
                escape(h.cas.as_deref().unwrap_or("")),
                h.spectrum_id,
                escape(h.status.name()),
            ),
        );
    }
    if r.hits.is_empty() {
        s.push_str("<tr><td colspan=\"11\">No library spectrum was compared.</td></tr>\n");
    }
    s.push_str("</tbody>\n</table>\n");
}

fn hit_summary(h: &Hit, measure: Measure) -> String {
    let o = &h.components.peak_overlap;
    let mut parts = vec![
        format!("score {:.3}", h.score),
        format!("{} {:.3}", measure.title(), h.components.spectral),
        format!(
            "{} of {} reference peaks matched",
            o.matched, o.reference_peaks
        ),
        format!("spectrum {}", h.spectrum_id),
        escape(h.status.name()),
    ];
    if let Some(f) = &h.formula {
        parts.insert(0, escape(f));
    }
    parts.join(" \u{B7} ")
}

fn code(text: &str) -> String {
    format!("<code>{}</code>", escape(text))
}

fn file_name(path: &str) -> String {
    std::path::Path::new(path)
        .file_name()
        .map(|f| f.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.to_string())
}

fn w(s: &mut String, args: std::fmt::Arguments<'_>) {
    s.write_fmt(args).expect("writing to a String cannot fail");
}

/// The page's look: plain, print-friendly, numbers in tabular figures.
const STYLE: &str = r#":root { --ink: #1a1a1a; --muted: #5c5c5c; --rule: #d0d0d0; --tint: #f4f4f2; }
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
table.hits td.name { white-space: normal; }
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
@media print { main { max-width: none; padding: 0; } figure svg { border: none; } a { color: inherit; text-decoration: none; } }
"#;

/// A whole page for `identify`: the fused list per compound, then one section per technique
/// searched (the same section a search report has), on one page.
pub fn identify_page(r: &crate::search::IdentifyReport, queries: &[Query<'_>]) -> Result<String> {
    let f = &r.fusion;
    let techniques: Vec<&str> = f.techniques.iter().map(|t| t.name()).collect();
    let title = format!("Identification from {}", techniques.join(", "));
    let lede = format!(
        "{} unknowns searched against the library and fused per compound; {} compounds listed.",
        techniques.len(),
        f.compounds.len()
    );
    let mut s = String::new();
    s.push_str(
        "<section class=\"query\" id=\"fused\">\n<h2>Fused list</h2>\n<dl class=\"facts\">\n",
    );
    w(
        &mut s,
        format_args!(
            "<dt>library</dt><dd>{} (fingerprint {})</dd>\n",
            escape(&r.library.path),
            code(&r.library.fingerprint)
        ),
    );
    w(
        &mut s,
        format_args!("<dt>fused score</dt><dd>{}</dd>\n", escape(&f.rule)),
    );
    if let Some(m) = f.margin {
        w(
            &mut s,
            format_args!("<dt>margin</dt><dd>{m:.3} between compounds 1 and 2</dd>\n"),
        );
    }
    w(
        &mut s,
        format_args!(
            "<dt>identity criteria</dt><dd>{}</dd>\n",
            escape(&r.policy.summary())
        ),
    );
    s.push_str("</dl>\n");
    if !f.warnings.is_empty() {
        s.push_str("<ul class=\"warnings\">\n");
        for warning in &f.warnings {
            w(&mut s, format_args!("<li>{}</li>\n", escape(warning)));
        }
        s.push_str("</ul>\n");
    }
    s.push_str("<table class=\"hits\">\n<thead><tr><th class=\"num\">rank</th><th class=\"num\">fused</th>");
    for t in &techniques {
        w(&mut s, format_args!("<th class=\"num\">{}</th>", escape(t)));
    }
    s.push_str("<th>compound</th><th>formula</th><th>where the techniques disagree</th></tr></thead>\n<tbody>\n");
    for c in &f.compounds {
        w(
            &mut s,
            format_args!(
                "<tr{}><td class=\"num\">{}</td><td class=\"num\">{:.3}</td>",
                if c.rank == 1 { " class=\"first\"" } else { "" },
                c.rank,
                c.fused
            ),
        );
        for e in &c.evidence {
            match (e.score, e.rank) {
                (Some(score), Some(rank)) => w(
                    &mut s,
                    format_args!("<td class=\"num\">{score:.3} (#{rank})</td>"),
                ),
                _ => s.push_str("<td class=\"num\">no reference</td>"),
            }
        }
        w(
            &mut s,
            format_args!(
                "<td class=\"name\">{}</td><td>{}</td><td>{}</td></tr>\n",
                escape(&c.name),
                escape(c.formula.as_deref().unwrap_or("")),
                escape(&c.disagreements.join("; "))
            ),
        );
    }
    s.push_str("</tbody>\n</table>\n</section>\n");
    let mut sections = vec![s];
    for q in queries {
        let heading = format!("{} unknown", q.report.unknown.technique.title());
        sections.push(query_section(q, Some(&heading))?);
    }
    Ok(page(
        &title,
        &lede,
        &r.tool_version,
        &r.searched_at,
        &sections,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::fixtures::{FINGERPRINT, SHA256, ir, report};

    fn render(file: &str, refs: &[(&str, &Prepared)], filter: Option<&str>) -> String {
        let unknown = ir(&[(1715.0, 0.9), (2950.0, 0.3)]);
        let (report, references) = report(file, &unknown, refs, filter);
        search_page(&Query {
            report: &report,
            unknown: &unknown,
            references: &references,
        })
        .unwrap()
    }

    #[test]
    fn metadata_never_becomes_markup() {
        let evil = "<script>alert(1)</script>";
        let (a, b) = (ir(&[(1715.0, 1.0)]), ir(&[(1600.0, 1.0)]));
        let refs = [(evil, &a), ("\" onload=\"alert(2)", &b)];
        let html = render("/data/<img src=x>.csv", &refs, None);
        assert!(!html.contains("<script"), "a script element got through");
        assert!(!html.contains("<img"), "an img element got through");
        assert!(!html.contains("\" onload=\""), "an attribute got through");
        assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
        assert!(html.contains("&lt;img src=x&gt;.csv"));
        // And a query string with markup in it.
        let html = render("u.csv", &refs, Some("name:script OR \"<b>\""));
        assert!(html.contains("&lt;b&gt;"), "the query is shown");
        assert!(!html.contains("<b>"));
    }

    #[test]
    fn a_page_holds_facts_hits_overlays_and_the_caution() {
        let ketone = ir(&[(1715.0, 1.0), (2950.0, 0.4)]);
        let ester = ir(&[(1740.0, 1.0), (1240.0, 0.7)]);
        let html = render("u.csv", &[("ester", &ester), ("ketone", &ketone)], None);
        assert!(html.contains(SHA256));
        assert!(html.contains(FINGERPRINT));
        assert!(html.contains(env!("CARGO_PKG_VERSION")));
        assert_eq!(html.matches("<svg").count(), 2, "one overlay per hit");
        assert!(html.contains("id=\"ir-hit-1\"") && html.contains("href=\"#ir-hit-2\""));
        // The ketone matches the unknown's bands and is listed and plotted first.
        let (first, second) = (
            html.find(">ketone<").unwrap(),
            html.find(">ester<").unwrap(),
        );
        assert!(first < second, "hit 1 is the ketone");
        assert_eq!(html.matches(&escape(crate::CAUTION)).count(), 2);
        assert!(html.contains("<tr class=\"first\"><td class=\"num\">1</td>"));
        // Nothing is fetched: no external references at all.
        for needle in ["http://", "https://", "src="] {
            let outside_svg_ns = html.replace("http://www.w3.org/2000/svg", "");
            assert!(!outside_svg_ns.contains(needle), "{needle}");
        }
    }
}
