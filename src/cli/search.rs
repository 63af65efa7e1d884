//! `whorl search`: rank library spectra against an unknown.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;
use whorl::prepare::Solvent;
use whorl::score::Measure;
use whorl::search::{Report, Request, run_search};
use whorl::spectrum::{XUnit, YUnit};
use whorl::technique::Technique;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct SearchArgs {
    /// The unknown's spectrum file
    pub unknown: PathBuf,
    /// ir, raman, ms-ei or nmr-1h
    #[arg(long, short)]
    pub technique: Technique,
    /// Number of hits to list
    #[arg(long, default_value_t = 10)]
    pub top: usize,
    /// Metadata query restricting the candidates, e.g. 'tag:solvent AND formula:C7H8'
    #[arg(long = "where", value_name = "QUERY")]
    pub filter: Option<String>,
    /// NMR solvent of the unknown, e.g. CDCl3
    #[arg(long)]
    pub solvent: Option<Solvent>,
    /// y unit of the unknown (detected for IR when not given)
    #[arg(long)]
    pub y_unit: Option<YUnit>,
    /// x unit for IR files given as wavelength: um or nm
    #[arg(long)]
    pub x_unit: Option<XUnit>,
    /// Also search pending (not yet reviewed) spectra
    #[arg(long)]
    pub include_pending: bool,
    /// Save the search record (unknown's hash, parameters, fingerprint, hits) for `whorl replay`
    #[arg(long, value_name = "FILE")]
    pub save: Option<PathBuf>,
    /// Print the full report as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: SearchArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let mut request = Request::new(args.technique);
    request.top = args.top.max(1);
    request.filter = args.filter.clone();
    if args.include_pending {
        request.statuses.push(whorl::library::Status::Pending);
    }
    let report = run_search(
        &lib,
        &args.unknown,
        args.x_unit,
        args.y_unit,
        args.solvent,
        &request,
    )?;
    if let Some(path) = &args.save {
        let text = serde_json::to_string_pretty(&report)? + "\n";
        std::fs::write(path, text)
            .map_err(|e| whorl::Error::io(format!("writing {}", path.display()), e))?;
    }
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &report)?;
    } else {
        print_report(&mut out, &report)?;
    }
    Ok(ExitCode::SUCCESS)
}

fn measure_label(m: Measure) -> &'static str {
    match m {
        Measure::Cosine => "cosine",
        Measure::Correlation => "corr",
        Measure::Composite => "composite",
    }
}

/// Prints a hit list for people; shared with `demo`.
pub fn print_report(out: &mut impl Write, r: &Report) -> anyhow::Result<()> {
    let p = &r.parameters.score;
    writeln!(
        out,
        "unknown   {}  ({}, sha256 {})",
        r.unknown.file,
        r.unknown.technique,
        output::short(&r.unknown.sha256)
    )?;
    writeln!(
        out,
        "library   {}  (fingerprint {})",
        r.library.path,
        output::short(&r.library.fingerprint)
    )?;
    let filter = r
        .parameters
        .filter
        .as_deref()
        .map(|q| format!(", where {q}"))
        .unwrap_or_default();
    writeln!(
        out,
        "ranking   {:.2} x {} + {:.2} x peak overlap (tolerance {}); {} spectra compared{filter}",
        p.spectral_weight,
        measure_label(p.measure),
        1.0 - p.spectral_weight,
        p.peak_tolerance,
        r.candidates
    )?;
    writeln!(out)?;
    // The ranking measure, then one other whole-spectrum measure for comparison.
    let spectral = measure_label(p.measure);
    let second = if p.measure == Measure::Cosine {
        "corr"
    } else {
        "cosine"
    };
    let mut t = output::Table::new(&[
        ">rank",
        ">score",
        &format!(">{spectral}"),
        &format!(">{second}"),
        ">peaks",
        "compound",
        "formula",
        ">id",
        "status",
    ]);
    for h in &r.hits {
        let o = &h.components.peak_overlap;
        let c = &h.components;
        let other = if p.measure == Measure::Cosine {
            c.correlation.unwrap_or(c.cosine)
        } else {
            c.cosine
        };
        t.row(vec![
            h.rank.to_string(),
            format!("{:.3}", h.score),
            format!("{:.3}", c.spectral),
            format!("{other:.3}"),
            format!("{}/{}", o.matched, o.reference_peaks),
            h.name.clone(),
            h.formula.clone().unwrap_or_default(),
            h.spectrum_id.to_string(),
            h.status.to_string(),
        ]);
    }
    t.write(out)?;
    writeln!(out)?;
    if let Some(m) = r.margin {
        writeln!(
            out,
            "margin    {m:.3} between hits 1 and 2   (peaks = matched / reference peaks)"
        )?;
    }
    for w in &r.warnings {
        writeln!(out, "warning   {w}")?;
    }
    writeln!(out, "caution   {}", r.caution)?;
    Ok(())
}
