//! The page of `identify`: the list fused per compound, then one section per technique.

use crate::error::Result;
use crate::search::IdentifyReport;

use super::{IdentifyCase, Query, case_section, code, escape, page, query_section, w};

/// A whole page for `identify`: the case section when a case is given (sample, analyst, and
/// the provenance of each technique's hits), the fused list per compound, then one section per
/// technique searched (the same section a search report has), on one page.
pub fn identify_page(
    r: &IdentifyReport,
    queries: &[Query<'_>],
    case: Option<&IdentifyCase<'_>>,
) -> Result<String> {
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
            "<dt>library</dt><dd>{} (state hash {})</dd>\n",
            escape(&r.library.path),
            code(&r.library.state_hash)
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
            w(
                &mut s,
                format_args!("<li>{}</li>\n", escape(&warning.message)),
            );
        }
        s.push_str("</ul>\n");
    }
    s.push_str("<div class=\"wide\"><table class=\"hits fused\">\n<thead><tr><th class=\"num\">rank</th><th class=\"num\">fused</th>");
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
                "<td class=\"name\">{}</td><td>{}</td><td class=\"wrap\">{}</td></tr>\n",
                escape(&c.name),
                escape(c.formula.as_deref().unwrap_or("")),
                escape(&c.disagreements.join("; "))
            ),
        );
    }
    s.push_str("</tbody>\n</table></div>\n</section>\n");
    let mut sections = Vec::with_capacity(queries.len() + 2);
    if let Some(case) = case {
        let headings: Vec<String> = queries
            .iter()
            .map(|q| format!("{} hits", q.report.unknown.technique.title()))
            .collect();
        let groups: Vec<(Option<&str>, &[crate::search::Provenance])> = headings
            .iter()
            .zip(case.provenance)
            .map(|(h, p)| (Some(h.as_str()), p.as_slice()))
            .collect();
        sections.push(case_section(case.sample, case.analyst, &groups));
    }
    sections.push(s);
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
