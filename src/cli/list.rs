//! `whorl list`: the library's spectra.

use std::process::ExitCode;

use clap::Args;
use whorl::technique::Technique;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct ListArgs {
    /// Only this technique
    #[arg(long, short)]
    pub technique: Option<Technique>,
    /// Print as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: ListArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let rows = lib.list(args.technique)?;
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &rows)?;
    } else {
        let mut t = output::Table::new(&[
            ">id",
            "technique",
            "compound",
            "formula",
            "cas",
            "status",
            ">rev",
        ]);
        for r in rows {
            t.row(vec![
                r.id.to_string(),
                r.technique.to_string(),
                r.name,
                r.formula.unwrap_or_default(),
                r.cas.unwrap_or_default(),
                r.status.to_string(),
                r.revision.to_string(),
            ]);
        }
        t.write(&mut out)?;
    }
    Ok(ExitCode::SUCCESS)
}
