//! `whorl export`: write a portable bundle.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;
use whorl::library::{KeyPair, Status};

use super::{Context, identity, output};

#[derive(Debug, Args)]
pub struct ExportArgs {
    /// The bundle folder to create (must not exist or be empty)
    pub dir: PathBuf,
    /// Only spectra matching this metadata query
    #[arg(long = "where", value_name = "QUERY")]
    pub filter: Option<String>,
    /// Only spectra in this status: pending, verified or withdrawn
    #[arg(long)]
    pub status: Option<Status>,
    /// Who exports [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
    /// Sign the bundle with this private key (NAME.key from `whorl key create`)
    #[arg(long, value_name = "KEYFILE")]
    pub sign: Option<PathBuf>,
    /// Print bundle.json as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: ExportArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let signer = args.sign.as_deref().map(KeyPair::read).transpose()?;
    let bar = output::progress(0, "exporting");
    let report = lib.export(
        &args.dir,
        args.filter.as_deref(),
        args.status,
        &identity(args.by.as_deref())?,
        signer.as_ref(),
        &|done, total| {
            bar.set_length(total as u64);
            bar.set_position(done as u64);
        },
    )?;
    bar.finish_and_clear();
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &report.info)?;
    } else {
        writeln!(
            out,
            "exported {} spectra to {}",
            report.info.spectra,
            output::shown(report.dir.display())
        )?;
        writeln!(out, "bundle state hash {}", report.info.state_hash)?;
        match &signer {
            Some(key) => writeln!(
                out,
                "signed with key {} {}",
                output::shown(key.name()),
                key.public().hex()
            )?,
            None => writeln!(
                out,
                "unsigned: a library imports it only with --untrusted (sign with --sign KEYFILE)"
            )?,
        }
    }
    Ok(ExitCode::SUCCESS)
}
