//! `whorl init`: create a library.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use whorl::library::Library;

use super::{Context, identity};

#[derive(Debug, Args)]
pub struct InitArgs {
    /// Who creates the library [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
    /// Print the new library's recipes and fingerprint as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: InitArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = Library::init(&ctx.library, &identity(args.by.as_deref()))?;
    let mut out = std::io::stdout().lock();
    if args.json {
        super::output::json(
            &mut out,
            &serde_json::json!({
                "library": ctx.library.display().to_string(),
                "recipes": lib.recipes().values().collect::<Vec<_>>(),
                "fingerprint": lib.fingerprint()?,
            }),
        )?;
        return Ok(ExitCode::SUCCESS);
    }
    writeln!(out, "created library {}", ctx.library.display())?;
    for r in lib.recipes().values() {
        let g = &r.grid;
        writeln!(
            out,
            "  {:<7} grid {}..{} step {} ({} points)",
            r.technique.name(),
            g.start,
            g.stop,
            g.step,
            g.len()
        )?;
    }
    writeln!(out, "fingerprint {}", lib.fingerprint()?)?;
    Ok(ExitCode::SUCCESS)
}
