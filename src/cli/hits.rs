//! The hit list of one search, for people (a table with its facts and warnings) and as CSV.
//! `search` and `demo` print hit lists through it; `identify` shares its constraint summary.

use std::io::Write;

use whorl::score::{Measure, ScoreParams};
use whorl::search::{Constraints, Report};
use whorl::spectrum::csv_cell;
use whorl::technique::Technique;

use super::output;

/// A CSV field, quoted when it holds a comma, a quote or a line break.
pub(super) fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// Decimals shown for the scores of a hit list: three, or as many more (up to
/// [`MAX_SCORE_DIGITS`]) as it takes for every two different scores to print differently,
/// so that the table shows why hits that agree to three decimals are ranked as they are.
/// Equal scores print alike at any precision (their order is the spectrum id's).
pub(super) fn score_digits(scores: &[f64]) -> usize {
    (3..MAX_SCORE_DIGITS)
        .find(|&d| {
            scores
                .windows(2)
                .all(|w| w[0] == w[1] || format!("{:.d$}", w[0]) != format!("{:.d$}", w[1]))
        })
        .unwrap_or(MAX_SCORE_DIGITS)
}

/// The most decimals a hit list's scores are shown with; beyond it scores that differ are
/// differences of rounding, not of spectra.
const MAX_SCORE_DIGITS: usize = 9;

/// The columns of [`write_csv`].
pub const CSV_COLUMNS: [&str; 23] = [
    "rank",
    "score",
    "measure",
    "spectral",
    "cosine",
    "correlation",
    "composite",
    "entropy",
    "peaks_matched",
    "unknown_peaks",
    "reference_peaks",
    "peak_jaccard",
    "name",
    "formula",
    "cas",
    "spectrum_id",
    "compound_id",
    "technique",
    "status",
    "verdict",
    "margin",
    "warnings",
    "library_state_hash",
];

/// The hit list as CSV: one row per hit, every score component in its own column, and on every
/// row the list's verdict, margin, warning codes and library state hash. A list without hits
/// is one row with the hit columns empty, so its verdict and warnings are still there.
pub fn write_csv(out: &mut impl Write, r: &Report) -> anyhow::Result<()> {
    let mut w = csv::Writer::from_writer(out);
    w.write_record(CSV_COLUMNS)?;
    // Full precision: the shortest text that reads back as the same f64, as the JSON has it,
    // so that hits the table can only tell apart with more digits stay apart here too.
    let opt = |v: Option<f64>| v.map(|v| v.to_string()).unwrap_or_default();
    // The list's own facts repeat on every row, so that each row read alone (a LIMS importing
    // rows) carries the verdict, the margin, the warnings' codes and the library's state.
    let verdict = r.verdict.as_ref().map(|v| v.word()).unwrap_or_default();
    let margin = opt(r.margin);
    let codes: Vec<&str> = r.warnings.iter().map(|w| w.code.word()).collect();
    let codes = codes.join(";");
    for h in &r.hits {
        let c = &h.components;
        let o = &c.peak_overlap;
        w.write_record([
            h.rank.to_string(),
            h.score.to_string(),
            r.parameters.score.measure.label().to_string(),
            c.spectral.to_string(),
            c.cosine.to_string(),
            opt(c.correlation),
            opt(c.composite.as_ref().map(|x| x.composite)),
            opt(c.entropy),
            o.matched.to_string(),
            o.unknown_peaks.to_string(),
            o.reference_peaks.to_string(),
            o.jaccard.to_string(),
            csv_cell(&h.name).into_owned(),
            csv_cell(h.formula.as_deref().unwrap_or_default()).into_owned(),
            csv_cell(h.cas.as_deref().unwrap_or_default()).into_owned(),
            h.spectrum_id.to_string(),
            h.compound_id.to_string(),
            h.technique.to_string(),
            h.status.to_string(),
            verdict.to_string(),
            margin.clone(),
            codes.clone(),
            r.library.state_hash.clone(),
        ])?;
    }
    if r.hits.is_empty() {
        let mut row = vec![String::new(); CSV_COLUMNS.len() - 4];
        row.extend([
            verdict.to_string(),
            margin,
            codes,
            r.library.state_hash.clone(),
        ]);
        w.write_record(row)?;
    }
    w.flush()?;
    Ok(())
}

/// The ranking measure with the parameters that shape it, for the `ranking` line.
fn measure_description(p: &ScoreParams, technique: Technique) -> String {
    let mut s = p.measure.label().to_string();
    match p.measure {
        Measure::Derivative => s.push_str(&format!(
            " (Savitzky-Golay window {}, order {})",
            p.derivative.window, p.derivative.order
        )),
        Measure::Composite => {
            let c = &p.composite;
            s.push_str(&format!(
                " (weights intensity^{} x (m/z)^{}{}",
                c.intensity_exponent,
                c.mass_exponent,
                if c.reverse {
                    ", reverse search"
                } else {
                    ", forward search"
                }
            ));
            if let Some(m) = p.min_mz {
                s.push_str(&format!(", m/z >= {m}"));
            }
            s.push(')');
        }
        Measure::ShiftMatch if p.referencing_correction || p.weak_line_discount => {
            let on: Vec<&str> = [
                (p.referencing_correction, "referencing correction"),
                (p.weak_line_discount, "weak-line discount"),
            ]
            .iter()
            .filter(|(yes, _)| *yes)
            .map(|(_, what)| *what)
            .collect();
            s.push_str(&format!(" ({})", on.join(", ")));
        }
        _ => {}
    }
    if technique == Technique::MsEi
        && p.measure != Measure::Composite
        && let Some(m) = p.min_mz
    {
        s.push_str(&format!(" (m/z >= {m})"));
    }
    s
}

/// The whole-spectrum measure shown beside the ranking one.
fn second_measure(m: Measure, technique: Technique) -> Measure {
    match m {
        Measure::Cosine if technique.is_nmr() && technique != Technique::Nmr13c => {
            Measure::Correlation
        }
        Measure::Cosine if technique == Technique::Nmr13c => Measure::ShiftMatch,
        Measure::Cosine if technique == Technique::MsEi => Measure::Entropy,
        Measure::Entropy => Measure::Composite,
        Measure::Composite => Measure::Entropy,
        Measure::Cosine => Measure::Correlation,
        Measure::Derivative => Measure::Correlation,
        _ => Measure::Cosine,
    }
}

/// Prints a hit list for people; shared with `demo`.
pub fn print_report(out: &mut impl Write, r: &Report) -> anyhow::Result<()> {
    print_report_styled(out, r, output::Paint::OFF)
}

/// [`print_report`] with colour: the first hit in bold, warnings in yellow.
pub fn print_report_styled(
    out: &mut impl Write,
    r: &Report,
    paint: output::Paint,
) -> anyhow::Result<()> {
    let p = &r.parameters.score;
    let technique = r.unknown.technique;
    let solvent = r
        .unknown
        .solvent
        .as_deref()
        .map(|s| format!(", in {s}"))
        .unwrap_or_default();
    writeln!(
        out,
        "unknown   {}  ({technique}{solvent}, sha256 {})",
        output::terminal_text(&r.unknown.file),
        output::short(&r.unknown.sha256)
    )?;
    writeln!(
        out,
        "library   {}  (state hash {})",
        output::terminal_text(&r.library.path),
        output::short(&r.library.state_hash)
    )?;
    let filter = r
        .parameters
        .filter
        .as_deref()
        .map(|q| format!(", where {}", output::terminal_text(q)))
        .unwrap_or_default();
    writeln!(
        out,
        "ranking   {:.2} x {} + {:.2} x peak overlap (tolerance {}); {} spectra compared{filter}",
        p.spectral_weight,
        measure_description(p, technique),
        1.0 - p.spectral_weight,
        p.peak_tolerance,
        r.candidates
    )?;
    if let Some(c) = constraint_summary(&r.parameters.constraints) {
        writeln!(out, "constraints {c}; {} ruled out", r.excluded_count)?;
    }
    writeln!(out)?;
    let second = second_measure(p.measure, technique);
    let scores: Vec<f64> = r.hits.iter().map(|h| h.score).collect();
    let digits = score_digits(&scores);
    let mut t = output::Table::new(&[
        ">rank",
        ">score",
        "compound",
        "formula",
        &format!(">{}", p.measure.label()),
        &format!(">{}", second.label()),
        ">peaks",
        ">covered",
        ">jacc",
        ">id",
        "status",
    ]);
    for h in &r.hits {
        let o = &h.components.peak_overlap;
        let c = &h.components;
        let other = c
            .value(second)
            .map_or_else(|| "-".to_string(), |v| format!("{v:.3}"));
        t.row(vec![
            h.rank.to_string(),
            format!("{:.digits$}", h.score),
            h.name.clone(),
            h.formula.clone().unwrap_or_default(),
            format!("{:.3}", c.spectral),
            other,
            format!("{}/{}", o.matched, o.reference_peaks),
            format!("{:.2}", o.forward),
            format!("{:.2}", o.jaccard),
            h.spectrum_id.to_string(),
            h.status.to_string(),
        ]);
    }
    t.write_styled(out, paint, Some(0))?;
    writeln!(out)?;
    for h in &r.hits {
        for n in &h.notes {
            writeln!(
                out,
                "note      hit {} ({}): {}",
                h.rank,
                output::terminal_text(&h.name),
                output::terminal_text(n)
            )?;
        }
    }
    if r.parameters.explain && r.excluded.is_empty() && r.excluded_count > 0 {
        writeln!(
            out,
            "ruled out: {} candidate(s), none scoring above the last hit listed",
            r.excluded_count
        )?;
        writeln!(out)?;
    }
    if !r.excluded.is_empty() {
        writeln!(out, "ruled out (scored above the last hit):")?;
        let mut t = output::Table::new(&[">score", "compound", "formula", ">id", "reason"]);
        for e in &r.excluded {
            t.row(vec![
                format!("{:.3}", e.score),
                e.name.clone(),
                e.formula.clone().unwrap_or_default(),
                e.spectrum_id.to_string(),
                e.reason.clone(),
            ]);
        }
        t.write(out)?;
        writeln!(out)?;
    }
    if let Some(m) = r.margin {
        writeln!(
            out,
            "margin    {m:.digits$} between hits 1 and 2   (peaks = reference peaks matched / all of them; covered = share of the unknown's peaks matched; jacc = Jaccard)"
        )?;
    }
    for w in &r.warnings {
        writeln!(
            out,
            "{}   {}",
            paint.warn("warning"),
            output::terminal_text(&w.message)
        )?;
    }
    if let Some(v) = &r.verdict {
        writeln!(
            out,
            "verdict   {}",
            output::terminal_text(&v.sentence(&r.confidence))
        )?;
    }
    writeln!(out, "caution   {}", r.caution)?;
    Ok(())
}

/// The constraints in one line, or `None` when there are none.
pub fn constraint_summary(c: &Constraints) -> Option<String> {
    let mut parts = Vec::new();
    if let Some(f) = &c.formula {
        parts.push(format!("formula {f}"));
    }
    if let Some(m) = c.mass {
        parts.push(format!("nominal mass {m}"));
    }
    if let Some(i) = c.ihd {
        parts.push(format!("IHD {i}"));
    }
    if let Some(e) = &c.elements {
        parts.push(format!(
            "elements {}",
            e.iter().cloned().collect::<Vec<_>>().join(",")
        ));
    }
    if let Some(ri) = &c.ri {
        let phase = ri
            .phase
            .as_deref()
            .map(|p| format!(" on {p}"))
            .unwrap_or_default();
        parts.push(format!("RI {:.0} +- {}{phase}", ri.value, ri.window));
    }
    (!parts.is_empty()).then(|| parts.join(", "))
}

#[cfg(test)]
mod tests {
    use super::score_digits;

    #[test]
    fn scores_get_the_decimals_that_tell_them_apart() {
        let check =
            |scores: &[f64], digits: usize| assert_eq!(score_digits(scores), digits, "{scores:?}");
        check(&[], 3);
        check(&[0.91], 3);
        check(&[0.912, 0.875, 0.5], 3);
        // 0.99974 and 0.99962 both print 1.000; at four decimals 0.9997 and 0.9996.
        check(&[0.99974, 0.99962], 4);
        // 0.99962 and 0.99958 still agree at four (0.9996): five.
        check(&[0.99962, 0.99958], 5);
        check(&[1.0, 0.9999997684711847], 7);
        // Equal scores (ranked by spectrum id) never widen the column.
        check(&[0.75, 0.75, 0.5], 3);
        // Beyond nine decimals, differences are rounding: nine is the most.
        check(&[0.5, 0.5 + 1e-12], 9);
    }
}
