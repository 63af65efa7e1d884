//! `whorl policy`: the library's review policy.

use std::io::Write;
use std::process::ExitCode;

use clap::{Args, ValueEnum};

use super::output::json;
use super::{Context, identity};

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum Allow {
    Allow,
    Forbid,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum SignOffs {
    Any,
    SignedOnly,
}

#[derive(Debug, Args)]
pub struct PolicyArgs {
    /// Whether a submitter may review their own spectra (forbidden by default)
    #[arg(long, value_enum)]
    pub self_review: Option<Allow>,
    /// Which sign-offs count: any (the command line's too), or signed-only (through the lab
    /// server, by a signed-in account with its password)
    #[arg(long, value_enum)]
    pub sign_offs: Option<SignOffs>,
    /// Why the policy changes (required with --self-review or --sign-offs; recorded in the
    /// audit trail)
    #[arg(long)]
    pub reason: Option<String>,
    /// Who changes the policy [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
    /// Print the policy as JSON (errors too)
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: PolicyArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    let reason = || {
        args.reason
            .as_deref()
            .map(str::trim)
            .filter(|r| !r.is_empty())
            .ok_or_else(|| {
                whorl::Error::invalid(
                    "a change of the review policy needs a reason",
                    "add --reason \"why the policy changes\"; it is recorded in the audit trail",
                )
            })
    };
    if let Some(a) = args.self_review {
        lib.set_self_review(
            matches!(a, Allow::Allow),
            &identity(args.by.as_deref())?,
            reason()?,
        )?;
    }
    if let Some(s) = args.sign_offs {
        lib.set_signed_sign_offs_only(
            matches!(s, SignOffs::SignedOnly),
            reason()?,
            &identity(args.by.as_deref())?,
        )?;
    }
    let self_review = lib.allow_self_review()?;
    let signed_only = lib.signed_sign_offs_only()?;
    let mut out = std::io::stdout().lock();
    if args.json {
        return json(
            &mut out,
            &serde_json::json!({
                "self_review": if self_review { "allowed" } else { "forbidden" },
                "sign_offs": if signed_only { "signed-only" } else { "any" },
            }),
        )
        .map(|()| ExitCode::SUCCESS);
    }
    let state = if self_review { "allowed" } else { "forbidden" };
    writeln!(out, "self-review: {state}")?;
    let sign_offs = if signed_only {
        "signed-only (through the lab server)"
    } else {
        "any (asserted on the command line, or signed through the server)"
    };
    writeln!(out, "sign-offs: {sign_offs}")?;
    Ok(ExitCode::SUCCESS)
}
