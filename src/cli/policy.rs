//! `whorl policy`: the library's review policy.

use std::io::Write;
use std::process::ExitCode;

use clap::{Args, ValueEnum};

use super::{Context, identity};

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum Allow {
    Allow,
    Forbid,
}

#[derive(Debug, Args)]
pub struct PolicyArgs {
    /// Whether a submitter may review their own spectra (forbidden by default)
    #[arg(long, value_enum)]
    pub self_review: Option<Allow>,
    /// Why the policy changes (required with --self-review; recorded in the audit trail)
    #[arg(long, requires = "self_review")]
    pub reason: Option<String>,
    /// Who changes the policy [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
}

pub fn run(args: PolicyArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    if let Some(a) = args.self_review {
        let Some(reason) = args.reason.as_deref() else {
            return Err(whorl::Error::invalid(
                "a change of the review policy needs a reason",
                "add --reason \"why the policy changes\"; it is recorded in the audit trail",
            )
            .into());
        };
        lib.set_self_review(
            matches!(a, Allow::Allow),
            &identity(args.by.as_deref())?,
            reason,
        )?;
    }
    let state = if lib.allow_self_review()? {
        "allowed"
    } else {
        "forbidden"
    };
    writeln!(std::io::stdout().lock(), "self-review: {state}")?;
    Ok(ExitCode::SUCCESS)
}
