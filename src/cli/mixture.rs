//! The components section of `whorl search --components N`: the unknown fitted as a
//! mixture of library spectra, for people, as CSV and inside the JSON report.

use std::io::Write;

use whorl::library::Library;
use whorl::prepare::Prepared;
use whorl::search::{Mixture, Plan, Report, Request, fit_mixture};
use whorl::spectrum::csv_cell;
use whorl::technique::Technique;

use super::output;

/// Fits the unknown of a one-file search as a mixture of up to `n` library spectra, starting
/// from the report's hit list, under the same request.
pub(super) fn fit(
    library: &Library,
    report: &Report,
    unknown: &Prepared,
    request: &Request,
    n: usize,
) -> anyhow::Result<Mixture> {
    let plan = Plan::new(library, request)?;
    Ok(fit_mixture(library, &plan, unknown, &report.hits, n)?)
}

/// The JSON report with the fit under `"mixture"`; the report's own fields are unchanged.
pub(super) fn with_report(report: &Report, mixture: &Mixture) -> anyhow::Result<serde_json::Value> {
    let mut value = serde_json::to_value(report)?;
    value["mixture"] = serde_json::to_value(mixture)?;
    Ok(value)
}

/// The components as CSV, one row per component, with the explained fractions repeated on
/// every row and the unexplained EI ions in one field (`m/z:observed` pairs, `;`-separated).
pub(super) fn write_csv(out: &mut impl Write, m: &Mixture) -> anyhow::Result<()> {
    let mut w = csv::Writer::from_writer(out);
    w.write_record([
        "component",
        "share",
        "coefficient",
        "score",
        "name",
        "formula",
        "spectrum_id",
        "compound_id",
        "explained",
        "explained_by_best",
        "unexplained_ions",
    ])?;
    let ions = m
        .unexplained_ions
        .iter()
        .map(|i| format!("{}:{}", i.mz, i.observed))
        .collect::<Vec<_>>()
        .join(";");
    for c in &m.components {
        w.write_record([
            c.step.to_string(),
            c.share.to_string(),
            c.coefficient.to_string(),
            c.score.to_string(),
            csv_cell(&c.name).into_owned(),
            csv_cell(c.formula.as_deref().unwrap_or_default()).into_owned(),
            c.spectrum_id.to_string(),
            c.compound_id.to_string(),
            m.explained.to_string(),
            m.explained_by_best.to_string(),
            ions.clone(),
        ])?;
    }
    w.flush()?;
    Ok(())
}

/// The components for people, after the hit list.
pub(super) fn print(out: &mut impl Write, m: &Mixture, technique: Technique) -> anyhow::Result<()> {
    writeln!(
        out,
        "components  the unknown fitted as a non-negative mixture of up to {} library spectra (non-negative least squares, Lawson & Hanson 1974); each after the first found by searching what the ones before leave",
        m.settings.max_components
    )?;
    if m.components.is_empty() {
        writeln!(out, "            no hits, nothing to fit")?;
        return Ok(());
    }
    let mut t = output::Table::new(&[">step", ">share", ">score", "compound", "formula", ">id"]);
    for c in &m.components {
        t.row(vec![
            c.step.to_string(),
            format!("{:.1} %", 100.0 * c.share),
            format!("{:.3}", c.score),
            csv_cell(&c.name).into_owned(),
            csv_cell(c.formula.as_deref().unwrap_or_default()).into_owned(),
            c.spectrum_id.to_string(),
        ]);
    }
    t.write(out)?;
    writeln!(out)?;
    writeln!(
        out,
        "explained   {:.1} % of the unknown together, {:.1} % by the best hit alone   (explained = 1 - |residual|^2 / |unknown|^2 on the prepared vectors; share = fitted part of the unknown's signal; score = against the unknown for step 1, against what was left for the others)",
        100.0 * m.explained,
        100.0 * m.explained_by_best
    )?;
    if m.has_several() {
        writeln!(
            out,
            "mixture     a second library spectrum explains clearly more than the best hit alone: possibly a mixture"
        )?;
    }
    if technique == Technique::MsEi {
        if m.coelution() {
            let ions: Vec<String> = m
                .unexplained_ions
                .iter()
                .map(|i| {
                    format!(
                        "m/z {} ({:.0} %, fitted {:.0} %)",
                        i.mz,
                        100.0 * i.observed,
                        100.0 * i.fitted
                    )
                })
                .collect();
            writeln!(
                out,
                "co-elution  ions no component explains (at least {:.0} % of the base peak, at least {:.0} % of it left): {}",
                100.0 * m.settings.coelution_min_abundance,
                100.0 * m.settings.coelution_unexplained,
                ions.join(", ")
            )?;
        } else {
            writeln!(
                out,
                "co-elution  none seen: the components explain every ion of at least {:.0} % of the base peak",
                100.0 * m.settings.coelution_min_abundance
            )?;
        }
    }
    writeln!(
        out,
        "caution     a component is evidence that a library spectrum accounts for part of the signal, not proof that the compound is present; shares are of signal, not of amount"
    )?;
    Ok(())
}
