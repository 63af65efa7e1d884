//! `whorl backup DEST`: a consistent copy of the library made while it is in use.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct BackupArgs {
    /// A new (or empty) folder outside the library, e.g. /backup/whorl/2024-05-01
    pub dest: PathBuf,
    /// Print the summary as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: BackupArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let report = lib.backup(&args.dest)?;
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &report)?;
    } else {
        writeln!(
            out,
            "backed up {} ({} bytes, {} events, head {}) to {}",
            report.files.join(", "),
            report.bytes,
            report.events,
            report.event_head.as_deref().unwrap_or("-"),
            output::shown(report.dest.display())
        )?;
        writeln!(
            out,
            "the text index and vector caches are derived: the first command on the copy rebuilds them; verify with `whorl --library {} check`",
            output::shown(report.dest.display())
        )?;
    }
    Ok(ExitCode::SUCCESS)
}
