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
    },
}

pub fn run(args: WitnessArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let WitnessCommand::Write { file } = args.command;
    let lib = ctx.open()?;
    let (seq, hash) = lib.write_witness(&file)?;
    writeln!(
        std::io::stdout().lock(),
        "witnessed event {seq} {hash} in {}",
        file.display()
    )?;
    Ok(ExitCode::SUCCESS)
}
