//! `whorl reinstate`: bring a withdrawn spectrum back, pending a new sign-off.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;

use super::{Context, identity, output};

#[derive(Debug, Args)]
pub struct ReinstateArgs {
    /// Spectrum id
    pub id: i64,
    /// Why it comes back
    #[arg(long, required = true)]
    pub reason: String,
    /// Who reinstates it [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
}

pub fn run(args: ReinstateArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    lib.reinstate(args.id, &identity(args.by.as_deref())?, &args.reason)?;
    writeln!(
        std::io::stdout().lock(),
        "spectrum {} reinstated, pending a new sign-off: {}",
        args.id,
        output::terminal_text(args.reason.trim())
    )?;
    Ok(ExitCode::SUCCESS)
}
