//! `whorl log`: the audit trail.

use std::process::ExitCode;

use clap::Args;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct LogArgs {
    /// Only the events of this spectrum (with the compound merges that moved it or joined its
    /// compound)
    pub id: Option<i64>,
    /// Print the events (with payloads and hashes) as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: LogArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let events = match args.id {
        Some(id) => lib.spectrum_log(id)?,
        None => lib.events(None)?,
    };
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &events)?;
        return Ok(ExitCode::SUCCESS);
    }
    let mut t = output::Table::new(&[
        ">seq", "at (UTC)", "actor", "identity", "action", "record", "detail", "hash",
    ]);
    for e in &events {
        t.row(vec![
            e.seq.to_string(),
            e.at.clone(),
            e.actor.clone(),
            e.identity.clone(),
            e.action.clone(),
            e.record.clone(),
            detail(e),
            output::short(&e.hash).to_string(),
        ]);
    }
    t.write(&mut out)?;
    Ok(ExitCode::SUCCESS)
}

/// A one-line summary of an event's payload.
fn detail(e: &whorl::library::Event) -> String {
    let p = &e.payload;
    let s = |k: &str| p[k].as_str().unwrap_or_default().to_string();
    match e.action.as_str() {
        "add" => format!(
            "{} {} ({})",
            s("technique"),
            p["metadata"]["name"].as_str().unwrap_or_default(),
            s("file")
        ),
        "import" => format!(
            "{} {} from bundle {}",
            s("technique"),
            p["revisions"]
                .as_array()
                .and_then(|r| r.last())
                .map(|r| r["metadata"]["name"].as_str().unwrap_or_default())
                .unwrap_or_default(),
            // Import events recorded before the term changed say `fingerprint`.
            output::short(
                p["bundle"]["state_hash"]
                    .as_str()
                    .or_else(|| p["bundle"]["fingerprint"].as_str())
                    .unwrap_or_default()
            )
        ),
        "review" => format!(
            "revision {} {}{}",
            p["revision"],
            s("decision"),
            p["note"]
                .as_str()
                .map(|n| format!(": {n}"))
                .unwrap_or_default()
        ),
        "revise" => format!(
            "revision {}{}",
            p["revision"],
            p["reason"]
                .as_str()
                .map(|r| format!(": {r}"))
                .unwrap_or_default()
        ),
        "withdraw" => format!("reason: {}", s("reason")),
        "reinstate" => format!(
            "revision {} back to pending; reason: {}",
            p["revision"],
            s("reason")
        ),
        "policy" => format!("allow_self_review = {}", p["allow_self_review"]),
        "init" => "library created".to_string(),
        "recipe" => format!(
            "{} spectra prepared again; reason: {}",
            p["spectra"],
            s("reason")
        ),
        "compound-merge" => format!(
            "into compound {}, {} spectr{} moved ({}){}; reason: {}",
            p["into"],
            p["spectra"].as_array().map_or(0, Vec::len),
            if p["spectra"].as_array().map_or(0, Vec::len) == 1 {
                "um"
            } else {
                "a"
            },
            p["spectra"]
                .as_array()
                .into_iter()
                .flatten()
                .map(|v| v.to_string())
                .collect::<Vec<_>>()
                .join(", "),
            if p["formulas_differ"] == true {
                ", formulas differed"
            } else {
                ""
            },
            s("reason")
        ),
        _ => String::new(),
    }
}
