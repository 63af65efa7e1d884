//! `whorl revise`: a new revision of a spectrum's metadata.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use whorl::library::MetadataPatch;

use super::output::json;
use super::{Context, identity};

#[derive(Debug, Args)]
pub struct ReviseArgs {
    /// Spectrum id
    pub id: i64,
    /// New compound name
    #[arg(long)]
    pub name: Option<String>,
    /// New formula ('' clears it)
    #[arg(long)]
    pub formula: Option<String>,
    /// New CAS RN ('' clears it)
    #[arg(long)]
    pub cas: Option<String>,
    /// Replace the synonyms (repeatable)
    #[arg(long = "synonym", value_name = "S")]
    pub synonyms: Vec<String>,
    /// Replace the tags (repeatable)
    #[arg(long = "tag", value_name = "T")]
    pub tags: Vec<String>,
    /// New NMR solvent (the spectrum is prepared again)
    #[arg(long)]
    pub solvent: Option<String>,
    /// New source
    #[arg(long)]
    pub source: Option<String>,
    /// New instrument
    #[arg(long)]
    pub instrument: Option<String>,
    /// New acquisition date
    #[arg(long)]
    pub acquired: Option<String>,
    /// New notes
    #[arg(long)]
    pub note: Option<String>,
    /// Set an extra field, KEY=VALUE (KEY= removes it; repeatable)
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
    /// Why the revision is made (recorded in the audit trail)
    #[arg(long)]
    pub reason: String,
    /// Who revises [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
    /// Print the result as JSON (errors too)
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: ReviseArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    let mut extra = Vec::new();
    for kv in &args.set {
        let Some((k, v)) = kv.split_once('=') else {
            return Err(whorl::Error::invalid(
                format!("--set '{kv}' has no '='"),
                "write --set KEY=VALUE, or KEY= to remove a field",
            )
            .into());
        };
        extra.push((
            k.trim().to_string(),
            Some(v.to_string()).filter(|v| !v.trim().is_empty()),
        ));
    }
    let patch = MetadataPatch {
        name: args.name,
        formula: args.formula,
        cas: args.cas,
        synonyms: (!args.synonyms.is_empty()).then_some(args.synonyms),
        tags: (!args.tags.is_empty()).then_some(args.tags),
        solvent: args.solvent,
        source: args.source,
        instrument: args.instrument,
        acquired: args.acquired,
        notes: args.note,
        extra,
    };
    let number = lib.revise(
        args.id,
        &patch,
        &identity(args.by.as_deref())?,
        Some(args.reason.as_str()),
    )?;
    let mut out = std::io::stdout().lock();
    if args.json {
        json(
            &mut out,
            &serde_json::json!({"spectrum": args.id, "revision": number, "status": "pending"}),
        )?;
    } else {
        writeln!(
            out,
            "spectrum {} revision {number} (pending review)",
            args.id
        )?;
    }
    Ok(ExitCode::SUCCESS)
}
