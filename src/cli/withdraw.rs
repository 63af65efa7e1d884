//! `whorl withdraw`: take a spectrum out of search, keeping it for history.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;

use super::{Context, identity};

#[derive(Debug, Args)]
pub struct WithdrawArgs {
    /// Spectrum id
    pub id: i64,
    /// Why it is withdrawn
    #[arg(long, required = true)]
    pub reason: String,
    /// Who withdraws it [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
}

pub fn run(args: WithdrawArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    lib.withdraw(args.id, &identity(args.by.as_deref())?, &args.reason)?;
    writeln!(
        std::io::stdout().lock(),
        "spectrum {} withdrawn: {}",
        args.id,
        super::output::terminal_text(args.reason.trim())
    )?;
    Ok(ExitCode::SUCCESS)
}
