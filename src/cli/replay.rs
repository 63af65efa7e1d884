//! `whorl replay`: re-run a saved search and compare.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;
use whorl::library::Library;
use whorl::search::{load_saved, replay};

use super::{Context, EXIT_MISMATCH, output};

#[derive(Debug, Args)]
pub struct ReplayArgs {
    /// A search record written by `whorl search --save`
    pub file: PathBuf,
    /// Print the comparison as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: ReplayArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let saved = load_saved(&args.file)?;
    // The saved library unless --library / WHORL_LIBRARY names another one.
    let lib = if ctx.library_given {
        ctx.open()?
    } else {
        Library::open(std::path::Path::new(&saved.library.path))?
    };
    let r = replay(&lib, &saved)?;
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &r)?;
    } else {
        writeln!(
            out,
            "saved    {} against state hash {}",
            saved.searched_at,
            output::short(&r.state_hash_then)
        )?;
        writeln!(
            out,
            "now      {} against state hash {}",
            r.now.searched_at,
            output::short(&r.state_hash_now)
        )?;
        if r.same {
            writeln!(
                out,
                "same hits: {} ranks, same spectra, same scores",
                saved.hits.len()
            )?;
        } else {
            writeln!(out, "the hits differ:")?;
            for d in &r.differences {
                writeln!(out, "  {}", output::terminal_text(d))?;
            }
        }
        if !r.events_since.is_empty() {
            writeln!(out, "events since the search was saved:")?;
            for e in &r.events_since {
                writeln!(
                    out,
                    "  #{} {} {} {} by {}",
                    e.seq,
                    e.at,
                    e.action,
                    output::terminal_text(&e.record),
                    output::terminal_text(&e.actor)
                )?;
            }
        }
    }
    Ok(if r.same {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(EXIT_MISMATCH)
    })
}
