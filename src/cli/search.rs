//! `whorl search`: rank library spectra against an unknown.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Context as _;
use clap::Args;
use whorl::prepare::Solvent;
use whorl::score::Measure;
use whorl::search::{Report, Request, search_file};
use whorl::spectrum::{XUnit, YUnit};
use whorl::technique::Technique;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct SearchArgs {
    /// The unknown's spectrum file; several files are searched together, one hit list each
    #[arg(required_unless_present = "batch")]
    pub unknown: Vec<PathBuf>,
    /// Also search every file in DIR (sorted by name), together with any files given
    #[arg(long, value_name = "DIR")]
    pub batch: Option<PathBuf>,
    /// ir, raman, ms-ei or nmr-1h
    #[arg(long, short)]
    pub technique: Technique,
    /// Number of hits to list [default: from whorl.toml, else 10]
    #[arg(long)]
    pub top: Option<usize>,
    /// Metadata query restricting the candidates, e.g. 'tag:solvent AND formula:C7H8'
    #[arg(long = "where", value_name = "QUERY")]
    pub filter: Option<String>,
    /// NMR solvent of the unknown, e.g. CDCl3 [default: from whorl.toml]
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
    #[arg(long, conflicts_with = "csv")]
    pub json: bool,
    /// Print the hit list as CSV
    #[arg(long)]
    pub csv: bool,
    /// Also write a self-contained HTML report with overlay plots to FILE
    #[arg(long, value_name = "FILE")]
    pub html: Option<PathBuf>,
}

pub fn run(args: SearchArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let config = ctx.config()?;
    let mut request = Request::new(args.technique);
    config.apply(&mut request);
    request.top = args.top.unwrap_or(config.top(args.technique)).max(1);
    request.filter = args.filter.clone();
    if args.include_pending {
        request.statuses.push(whorl::library::Status::Pending);
    }
    let solvent = args.solvent.or(config.solvent(args.technique));
    let mut files = args.unknown.clone();
    if let Some(dir) = &args.batch {
        files.extend(batch_files(dir)?);
    }
    if files.len() != 1 {
        return run_many(&args, &lib, &files, solvent, &request, ctx);
    }
    let (report, unknown) =
        search_file(&lib, &files[0], args.x_unit, args.y_unit, solvent, &request)?;
    if let Some(path) = &args.save {
        let text = serde_json::to_string_pretty(&report)? + "\n";
        std::fs::write(path, text)
            .map_err(|e| whorl::Error::io(format!("writing {}", path.display()), e))?;
    }
    if let Some(path) = &args.html {
        let references = whorl::report::references(&lib, &report, config.report.plots)?;
        let html = whorl::report::search_page(&whorl::report::Query {
            report: &report,
            unknown: &unknown,
            references: &references,
        })?;
        std::fs::write(path, html)
            .with_context(|| format!("writing the HTML report to {}", path.display()))?;
        eprintln!("report written to {}", path.display());
    }
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &report)?;
    } else if args.csv {
        write_csv(&mut out, &report)?;
    } else {
        print_report_styled(&mut out, &report, ctx.paint)?;
    }
    Ok(ExitCode::SUCCESS)
}

/// The files of a batch folder, sorted by name (hidden files skipped).
fn batch_files(dir: &std::path::Path) -> anyhow::Result<Vec<PathBuf>> {
    let entries = std::fs::read_dir(dir)
        .map_err(|e| whorl::Error::io(format!("reading the batch folder {}", dir.display()), e))?;
    let mut files = Vec::new();
    for e in entries {
        let e = e.map_err(|e| whorl::Error::io(format!("reading {}", dir.display()), e))?;
        let name = e.file_name();
        if e.path().is_file() && !name.to_string_lossy().starts_with('.') {
            files.push(e.path());
        }
    }
    files.sort();
    if files.is_empty() {
        return Err(whorl::Error::invalid(
            format!("the batch folder {} holds no files", dir.display()),
            "put the unknowns' spectrum files in it, or give the files themselves",
        )
        .into());
    }
    Ok(files)
}

/// Several unknowns searched together: one hit list each (JSON lines with `--json`).
fn run_many(
    args: &SearchArgs,
    lib: &whorl::library::Library,
    files: &[PathBuf],
    solvent: Option<Solvent>,
    request: &Request,
    ctx: &Context,
) -> anyhow::Result<ExitCode> {
    if args.save.is_some() || args.html.is_some() {
        return Err(whorl::Error::invalid(
            "--save and --html take one unknown",
            "search the unknowns one at a time to save or plot each",
        )
        .into());
    }
    let reports =
        whorl::search::search_files(lib, files, args.x_unit, args.y_unit, solvent, request)?;
    let mut out = std::io::stdout().lock();
    let mut csv_header = true;
    for (i, report) in reports.iter().enumerate() {
        if args.json {
            serde_json::to_writer(&mut out, report)?;
            writeln!(out)?;
        } else if args.csv {
            let mut buf = Vec::new();
            write_csv(&mut buf, report)?;
            let text = String::from_utf8(buf)?;
            let mut lines = text.lines();
            let header = lines.next().unwrap_or_default();
            if csv_header {
                writeln!(out, "unknown,{header}")?;
                csv_header = false;
            }
            for l in lines {
                writeln!(out, "{},{l}", csv_field(&report.unknown.file))?;
            }
        } else {
            if i > 0 {
                writeln!(out)?;
            }
            print_report_styled(&mut out, report, ctx.paint)?;
        }
    }
    Ok(ExitCode::SUCCESS)
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// The hit list as CSV: one row per hit, every score component in its own column.
pub fn write_csv(out: &mut impl Write, r: &Report) -> anyhow::Result<()> {
    let mut w = csv::Writer::from_writer(out);
    w.write_record([
        "rank",
        "score",
        "measure",
        "spectral",
        "cosine",
        "correlation",
        "composite",
        "peaks_matched",
        "unknown_peaks",
        "reference_peaks",
        "peak_jaccard",
        "name",
        "formula",
        "cas",
        "spectrum_id",
        "compound_id",
        "technique",
        "status",
    ])?;
    let opt = |v: Option<f64>| v.map(|v| format!("{v:.6}")).unwrap_or_default();
    for h in &r.hits {
        let c = &h.components;
        let o = &c.peak_overlap;
        w.write_record([
            h.rank.to_string(),
            format!("{:.6}", h.score),
            measure_label(r.parameters.score.measure).to_string(),
            format!("{:.6}", c.spectral),
            format!("{:.6}", c.cosine),
            opt(c.correlation),
            opt(c.composite.as_ref().map(|x| x.composite)),
            o.matched.to_string(),
            o.unknown_peaks.to_string(),
            o.reference_peaks.to_string(),
            format!("{:.6}", o.jaccard),
            h.name.clone(),
            h.formula.clone().unwrap_or_default(),
            h.cas.clone().unwrap_or_default(),
            h.spectrum_id.to_string(),
            h.compound_id.to_string(),
            h.technique.to_string(),
            h.status.to_string(),
        ])?;
    }
    w.flush()?;
    Ok(())
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
    print_report_styled(out, r, output::Paint::OFF)
}

/// [`print_report`] with colour: the first hit in bold, warnings in yellow.
pub fn print_report_styled(
    out: &mut impl Write,
    r: &Report,
    paint: output::Paint,
) -> anyhow::Result<()> {
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
    t.write_styled(out, paint, Some(0))?;
    writeln!(out)?;
    if let Some(m) = r.margin {
        writeln!(
            out,
            "margin    {m:.3} between hits 1 and 2   (peaks = matched / reference peaks)"
        )?;
    }
    for w in &r.warnings {
        writeln!(out, "{}   {w}", paint.warn("warning"))?;
    }
    writeln!(out, "caution   {}", r.caution)?;
    Ok(())
}
