//! `whorl witness`: write the audit chain's head to a file kept outside the library.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Subcommand};

use super::Context;

#[derive(Debug, Args)]
pub struct WitnessArgs {
    #[command(subcommand)]
    pub command: WitnessCommand,
}

#[derive(Debug, Subcommand)]
pub enum WitnessCommand {
    /// Append the chain's head (sequence, hash, time) to FILE; keep FILE outside the library
    Write {
        /// The witness file (created if missing)
        file: PathBuf,
        /// Print the head written as JSON (errors too)
        #[arg(long)]
        json: bool,
    },
}

pub fn run(args: WitnessArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let WitnessCommand::Write { file, json } = args.command;
    let lib = ctx.open()?;
    let (seq, hash) = lib.write_witness(&file)?;
    let mut out = std::io::stdout().lock();
    if json {
        super::output::json(
            &mut out,
            &serde_json::json!({"event": seq, "hash": hash, "file": file.display().to_string()}),
        )?;
    } else {
        writeln!(
            out,
            "witnessed event {seq} {hash} in {}",
            super::output::shown(file.display())
        )?;
    }
    Ok(ExitCode::SUCCESS)
}
