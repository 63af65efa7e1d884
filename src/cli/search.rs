//! `whorl search`: rank library spectra against an unknown.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Context as _;
use clap::Args;
use whorl::prepare::Solvent;
use whorl::search::{Given, Request, Unknown, search_file};
use whorl::spectrum::{XUnit, YUnit};
use whorl::technique::Technique;

use super::hits::{csv_field, print_report_styled, write_csv};
use super::options::{ConstraintArgs, ScoringArgs};
use super::{Context, mixture, output};

#[derive(Debug, Args)]
pub struct SearchArgs {
    /// The unknown's spectrum file; several files are searched together, one hit list each
    #[arg(required_unless_present = "batch")]
    pub unknown: Vec<PathBuf>,
    /// Also search every file in DIR (sorted by name), together with any files given
    #[arg(long, value_name = "DIR")]
    pub batch: Option<PathBuf>,
    /// ir, raman, ms-ei, nmr-1h or nmr-13c
    #[arg(long, short)]
    pub technique: Technique,
    /// Number of hits to list [default: from whorl.toml, else 10]
    #[arg(long, short = 'n')]
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
    #[command(flatten)]
    pub scoring: ScoringArgs,
    #[command(flatten)]
    pub constraints: ConstraintArgs,
    /// List the candidates the query or the constraints ruled out, with the reason
    #[arg(long)]
    pub explain: bool,
    /// Also search pending (not yet reviewed) spectra
    #[arg(long)]
    pub include_pending: bool,
    /// Save the search record (unknown's hash, parameters, state hash, hits) for `whorl replay`
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
    /// The sample or case id the HTML report is for (printed in its case section)
    #[arg(long, value_name = "ID", requires = "html")]
    pub sample: Option<String>,
    /// The analyst named in the HTML report's case section
    #[arg(long, value_name = "NAME", requires = "html")]
    pub analyst: Option<String>,
    /// Also fit the unknown as a non-negative mixture of up to N library spectra (2 to 5),
    /// each further one found by searching what the ones before leave unexplained, and list
    /// them after the hit list (with --csv as a second table after a blank line; with --json
    /// under "mixture"). When a second spectrum explains clearly more than the best hit
    /// alone, the verdict is "possibly a mixture". Not for nmr-13c
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u8).range(2..=5))]
    pub components: Option<u8>,
}

pub fn run(args: SearchArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let config = ctx.config()?;
    let given = Given {
        params: Some(args.scoring.params(args.technique)?),
        peak_tolerance: args.scoring.tolerance,
        top: args.top,
        solvent: args.solvent,
    };
    let mut request = Request::resolve(args.technique, &given, &config);
    request.filter = args.filter.clone();
    request.constraints = args.constraints.constraints()?;
    request.explain = args.explain;
    if args.include_pending {
        request.statuses.push(whorl::library::Status::Pending);
    }
    let mut files = args.unknown.clone();
    if let Some(dir) = &args.batch {
        files.extend(batch_files(dir)?);
    }
    let unknowns: Vec<Unknown> = files
        .into_iter()
        .map(|file| Unknown {
            technique: args.technique,
            file,
            x_unit: args.x_unit,
            y_unit: args.y_unit,
            solvent: request.solvent,
        })
        .collect();
    if unknowns.len() != 1 {
        return run_many(&args, &lib, &unknowns, &request, ctx);
    }
    let (mut report, unknown) = search_file(&lib, &unknowns[0], &request)?;
    let mixture = match args.components {
        Some(n) => Some(mixture::fit(&lib, &report, &unknown, &request, n.into())?),
        None => None,
    };
    // A fit that needed a second component ends the hit list in "possibly a mixture",
    // whatever the single best hit would have come to.
    if let Some(verdict) = mixture.as_ref().and_then(whorl::search::Mixture::verdict) {
        report.verdict = Some(verdict);
    }
    if let Some(path) = &args.save {
        // The record keeps the unknown's raw points, so that it replays without the file.
        let mut record = report.clone();
        whorl::search::keep_points(&mut record)?;
        let text = serde_json::to_string_pretty(&record)? + "\n";
        std::fs::write(path, text)
            .map_err(|e| whorl::Error::io(format!("writing {}", path.display()), e))?;
    }
    if let Some(path) = &args.html {
        let references = whorl::search::references(&lib, &report, config.report.plots)?;
        let provenance = whorl::search::provenance(&lib, &report.hits)?;
        let html = whorl::report::search_page_for_case(
            &whorl::report::Query {
                report: &report,
                unknown: &unknown,
                references: &references,
            },
            &whorl::report::Case {
                sample: args.sample.as_deref(),
                analyst: args.analyst.as_deref(),
                provenance: &provenance,
            },
        )?;
        std::fs::write(path, html)
            .with_context(|| format!("writing the HTML report to {}", path.display()))?;
        eprintln!("report written to {}", path.display());
    }
    let mut out = std::io::stdout().lock();
    if args.json {
        match &mixture {
            Some(m) => output::json(&mut out, &mixture::with_report(&report, m)?)?,
            None => output::json(&mut out, &report)?,
        }
    } else if args.csv {
        write_csv(&mut out, &report)?;
        if let Some(m) = &mixture {
            writeln!(out)?;
            mixture::write_csv(&mut out, m)?;
        }
    } else {
        print_report_styled(&mut out, &report, ctx.paint)?;
        if let Some(m) = &mixture {
            writeln!(out)?;
            mixture::print(&mut out, m, report.unknown.technique)?;
        }
    }
    Ok(ExitCode::SUCCESS)
}

/// The files of a batch folder, sorted by name (hidden files skipped).
fn batch_files(dir: &std::path::Path) -> anyhow::Result<Vec<PathBuf>> {
    // A missing or unreadable folder is the user's input, not a failure of whorl (exit 3).
    if !dir.is_dir() {
        let reason = if dir.exists() {
            format!("the batch folder {} is not a folder", dir.display())
        } else {
            format!("the batch folder {} does not exist", dir.display())
        };
        return Err(whorl::Error::invalid(
            reason,
            "give --batch a folder holding the unknowns' spectrum files, or give the files themselves",
        )
        .into());
    }
    let entries = std::fs::read_dir(dir).map_err(|e| {
        whorl::Error::invalid(
            format!("the batch folder {} cannot be read: {e}", dir.display()),
            "check the folder's permissions, or give the files themselves",
        )
    })?;
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

/// Several unknowns searched together: one hit list each (JSON lines with `--json`). An
/// unknown that cannot be read or prepared does not stop the others: its error takes its
/// place (a JSON line `{"unknown", "error"}`, a CSV row with the `error` column filled, an
/// error paragraph), and the command exits with the input status at the end.
fn run_many(
    args: &SearchArgs,
    lib: &whorl::library::Library,
    unknowns: &[Unknown],
    request: &Request,
    ctx: &Context,
) -> anyhow::Result<ExitCode> {
    if args.save.is_some() || args.html.is_some() || args.components.is_some() {
        return Err(whorl::Error::invalid(
            "--save, --html and --components take one unknown",
            "search the unknowns one at a time to save, plot or fit each",
        )
        .into());
    }
    let results = whorl::search::search_files_each(lib, unknowns, request)?;
    let mut out = std::io::stdout().lock();
    let mut csv_header: Option<String> = None;
    let mut failed = 0;
    for (i, (unknown, result)) in unknowns.iter().zip(results).enumerate() {
        let report = match result {
            Ok(report) => report,
            Err(e) => {
                failed += 1;
                let file = unknown.file.display().to_string();
                let error = super::failure::JsonError::from_error(&anyhow::Error::from(e));
                if args.json {
                    serde_json::to_writer(
                        &mut out,
                        &serde_json::json!({ "unknown": file, "error": error }),
                    )?;
                    writeln!(out)?;
                } else if args.csv {
                    let header = match &csv_header {
                        Some(h) => h.clone(),
                        None => {
                            let h = csv_header_of(super::hits::CSV_COLUMNS.join(","));
                            writeln!(out, "{h}")?;
                            csv_header = Some(h.clone());
                            h
                        }
                    };
                    let blanks = header.split(',').count() - 2;
                    writeln!(
                        out,
                        "{},{}{}",
                        csv_field(&file),
                        csv_field(&format!("{} (hint: {})", error.message, error.hint)),
                        ",".repeat(blanks)
                    )?;
                } else {
                    if i > 0 {
                        writeln!(out)?;
                    }
                    writeln!(out, "unknown   {}", output::terminal_text(&file))?;
                    writeln!(out, "error     {}", output::terminal_text(&error.message))?;
                    writeln!(out, "hint      {}", output::terminal_text(&error.hint))?;
                }
                continue;
            }
        };
        if args.json {
            serde_json::to_writer(&mut out, &report)?;
            writeln!(out)?;
        } else if args.csv {
            let mut buf = Vec::new();
            write_csv(&mut buf, &report)?;
            let text = String::from_utf8(buf)?;
            let mut lines = text.lines();
            let header = lines.next().unwrap_or_default();
            if csv_header.is_none() {
                let h = csv_header_of(header.to_string());
                writeln!(out, "{h}")?;
                csv_header = Some(h);
            }
            for l in lines {
                writeln!(out, "{},,{l}", csv_field(&report.unknown.file))?;
            }
        } else {
            if i > 0 {
                writeln!(out)?;
            }
            print_report_styled(&mut out, &report, ctx.paint)?;
        }
    }
    if failed > 0 {
        let message = format!(
            "{failed} of {} unknowns could not be searched (their errors are in the output, in their places)",
            unknowns.len()
        );
        let hint = "correct or remove those files and search them again";
        if args.json {
            let error = super::failure::JsonError {
                kind: "input",
                message,
                hint: hint.into(),
                file: None,
                line: None,
                exit_code: super::EXIT_INPUT,
            };
            eprintln!("{}", error.line());
        } else {
            eprintln!("error: {message}\n  hint: {hint}");
        }
        return Ok(ExitCode::from(super::EXIT_INPUT));
    }
    Ok(ExitCode::SUCCESS)
}

/// The batch CSV header: the unknown and its error before the columns of one hit list.
fn csv_header_of(hit_list_header: String) -> String {
    format!("unknown,error,{hit_list_header}")
}
