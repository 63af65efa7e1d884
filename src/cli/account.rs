//! `whorl account`: the lab server's accounts (add, list, disable, role, password).

use std::io::{BufRead, IsTerminal, Write};
use std::process::ExitCode;

use clap::{Args, Subcommand};
use whorl::library::{MIN_PASSWORD_CHARS, Role};

use super::{Context, identity, output};

#[derive(Debug, Args)]
pub struct AccountArgs {
    #[command(subcommand)]
    pub command: AccountCommand,
}

#[derive(Debug, Subcommand)]
pub enum AccountCommand {
    /// Add an account with a role: reader, submitter, signer, curator or admin.
    Add {
        /// The account's name (compared ignoring case and look-alike letters)
        name: String,
        /// reader, submitter, signer, curator or admin
        #[arg(long)]
        role: Role,
        /// Who adds it [default: $WHORL_USER, else the OS user]
        #[arg(long, value_name = "WHO")]
        by: Option<String>,
    },
    /// List the accounts.
    List {
        /// Print JSON
        #[arg(long)]
        json: bool,
    },
    /// Disable an account (kept for the trail; its sessions and tokens stop working).
    Disable {
        /// The account's name
        name: String,
        /// Why it is disabled
        #[arg(long, required = true)]
        reason: String,
        /// Who disables it [default: $WHORL_USER, else the OS user]
        #[arg(long, value_name = "WHO")]
        by: Option<String>,
    },
    /// Change an account's role (administrators; audited with the reason).
    Role {
        /// The account's name
        name: String,
        /// The new role: reader, submitter, signer, curator or admin
        role: Role,
        /// Why the role changes
        #[arg(long, required = true)]
        reason: String,
        /// Who changes it [default: $WHORL_USER, else the OS user]
        #[arg(long, value_name = "WHO")]
        by: Option<String>,
    },
    /// Set an account's password: asked on the terminal, or one line read from stdin when
    /// stdin is not a terminal. Never on the command line or in the environment.
    Password {
        /// The account's name
        name: String,
        /// Who sets it [default: $WHORL_USER, else the OS user]
        #[arg(long, value_name = "WHO")]
        by: Option<String>,
    },
}

pub fn run(args: AccountArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    let mut out = std::io::stdout().lock();
    match args.command {
        AccountCommand::Add { name, role, by } => {
            let a = lib.add_account(&name, role, &identity(by.as_deref())?)?;
            writeln!(
                out,
                "account {} added with role {}",
                output::shown(&a.name),
                a.role
            )?;
            if !a.has_password {
                writeln!(
                    out,
                    "set its password with `whorl account password {}`",
                    output::shown(&a.name)
                )?;
            }
        }
        AccountCommand::List { json } => {
            let accounts = lib.accounts()?;
            if json {
                output::json(&mut out, &accounts)?;
            } else {
                let mut t = output::Table::new(&["name", "role", "password", "state", "since"]);
                for a in accounts {
                    let state = match (&a.disabled_at, &a.locked_until) {
                        (Some(_), _) => format!(
                            "disabled: {}",
                            a.disabled_reason.clone().unwrap_or_default()
                        ),
                        (None, Some(until)) if *until > whorl::library::now() => {
                            format!("locked until {until}")
                        }
                        _ => "active".into(),
                    };
                    t.row(vec![
                        a.name,
                        a.role.to_string(),
                        if a.has_password { "set" } else { "none" }.into(),
                        state,
                        a.created_at,
                    ]);
                }
                t.write(&mut out)?;
            }
        }
        AccountCommand::Disable { name, reason, by } => {
            let a = lib.disable_account(&name, &reason, &identity(by.as_deref())?)?;
            writeln!(
                out,
                "account {} disabled: {}",
                output::shown(&a.name),
                output::shown(reason.trim())
            )?;
        }
        AccountCommand::Role {
            name,
            role,
            reason,
            by,
        } => {
            let a = lib.set_role(&name, role, &reason, &identity(by.as_deref())?)?;
            writeln!(
                out,
                "account {} now has the role {}",
                output::shown(&a.name),
                a.role
            )?;
        }
        AccountCommand::Password { name, by } => {
            // Fail on an unknown name before asking for a password.
            let account = lib.account(&name)?.ok_or_else(|| {
                whorl::Error::invalid(
                    format!("there is no account '{name}'"),
                    "run `whorl account list` to see the accounts",
                )
            })?;
            let password = read_password(&account.name)?;
            lib.set_password(&account.name, &password, &identity(by.as_deref())?)?;
            writeln!(out, "password of {} set", output::shown(&account.name))?;
        }
    }
    Ok(ExitCode::SUCCESS)
}

/// A new password: prompted twice on the terminal, or one line of stdin when stdin is not a
/// terminal (scripts and tests).
fn read_password(name: &str) -> anyhow::Result<String> {
    let stdin = std::io::stdin();
    if stdin.is_terminal() {
        let first = rpassword::prompt_password(format!(
            "new password for {name} (at least {MIN_PASSWORD_CHARS} characters): "
        ))?;
        let again = rpassword::prompt_password("again: ")?;
        if first != again {
            return Err(whorl::Error::invalid(
                "the two passwords differ",
                "run the command again and type the same password twice",
            )
            .into());
        }
        Ok(first)
    } else {
        let mut line = String::new();
        stdin.lock().read_line(&mut line)?;
        Ok(line.trim_end_matches(['\n', '\r']).to_string())
    }
}
