//! `whorl show`: one spectrum in full.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use serde_json::json;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct ShowArgs {
    /// Spectrum id
    pub id: i64,
    /// Show the metadata of this earlier (or the current) revision
    #[arg(long, value_name = "N")]
    pub revision: Option<i64>,
    /// Print as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: ShowArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let current = lib.spectrum(args.id)?;
    let (rec, revision) = lib.spectrum_at(args.id, args.revision.unwrap_or(current.revision))?;
    let prepared = lib.prepared(args.id)?;
    let reviews = lib.reviews(args.id)?;
    let withdrawn = lib.withdrawn_reason(args.id)?;
    let events = lib.events(Some(&format!("spectrum:{}", args.id)))?;
    let status_history = lib.status_history(args.id)?;
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(
            &mut out,
            &json!({
                "spectrum": rec, "revision": revision, "current_revision": current.revision,
                "withdrawn_reason": withdrawn, "reviews": reviews, "status_history": status_history,
                "peaks": prepared.peaks, "preparation_warnings": prepared.warnings, "events": events,
            }),
        )?;
        return Ok(ExitCode::SUCCESS);
    }
    let m = &rec.metadata;
    // Stored text reaches the terminal escaped: no forged lines, no escape sequences.
    let mut line = |k: &str, v: &str| {
        writeln!(
            out,
            "{:<14}{}",
            output::terminal_text(k),
            output::terminal_text(v)
        )
    };
    let which = if rec.revision == current.revision {
        format!("revision {} of {}", rec.revision, current.revision)
    } else {
        format!(
            "revision {} of {}; NOT the current revision",
            rec.revision, current.revision
        )
    };
    line("spectrum", &format!("{} ({which}, {})", rec.id, rec.status))?;
    line(
        "revision by",
        &format!(
            "{} at {}{}",
            revision.created_by,
            revision.created_at,
            revision
                .reason
                .as_deref()
                .map(|r| format!(" ({r})"))
                .unwrap_or_default()
        ),
    )?;
    if let Some(w) = &withdrawn {
        line("withdrawn", w)?;
    }
    // Withdrawals and reinstatements in the library a bundle brought it from (this library's
    // own are among the events below).
    for c in status_history.iter().filter(|c| c.library.is_some()) {
        line(
            "elsewhere",
            &format!(
                "{} at {} by {}: {} [in {}]",
                c.action,
                c.at,
                c.by,
                c.reason,
                c.library.as_deref().unwrap_or_default()
            ),
        )?;
    }
    for r in &reviews {
        line(
            "sign-off",
            &format!(
                "revision {} {} by {} at {}: {}{}{}",
                r.revision,
                r.decision,
                r.reviewer,
                r.at,
                r.meaning,
                r.note
                    .as_deref()
                    .map(|n| format!(" ({n})"))
                    .unwrap_or_default(),
                r.imported_from
                    .as_deref()
                    .map(|f| format!(" [from {f}]"))
                    .unwrap_or_default()
            ),
        )?;
    }
    line(
        "compound",
        &format!("{} (compound {})", m.name, rec.compound_id),
    )?;
    for (k, v) in m
        .text_fields()
        .chain(m.notes.as_deref().map(|n| ("notes", n)))
    {
        line(k, v)?;
    }
    if !m.synonyms.is_empty() {
        line("synonyms", &m.synonyms.join("; "))?;
    }
    if !m.tags.is_empty() {
        line("tags", &m.tags.join("; "))?;
    }
    for (k, v) in &m.extra {
        line(k, v)?;
    }
    line("technique", rec.technique.name())?;
    line(
        "file",
        &format!(
            "{} ({} points, x {}, y {})",
            rec.file_name, rec.points, rec.x_unit, rec.y_unit
        ),
    )?;
    line("file sha256", &rec.file_sha256)?;
    line("raw sha256", &rec.raw_sha256)?;
    line(
        "submitted",
        &format!("{} by {}", rec.created_at, rec.submitted_by),
    )?;
    for w in &prepared.warnings {
        line("warning", w)?;
    }
    writeln!(out, "\npeaks ({})", prepared.peaks.len())?;
    let mut t = output::Table::new(&[">x", ">height", ">width", ">area"]);
    for p in &prepared.peaks {
        t.row(vec![
            format!("{:.3}", p.x),
            format!("{:.4}", p.height),
            format!("{:.3}", p.width),
            format!("{:.4}", p.area),
        ]);
    }
    t.write(&mut out)?;
    writeln!(out, "\nevents")?;
    for e in events {
        writeln!(
            out,
            "  #{} {} {} by {}",
            e.seq,
            output::shown(&e.at),
            output::shown(&e.action),
            output::shown(&e.actor)
        )?;
    }
    Ok(ExitCode::SUCCESS)
}
