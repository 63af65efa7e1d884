//! `whorl fragments`: the sub-formulas of a formula at given nominal m/z values.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use serde_json::json;
use whorl::chem::{nominal_mass, parse_formula, parse_mz_list, sub_formulas};

use super::formula::format_ihd;
use super::{Context, output};

#[derive(Debug, Args)]
pub struct FragmentsArgs {
    /// Molecular formula, e.g. C3H6O
    pub formula: String,
    /// Nominal m/z values, comma-separated, e.g. 15,29,43
    #[arg(long, value_name = "LIST")]
    pub mz: String,
    /// Print as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: FragmentsArgs, _ctx: &Context) -> anyhow::Result<ExitCode> {
    let formula = parse_formula(&args.formula)?;
    let mzs = parse_mz_list(&args.mz)?;
    let nominal = nominal_mass(&formula)?;
    let found = mzs
        .iter()
        .map(|&mz| Ok((mz, sub_formulas(&formula, mz)?)))
        .collect::<whorl::Result<Vec<_>>>()?;
    let mut out = std::io::stdout().lock();
    if args.json {
        let peaks: Vec<_> = found
            .iter()
            .map(|(mz, fragments)| json!({"mz": mz, "fragments": fragments}))
            .collect();
        output::json(
            &mut out,
            &json!({"formula": formula.to_string(), "nominal_mass": nominal, "peaks": peaks}),
        )?;
        return Ok(ExitCode::SUCCESS);
    }
    writeln!(out, "formula {formula}  (nominal mass {nominal})")?;
    let mut t = output::Table::new(&[
        ">m/z",
        "sub-formula",
        ">monoisotopic",
        ">cation m/z",
        ">IHD",
    ]);
    for (mz, fragments) in &found {
        if fragments.is_empty() {
            t.row(vec![
                mz.to_string(),
                "(none)".into(),
                String::new(),
                String::new(),
                String::new(),
            ]);
        }
        for f in fragments {
            t.row(vec![
                mz.to_string(),
                f.formula.clone(),
                format!("{:.6}", f.monoisotopic_mass),
                format!("{:.6}", f.cation_mz),
                format_ihd(f.ihd),
            ]);
        }
    }
    t.write(&mut out)?;
    Ok(ExitCode::SUCCESS)
}
