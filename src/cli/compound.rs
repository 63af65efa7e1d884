//! `whorl compound`: the compounds spectra belong to: list, show, and merge two compound rows
//! that are one substance.

use std::io::Write;
use std::process::ExitCode;

use clap::{Args, Subcommand};

use super::output::{self, json};
use super::{Context, identity};

#[derive(Debug, Args)]
pub struct CompoundArgs {
    #[command(subcommand)]
    pub command: CompoundCommand,
}

#[derive(Debug, Subcommand)]
pub enum CompoundCommand {
    /// List the compounds with their ids, keys and spectra
    List {
        /// Print the compounds as JSON (errors too)
        #[arg(long)]
        json: bool,
    },
    /// Show one compound: key, name, formula, CAS RN, spectra, and compounds of the same name
    Show {
        /// Compound id
        id: i64,
        /// Print the compound as JSON (errors too)
        #[arg(long)]
        json: bool,
    },
    /// Move every spectrum of compound FROM to compound INTO, recorded in the audit trail
    Merge {
        /// The compound merged away
        from: i64,
        /// The compound its spectra go to
        into: i64,
        /// Why the two are one substance (recorded in the audit trail)
        #[arg(long, required = true)]
        reason: String,
        /// Merge although the two formulas on record differ (one of them is wrong); say which
        /// and why in --reason
        #[arg(long)]
        formulas_differ: bool,
        /// Who merges them [default: $WHORL_USER, else the OS user]
        #[arg(long, value_name = "WHO")]
        by: Option<String>,
        /// Print the result as JSON (errors too)
        #[arg(long)]
        json: bool,
    },
}

pub fn run(args: CompoundArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut out = std::io::stdout().lock();
    match args.command {
        CompoundCommand::List { json: as_json } => {
            let lib = ctx.open()?;
            let compounds = lib.compounds()?;
            if as_json {
                json(&mut out, &compounds)?;
                return Ok(ExitCode::SUCCESS);
            }
            let mut t =
                output::Table::new(&[">id", "name", "formula", "key", ">spectra", "merged into"]);
            for c in &compounds {
                t.row(vec![
                    c.id.to_string(),
                    c.name.clone(),
                    c.formula.clone().unwrap_or_default(),
                    c.key.clone(),
                    c.spectra.len().to_string(),
                    c.merged_into.map(|i| i.to_string()).unwrap_or_default(),
                ]);
            }
            t.write(&mut out)?;
        }
        CompoundCommand::Show { id, json: as_json } => {
            let lib = ctx.open()?;
            let c = lib.compound(id)?;
            let alike = lib.compounds_named_alike(id)?;
            if as_json {
                let mut v = serde_json::to_value(&c)?;
                v["same_name"] = serde_json::to_value(&alike)?;
                json(&mut out, &v)?;
                return Ok(ExitCode::SUCCESS);
            }
            let ids = |v: &[i64]| {
                if v.is_empty() {
                    "none".to_string()
                } else {
                    v.iter().map(i64::to_string).collect::<Vec<_>>().join(", ")
                }
            };
            writeln!(out, "compound {}: {}", c.id, output::terminal_text(&c.name))?;
            writeln!(out, "key:        {}", output::terminal_text(&c.key))?;
            if let Some(f) = &c.formula {
                writeln!(out, "formula:    {}", output::terminal_text(f))?;
            }
            if let Some(cas) = &c.cas {
                writeln!(out, "CAS RN:     {}", output::terminal_text(cas))?;
            }
            writeln!(out, "created:    {}", c.created_at)?;
            if let Some(to) = c.merged_into {
                writeln!(out, "merged into compound {to}")?;
            }
            writeln!(out, "spectra:    {}", ids(&c.spectra))?;
            if !alike.is_empty() {
                writeln!(out, "same name:  compound {}", ids(&alike))?;
            }
        }
        CompoundCommand::Merge {
            from,
            into,
            reason,
            formulas_differ,
            by,
            json: as_json,
        } => {
            let mut lib = ctx.open()?;
            let merge = lib.merge_compounds(
                from,
                into,
                &identity(by.as_deref())?,
                &reason,
                formulas_differ,
            )?;
            if as_json {
                json(&mut out, &merge)?;
            } else {
                writeln!(
                    out,
                    "compound {from} merged into compound {into}: {} spectr{} moved (event {}): {}",
                    merge.spectra.len(),
                    if merge.spectra.len() == 1 { "um" } else { "a" },
                    merge.event,
                    output::terminal_text(&merge.reason)
                )?;
            }
        }
    }
    Ok(ExitCode::SUCCESS)
}
