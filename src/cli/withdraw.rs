//! `whorl withdraw`: take a spectrum out of search, keeping it for history.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;

use super::output::json;
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
    /// Print the result as JSON (errors too)
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: WithdrawArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    lib.withdraw(args.id, &identity(args.by.as_deref())?, &args.reason)?;
    let mut out = std::io::stdout().lock();
    if args.json {
        json(
            &mut out,
            &serde_json::json!({
                "spectrum": args.id,
                "status": "withdrawn",
                "reason": args.reason.trim(),
            }),
        )?;
    } else {
        writeln!(
            out,
            "spectrum {} withdrawn: {}",
            args.id,
            super::output::terminal_text(args.reason.trim())
        )?;
    }
    Ok(ExitCode::SUCCESS)
}
