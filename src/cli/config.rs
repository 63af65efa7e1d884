//! `whorl config`: the library's settings with the defaults filled in.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use serde_json::json;
use whorl::config::Config;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct ConfigArgs {
    /// Print as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: ConfigArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let path = Config::path(&ctx.library);
    let config = ctx.config()?;
    let found = path.is_file();
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(
            &mut out,
            &json!({ "file": path.display().to_string(), "found": found, "config": config }),
        )?;
    } else {
        let state = if found {
            "read"
        } else {
            "not present: defaults in use"
        };
        writeln!(out, "# {} ({state})", path.display())?;
        write!(out, "{}", toml::to_string_pretty(&config)?)?;
    }
    Ok(ExitCode::SUCCESS)
}
