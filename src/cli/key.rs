//! `whorl key`: the lab's signing key pair, and the keys whose bundles the library trusts.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use clap::{Args, Subcommand};
use whorl::library::{KeyPair, PublicKey};

use super::{Context, identity, output};

#[derive(Debug, Args)]
pub struct KeyArgs {
    #[command(subcommand)]
    pub command: KeyCommand,
}

#[derive(Debug, Subcommand)]
pub enum KeyCommand {
    /// Make a lab key pair: NAME.key (private, mode 0600) and NAME.pub (to share).
    Create(CreateArgs),
    /// Trust bundles signed by the key in a .pub file (recorded in the audit trail).
    Trust(TrustArgs),
    /// List the keys the library trusts.
    List(ListArgs),
}

#[derive(Debug, Args)]
pub struct CreateArgs {
    /// The key's name: letters, digits, '.', '-', '_' (e.g. the lab's short name)
    pub name: String,
    /// Where to write the two files [default: $XDG_CONFIG_HOME/whorl/keys, else ~/.config/whorl/keys]; never inside the library folder
    #[arg(long, value_name = "DIR")]
    pub dir: Option<PathBuf>,
}

#[derive(Debug, Args)]
pub struct TrustArgs {
    /// The NAME.pub file of the exporting lab
    pub public_key: PathBuf,
    /// Why the key is trusted (whose it is, how it was checked)
    #[arg(long, required = true)]
    pub reason: String,
    /// Who trusts it [default: $WHORL_USER, else the OS account]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
}

#[derive(Debug, Args)]
pub struct ListArgs {
    /// Print the keys as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: KeyArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut out = std::io::stdout().lock();
    match args.command {
        KeyCommand::Create(a) => {
            let dir = match a.dir {
                Some(d) => d,
                None => default_key_dir()?,
            };
            refuse_inside_library(&dir, &ctx.library)?;
            let pair = KeyPair::generate(&a.name)?;
            let (secret, public) = pair.write(&dir)?;
            writeln!(
                out,
                "private key {} (keep it secret)",
                output::shown(secret.display())
            )?;
            writeln!(out, "public key  {}", output::shown(public.display()))?;
            writeln!(
                out,
                "key {} {}",
                output::shown(pair.name()),
                pair.public().hex()
            )?;
        }
        KeyCommand::Trust(a) => {
            let key = PublicKey::read(&a.public_key)?;
            let actor = identity(a.by.as_deref())?;
            let mut lib = ctx.open()?;
            let trusted = lib.trust_key(&key, &a.reason, &actor)?;
            writeln!(
                out,
                "trusted key {} {} (by {}: {})",
                output::shown(&trusted.name),
                output::shown(&trusted.public_key),
                output::shown(&trusted.trusted_by),
                output::shown(&trusted.reason)
            )?;
        }
        KeyCommand::List(a) => {
            let lib = ctx.open()?;
            let keys = lib.trusted_keys()?;
            if a.json {
                output::json(&mut out, &keys)?;
            } else if keys.is_empty() {
                writeln!(
                    out,
                    "no trusted keys: signed bundles are refused unless imported with --untrusted"
                )?;
            } else {
                for k in keys {
                    writeln!(
                        out,
                        "{} {} trusted by {} at {}: {}",
                        output::shown(&k.name),
                        output::shown(&k.public_key),
                        output::shown(&k.trusted_by),
                        output::shown(&k.trusted_at),
                        output::shown(&k.reason)
                    )?;
                }
            }
        }
    }
    Ok(ExitCode::SUCCESS)
}

/// `$XDG_CONFIG_HOME/whorl/keys`, else `$HOME/.config/whorl/keys`.
fn default_key_dir() -> anyhow::Result<PathBuf> {
    if let Some(x) = std::env::var_os("XDG_CONFIG_HOME").filter(|x| !x.is_empty()) {
        return Ok(PathBuf::from(x).join("whorl/keys"));
    }
    match std::env::var_os("HOME").filter(|h| !h.is_empty()) {
        Some(h) => Ok(PathBuf::from(h).join(".config/whorl/keys")),
        None => Err(whorl::Error::invalid(
            "no home folder to keep the key in",
            "name a folder outside the library with --dir",
        )
        .into()),
    }
}

/// A private key kept in the library folder travels with every copy of the library.
fn refuse_inside_library(dir: &Path, library: &Path) -> anyhow::Result<()> {
    let abs = |p: &Path| std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf());
    let (dir, library) = (abs(dir), abs(library));
    let canon = |p: &Path| p.canonicalize().unwrap_or_else(|_| p.to_path_buf());
    if dir.starts_with(&library) || canon(&dir).starts_with(canon(&library)) {
        return Err(whorl::Error::invalid(
            format!("{} is inside the library folder {}", dir.display(), library.display()),
            "keep the private key outside the library (its copies and backups would carry it); choose another --dir",
        )
        .into());
    }
    Ok(())
}
