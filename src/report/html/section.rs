//! One query's section of a page: what was searched and how, the hit list, and one overlay of
//! the unknown on each top hit.

use crate::error::{Error, Result};
use crate::score::Measure;
use crate::search::{Hit, Report};

use super::super::plot;
use super::{Query, code, escape, file_name, w};

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
    fact("library state hash", code(&r.library.state_hash));
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
            "{} below {}, or hits 1 and 2 of different compounds within {} ({})",
            r.confidence.evidence.describe(),
            r.confidence.weak_score,
            r.confidence.close_margin,
            if r.confidence.retention_index {
                "derived for this scoring on searches given a retention index"
            } else if r.confidence.derived {
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
            w(
                &mut s,
                format_args!("<li>{}</li>\n", escape(&warning.message)),
            );
        }
        s.push_str("</ul>\n");
    }
    if let Some(v) = &r.verdict {
        w(
            &mut s,
            format_args!(
                "<p class=\"verdict\" data-verdict=\"{}\"><strong>Verdict:</strong> {}</p>\n",
                v.word(),
                escape(&v.sentence(&r.confidence))
            ),
        );
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::fixtures::{SHA256, STATE_HASH, ir, search_page_for};

    #[test]
    fn a_page_holds_facts_hits_overlays_and_the_caution() {
        let ketone = ir(&[(1715.0, 1.0), (2950.0, 0.4)]);
        let ester = ir(&[(1740.0, 1.0), (1240.0, 0.7)]);
        let html = search_page_for("u.csv", &[("ester", &ester), ("ketone", &ketone)], None);
        assert!(html.contains(SHA256));
        assert!(html.contains(STATE_HASH));
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
