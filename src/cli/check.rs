//! `whorl check`: verify the audit chain, the raw data and the derived data.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;

use super::{Context, EXIT_MISMATCH, output};

#[derive(Debug, Args)]
pub struct CheckArgs {
    /// Also verify that the audit chain extends every head recorded in this witness file
    /// (written by `whorl witness write`, kept outside the library) [default: [audit] witness
    /// in whorl.toml, when set]
    #[arg(long, value_name = "FILE")]
    pub witness: Option<std::path::PathBuf>,
    /// Print the report as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: CheckArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let bar = output::progress(0, "checking");
    let mut report = lib.check(&|done, total| {
        bar.set_length(total as u64);
        bar.set_position(done as u64);
    })?;
    // Without --witness, the witness file every write appends to ([audit] witness), if set.
    let witness = match args.witness {
        Some(f) => Some(f),
        None => ctx.config()?.audit.witness.filter(|f| f.exists()),
    };
    if let Some(file) = &witness {
        report.findings.extend(lib.verify_witness(file)?);
    }
    bar.finish_and_clear();
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &report)?;
    } else {
        for f in &report.findings {
            writeln!(
                out,
                "{}: {}",
                output::terminal_text(&f.record),
                output::terminal_text(&f.problem)
            )?;
        }
        if let Some(why) = &report.text_index_damage {
            writeln!(
                out,
                "the text index was damaged ({}) and has been rebuilt from the database (derived data)",
                whorl::error::excerpt(why, 200)
            )?;
        } else if report.text_index_rebuilt {
            writeln!(
                out,
                "the text index was behind the database and has been rebuilt (derived data)"
            )?;
        }
        for t in &report.caches_rebuilt {
            writeln!(out, "vector cache for {t} rebuilt (derived data)")?;
        }
        if report.unsealed > 0 {
            writeln!(
                out,
                "not covered: {} records (spectra, accounts, tokens, trusted keys) were last written by a version of whorl that did not seal their rows in the audit trail; for them only what their events record field by field is compared",
                report.unsealed
            )?;
        }
        writeln!(
            out,
            "checked {} events and {} spectra: {}",
            report.events,
            report.spectra,
            if report.findings.is_empty() {
                "no inconsistency".to_string()
            } else {
                format!("{} inconsistencies", report.findings.len())
            }
        )?;
        writeln!(out, "state hash {}", lib.state_hash()?)?;
    }
    Ok(if report.findings.is_empty() {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(EXIT_MISMATCH)
    })
}
