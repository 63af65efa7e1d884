//! `whorl find`: full-text search over metadata.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use serde::Serialize;

use super::{Context, output};

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

#[derive(Serialize)]
struct Found {
    relevance: f32,
    spectrum_id: i64,
    compound_id: i64,
    technique: String,
    status: String,
    name: String,
    formula: Option<String>,
    cas: Option<String>,
}

pub fn run(args: FindArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let found = lib.text().find(&args.query, args.top)?;
    let ids: Vec<i64> = found.iter().map(|f| f.1).collect();
    // By id: a hit the database no longer has (the index behind it) is left out, and the
    // others keep their own records.
    let mut records: std::collections::HashMap<i64, whorl::library::HitRecord> = lib
        .hit_records(&ids)?
        .into_iter()
        .map(|r| (r.id, r))
        .collect();
    let rows: Vec<Found> = found
        .iter()
        .filter_map(|&(relevance, id)| records.remove(&id).map(|r| (relevance, r)))
        .map(|(relevance, r)| Found {
            relevance,
            spectrum_id: r.id,
            compound_id: r.compound_id,
            technique: r.technique.to_string(),
            status: r.status.to_string(),
            name: r.metadata.name,
            formula: r.metadata.formula,
            cas: r.metadata.cas,
        })
        .collect();
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
