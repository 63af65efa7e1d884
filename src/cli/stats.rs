//! `whorl stats`: counts, grids, state hash.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct StatsArgs {
    /// Print as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: StatsArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let s = lib.stats()?;
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &s)?;
        return Ok(ExitCode::SUCCESS);
    }
    writeln!(
        out,
        "library      {}",
        super::output::shown(ctx.library.display())
    )?;
    writeln!(out, "state hash   {}", s.state_hash)?;
    writeln!(out, "compounds    {}", s.compounds)?;
    writeln!(out, "events       {}", s.events)?;
    writeln!(out)?;
    let mut t = output::Table::new(&["technique", ">pending", ">verified", ">withdrawn", "grid"]);
    for r in &s.recipes {
        let counts = s.spectra.get(r.technique.name());
        let n = |k: &str| {
            counts
                .and_then(|c| c.get(k))
                .copied()
                .unwrap_or(0)
                .to_string()
        };
        let g = &r.grid;
        t.row(vec![
            r.technique.to_string(),
            n("pending"),
            n("verified"),
            n("withdrawn"),
            format!(
                "{}..{} step {} ({} points)",
                g.start,
                g.stop,
                g.step,
                g.len()
            ),
        ]);
    }
    t.write(&mut out)?;
    Ok(ExitCode::SUCCESS)
}
