//! `whorl find`: full-text search over metadata.

use std::io::Write;
use std::process::ExitCode;

use super::{Context, output};
use clap::Args;

#[derive(Debug, Args)]
pub struct FindArgs {
    /// Query in tantivy syntax: words, "phrases", field:value, AND/OR/NOT, e.g. 'tag:solvent AND class:ketone'
    pub query: String,
    /// Most results to show
    #[arg(long, default_value_t = 20)]
    pub top: usize,
    /// Print the results as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: FindArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let rows = lib.find(&args.query, args.top)?;
    // A derived store that is behind never answers without saying so.
    let behind = lib.text_index_behind();
    if behind {
        eprintln!(
            "warning: the text index is behind the library (another process is writing, or it could not be rebuilt): these results may miss or misstate the newest changes; run the query again, or `whorl check` to rebuild the index"
        );
    }
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &rows)?;
    } else if rows.is_empty() {
        let note = if behind {
            " in the text index, which is behind the library"
        } else {
            ""
        };
        writeln!(
            out,
            "nothing matches '{}'{note}",
            output::terminal_text(&whorl::error::excerpt(&args.query, 200))
        )?;
    } else {
        let mut t = output::Table::new(&[
            ">relevance",
            ">id",
            "technique",
            "compound",
            "formula",
            "cas",
            "status",
        ]);
        for r in rows {
            t.row(vec![
                format!("{:.2}", r.relevance),
                r.spectrum_id.to_string(),
                r.technique,
                r.name,
                r.formula.unwrap_or_default(),
                r.cas.unwrap_or_default(),
                r.status,
            ]);
        }
        t.write(&mut out)?;
    }
    Ok(ExitCode::SUCCESS)
}
