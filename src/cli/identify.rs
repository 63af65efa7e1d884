//! `whorl identify`: search unknowns of several techniques and fuse the evidence per compound.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;
use whorl::prepare::Solvent;
use whorl::search::{
    Identification, IdentifyOptions, IdentifyReport, Unknown, identify_with_searches,
};
use whorl::spectrum::{XUnit, YUnit};
use whorl::technique::Technique;

use super::hits::constraint_summary;
use super::options::ConstraintArgs;
use super::{Context, output};

#[derive(Debug, Args)]
pub struct IdentifyArgs {
    /// IR spectrum of the unknown
    #[arg(long, value_name = "FILE")]
    pub ir: Option<PathBuf>,
    /// Raman spectrum of the unknown
    #[arg(long, value_name = "FILE")]
    pub raman: Option<PathBuf>,
    /// EI mass spectrum of the unknown
    #[arg(long = "ms-ei", value_name = "FILE")]
    pub ms_ei: Option<PathBuf>,
    /// 1H NMR spectrum of the unknown
    #[arg(long = "nmr-1h", value_name = "FILE")]
    pub nmr_1h: Option<PathBuf>,
    /// 13C NMR peak list of the unknown
    #[arg(long = "nmr-13c", value_name = "FILE")]
    pub nmr_13c: Option<PathBuf>,
    /// NMR solvent of the unknown (both NMR files), e.g. CDCl3
    #[arg(long)]
    pub solvent: Option<Solvent>,
    /// y unit of the IR file (detected when not given)
    #[arg(long, value_name = "UNIT")]
    pub ir_y_unit: Option<YUnit>,
    /// x unit of the IR file when given as wavelength: um or nm
    #[arg(long, value_name = "UNIT")]
    pub ir_x_unit: Option<XUnit>,
    /// Number of compounds to list [default: `[search] top` of whorl.toml, else 10]
    #[arg(long, short = 'n')]
    pub top: Option<usize>,
    #[command(flatten)]
    pub constraints: ConstraintArgs,
    /// Print the full report as JSON
    #[arg(long)]
    pub json: bool,
    /// Also write a self-contained HTML report: the fused list, then each technique's hit list
    /// with overlays of the unknown on its top hits
    #[arg(long, value_name = "FILE")]
    pub html: Option<PathBuf>,
    /// The sample or case id the HTML report is for (printed in its case section, with the
    /// provenance of every technique's hits)
    #[arg(long, value_name = "ID", requires = "html")]
    pub sample: Option<String>,
    /// The analyst named in the HTML report's case section
    #[arg(long, value_name = "NAME", requires = "html")]
    pub analyst: Option<String>,
}

impl IdentifyArgs {
    fn unknowns(&self) -> Vec<Unknown> {
        let given = [
            (Technique::Ir, &self.ir),
            (Technique::Raman, &self.raman),
            (Technique::MsEi, &self.ms_ei),
            (Technique::Nmr1h, &self.nmr_1h),
            (Technique::Nmr13c, &self.nmr_13c),
        ];
        given
            .into_iter()
            .filter_map(|(technique, file)| {
                file.as_ref().map(|f| Unknown {
                    technique,
                    file: f.clone(),
                    x_unit: (technique == Technique::Ir)
                        .then_some(self.ir_x_unit)
                        .flatten(),
                    y_unit: (technique == Technique::Ir)
                        .then_some(self.ir_y_unit)
                        .flatten(),
                    solvent: technique.is_nmr().then_some(self.solvent).flatten(),
                })
            })
            .collect()
    }
}

pub fn run(args: IdentifyArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let config = ctx.config()?;
    let mut unknowns = args.unknowns();
    for u in &mut unknowns {
        if u.technique.is_nmr() && u.solvent.is_none() {
            u.solvent = config.solvent(u.technique);
        }
    }
    let lib = ctx.open()?;
    let options = IdentifyOptions {
        constraints: args.constraints.constraints()?,
        top: args.top.unwrap_or(config.search.top).max(1),
        policy: config.identity,
        config: &config,
    };
    // One search per unknown: the HTML report's sections are the same searches.
    let found = identify_with_searches(&lib, &unknowns, &options)?;
    if let Some(path) = &args.html {
        let case = (args.sample.as_deref(), args.analyst.as_deref());
        write_html(&lib, &found, config.report.plots, case, path)?;
        eprintln!("report written to {}", output::shown(path.display()));
    }
    let report = found.report;
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &report)?;
    } else {
        print_identify(&mut out, &report)?;
    }
    Ok(ExitCode::SUCCESS)
}

/// Writes the HTML report: the fused list, then each technique's own search (the hit list
/// `identify` fused, cut to the fused list's length) with overlays of its prepared unknown.
fn write_html(
    lib: &whorl::library::Library,
    found: &Identification,
    plots: usize,
    (sample, analyst): (Option<&str>, Option<&str>),
    path: &std::path::Path,
) -> anyhow::Result<()> {
    let mut runs = Vec::with_capacity(found.searches.len());
    let mut provenance = Vec::with_capacity(found.searches.len());
    for (r, prepared) in &found.searches {
        let refs = whorl::search::references(lib, r, plots)?;
        runs.push((r, prepared, refs));
        provenance.push(whorl::search::provenance(lib, &r.hits)?);
    }
    let queries: Vec<whorl::report::Query<'_>> = runs
        .iter()
        .map(|(r, p, refs)| whorl::report::Query {
            report: r,
            unknown: p,
            references: refs,
        })
        .collect();
    // As in `search --html`: the case section, with every hit's provenance, always comes.
    let case = whorl::report::IdentifyCase {
        sample,
        analyst,
        provenance: &provenance,
    };
    let html = whorl::report::identify_page(&found.report, &queries, Some(&case))?;
    std::fs::write(path, html).map_err(|e| {
        whorl::Error::io(format!("writing the HTML report to {}", path.display()), e)
    })?;
    Ok(())
}

/// Prints a fused list for people.
pub fn print_identify(out: &mut impl Write, r: &IdentifyReport) -> anyhow::Result<()> {
    writeln!(
        out,
        "library   {}  (state hash {})",
        output::shown(&r.library.path),
        output::short(&r.library.state_hash)
    )?;
    for run in &r.runs {
        let u = &run.unknown;
        let solvent = u
            .solvent
            .as_deref()
            .map(|s| format!(", in {s}"))
            .unwrap_or_default();
        writeln!(
            out,
            "unknown   {:<8} {}  (sha256 {}{solvent}; {} spectra compared)",
            u.technique.name(),
            output::shown(&u.file),
            output::short(&u.sha256),
            run.candidates
        )?;
    }
    if let Some(c) = r
        .runs
        .first()
        .and_then(|run| constraint_summary(&run.parameters.constraints))
    {
        writeln!(out, "constraints {}", output::shown(c))?;
    }
    writeln!(out, "fused     {}", output::shown(&r.fusion.rule))?;
    writeln!(out)?;
    let mut headers: Vec<String> = vec![">rank".into(), ">fused".into()];
    headers.extend(r.fusion.techniques.iter().map(|t| format!(">{t}")));
    headers.extend(["compound".to_string(), "formula".to_string()]);
    let header_refs: Vec<&str> = headers.iter().map(String::as_str).collect();
    let mut t = output::Table::new(&header_refs);
    for c in &r.fusion.compounds {
        let mut row = vec![c.rank.to_string(), format!("{:.3}", c.fused)];
        for e in &c.evidence {
            row.push(match (e.score, e.rank) {
                (Some(s), Some(k)) => format!("{s:.3} #{k}"),
                _ => "no ref".to_string(),
            });
        }
        row.push(c.name.clone());
        row.push(c.formula.clone().unwrap_or_default());
        t.row(row);
    }
    t.write(out)?;
    writeln!(out)?;
    writeln!(
        out,
        "          (per technique: combined score #rank among compounds; no ref = the library has no spectrum of the compound for it, counted 0)"
    )?;
    for c in &r.fusion.compounds {
        for d in &c.disagreements {
            writeln!(
                out,
                "disagree  {} ({}): {}",
                output::shown(&c.name),
                c.rank,
                output::shown(d)
            )?;
        }
    }
    if let Some(m) = r.fusion.margin {
        writeln!(out, "margin    {m:.3} between compounds 1 and 2")?;
    }
    for w in &r.fusion.warnings {
        writeln!(out, "warning   {}", output::shown(w))?;
    }
    for run in &r.runs {
        for w in &run.warnings {
            writeln!(
                out,
                "warning   {}: {}",
                run.unknown.technique,
                output::shown(w)
            )?;
        }
    }
    writeln!(out, "criteria  {}", output::shown(r.policy.summary()))?;
    writeln!(out, "caution   {}", r.caution)?;
    Ok(())
}
