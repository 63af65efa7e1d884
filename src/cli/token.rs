//! `whorl token`: bearer tokens with which programs act as an account on the lab server.

use std::io::Write;
use std::process::ExitCode;

use clap::{Args, Subcommand};

use super::{Context, identity, output};

#[derive(Debug, Args)]
pub struct TokenArgs {
    #[command(subcommand)]
    pub command: TokenCommand,
}

#[derive(Debug, Subcommand)]
pub enum TokenCommand {
    /// Create a token and print it once (only its SHA-256 is kept).
    Create {
        /// The account the token acts as
        #[arg(long)]
        account: String,
        /// What uses it, e.g. lims
        #[arg(long)]
        label: String,
        /// How long it works: days (90d) or hours (12h)
        #[arg(long, default_value = "90d")]
        expires: String,
        /// Who creates it [default: $WHORL_USER, else the OS user]
        #[arg(long, value_name = "WHO")]
        by: Option<String>,
    },
    /// List the tokens (never their secrets).
    List {
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Revoke a token by its id.
    Revoke {
        /// The token's id (see `whorl token list`)
        id: i64,
        /// Who revokes it [default: $WHORL_USER, else the OS user]
        #[arg(long, value_name = "WHO")]
        by: Option<String>,
    },
}

/// A lifetime such as `90d` or `12h`.
pub fn parse_lifetime(s: &str) -> anyhow::Result<chrono::Duration> {
    let bad = || {
        whorl::Error::invalid(
            format!("--expires '{s}' is not a lifetime"),
            "give a number of days or hours, e.g. 90d or 12h (at most 3650d)",
        )
    };
    let s = s.trim();
    let (n, unit) = s.split_at(s.len().saturating_sub(1));
    let n: i64 = n.parse().map_err(|_| bad())?;
    let d = match unit {
        "d" => chrono::Duration::days(n),
        "h" => chrono::Duration::hours(n),
        _ => return Err(bad().into()),
    };
    if n <= 0 || d > chrono::Duration::days(3650) {
        return Err(bad().into());
    }
    Ok(d)
}

pub fn run(args: TokenArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    let mut out = std::io::stdout().lock();
    match args.command {
        TokenCommand::Create {
            account,
            label,
            expires,
            by,
        } => {
            let until = (chrono::Utc::now() + parse_lifetime(&expires)?)
                .to_rfc3339_opts(chrono::SecondsFormat::Millis, true);
            let (id, secret) =
                lib.create_token(&account, &label, &until, &identity(by.as_deref())?)?;
            writeln!(out, "{secret}")?;
            eprintln!(
                "token {id} for {} ({}) until {until}; it is shown only now: keep it in the program's secret store",
                output::shown(&account),
                output::shown(&label)
            );
        }
        TokenCommand::List { json } => {
            let tokens = lib.tokens()?;
            if json {
                output::json(&mut out, &tokens)?;
            } else {
                let mut t = output::Table::new(&[
                    "id", "account", "label", "created", "expires", "revoked",
                ]);
                for k in tokens {
                    t.row(vec![
                        k.id.to_string(),
                        k.account,
                        k.label,
                        k.created_at,
                        k.expires_at,
                        k.revoked_at.unwrap_or_default(),
                    ]);
                }
                t.write(&mut out)?;
            }
        }
        TokenCommand::Revoke { id, by } => {
            lib.revoke_token(id, &identity(by.as_deref())?)?;
            writeln!(out, "token {id} revoked")?;
        }
    }
    Ok(ExitCode::SUCCESS)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lifetimes_in_days_and_hours() {
        assert_eq!(parse_lifetime("90d").unwrap(), chrono::Duration::days(90));
        assert_eq!(parse_lifetime("12h").unwrap(), chrono::Duration::hours(12));
        for bad in ["", "d", "0d", "-1d", "90", "90w", "4000d"] {
            assert!(parse_lifetime(bad).is_err(), "{bad}");
        }
    }
}
