//! `whorl search`: rank library spectra against an unknown.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Context as _;
use clap::Args;
use whorl::prepare::Solvent;
use whorl::score::{Measure, ScoreParams};
use whorl::search::{
    Constraints, Report, Request, RiWindow, parse_alkanes, retention_index, search_file,
};
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
    /// ir, raman, ms-ei, nmr-1h or nmr-13c
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

/// How hits are scored; every option defaults to the technique's documented default.
#[derive(Debug, Args)]
pub struct ScoringArgs {
    /// Ranking measure: correlation or derivative (IR, Raman), correlation (1H NMR),
    /// composite (EI-MS), shift-match (13C NMR), or cosine (every technique)
    #[arg(long, value_name = "M")]
    pub measure: Option<Measure>,
    /// Peak matching tolerance in the technique's x unit [default: IR/Raman 6 cm-1, MS 0.5,
    /// 1H 0.03 ppm, 13C 1.0 ppm]
    #[arg(long, value_name = "X")]
    pub tolerance: Option<f64>,
    /// EI-MS reverse search, the default: only m/z present in the reference count, so
    /// co-eluting and background ions in the unknown do not lower the score
    #[arg(long, conflicts_with = "forward")]
    pub reverse: bool,
    /// EI-MS forward search: every m/z of the unknown counts (the earlier default; see
    /// docs/evaluation.md)
    #[arg(long)]
    pub forward: bool,
    /// EI-MS: leave out ions below this m/z, in the unknown and the references
    #[arg(long, value_name = "MZ")]
    pub min_mz: Option<f64>,
    /// EI-MS: exponent of m/z in the peak weight [default: 3]
    #[arg(long, value_name = "N")]
    pub mz_exponent: Option<f64>,
    /// EI-MS: exponent of the abundance in the peak weight [default: 0.6]
    #[arg(long, value_name = "M")]
    pub intensity_exponent: Option<f64>,
    /// 13C NMR: match the shifts as given, without removing a common referencing offset
    #[arg(long)]
    pub no_referencing_correction: bool,
    /// 13C NMR: count every reference line the unknown lacks in full, weak lines too
    #[arg(long)]
    pub no_weak_line_discount: bool,
    /// IR/Raman derivative measure: Savitzky-Golay window in points, odd [default: 11]
    #[arg(long, value_name = "N")]
    pub sg_window: Option<usize>,
    /// IR/Raman derivative measure: Savitzky-Golay polynomial order [default: 2]
    #[arg(long, value_name = "N")]
    pub sg_order: Option<usize>,
}

impl ScoringArgs {
    /// The score parameters for a technique: its defaults with these options applied.
    pub fn params(&self, technique: Technique) -> whorl::Result<ScoreParams> {
        let mut p = ScoreParams::default_for(technique);
        if let Some(m) = self.measure {
            p.measure = m;
        }
        if let Some(t) = self.tolerance {
            p.peak_tolerance = t;
        }
        let ms_only = [
            ("--reverse", self.reverse),
            ("--forward", self.forward),
            ("--min-mz", self.min_mz.is_some()),
            ("--mz-exponent", self.mz_exponent.is_some()),
            ("--intensity-exponent", self.intensity_exponent.is_some()),
        ];
        if technique != Technique::MsEi
            && let Some((flag, _)) = ms_only.iter().find(|(_, given)| *given)
        {
            return Err(whorl::Error::invalid(
                format!("{flag} applies to ms-ei searches, not {technique}"),
                "leave it out, or search an EI mass spectrum with --technique ms-ei",
            ));
        }
        let carbon_only = [
            (
                "--no-referencing-correction",
                self.no_referencing_correction,
            ),
            ("--no-weak-line-discount", self.no_weak_line_discount),
        ];
        if technique != Technique::Nmr13c
            && let Some((flag, _)) = carbon_only.iter().find(|(_, given)| *given)
        {
            return Err(whorl::Error::invalid(
                format!("{flag} applies to nmr-13c searches, not {technique}"),
                "leave it out, or search a 13C peak list with --technique nmr-13c",
            ));
        }
        if self.no_referencing_correction {
            p.referencing_correction = false;
        }
        if self.no_weak_line_discount {
            p.weak_line_discount = false;
        }
        if self.forward {
            p.composite.reverse = false;
        } else if self.reverse {
            p.composite.reverse = true;
        }
        p.min_mz = self.min_mz;
        if let Some(n) = self.mz_exponent {
            p.composite.mass_exponent = n;
        }
        if let Some(m) = self.intensity_exponent {
            p.composite.intensity_exponent = m;
        }
        if let Some(w) = self.sg_window {
            p.derivative.window = w;
        }
        if let Some(o) = self.sg_order {
            p.derivative.order = o;
        }
        p.validate(technique)?;
        Ok(p)
    }
}

/// Constraints on the hits; a hit that one rules out is excluded (listed with `--explain`).
#[derive(Debug, Args)]
pub struct ConstraintArgs {
    /// Only hits with exactly this formula, e.g. C7H8
    #[arg(long, value_name = "F")]
    pub formula: Option<String>,
    /// Only hits whose formula has this nominal molecular mass
    #[arg(long, value_name = "M")]
    pub mass: Option<u64>,
    /// Only hits whose formula has this index of hydrogen deficiency (rings + double bonds)
    #[arg(long, value_name = "N")]
    pub ihd: Option<f64>,
    /// Only hits whose formula uses just these elements, e.g. C,H,O
    #[arg(long, value_name = "LIST")]
    pub elements: Option<String>,
    /// Retention index of the unknown; hits need an `ri` within --ri-window
    #[arg(long, value_name = "VALUE", conflicts_with = "rt")]
    pub ri: Option<f64>,
    /// Retention time of the unknown, turned into a retention index with --alkanes
    #[arg(long, value_name = "T", requires = "alkanes")]
    pub rt: Option<f64>,
    /// n-alkane retention times for --rt, e.g. 9:8.20,10:10.60 (carbon number:time)
    #[arg(long, value_name = "LIST", requires = "rt")]
    pub alkanes: Option<String>,
    /// Half-width of the retention-index window. The default, 20 units, allows for the
    /// spread of published indices of one compound on one phase type between laboratories
    /// and temperature programmes (from memory: typically 10-20 units)
    #[arg(long, value_name = "W", default_value_t = 20.0)]
    pub ri_window: f64,
    /// Column phase of the retention index; hits' `ri_phase` must match
    #[arg(long, value_name = "PHASE")]
    pub ri_phase: Option<String>,
}

impl ConstraintArgs {
    /// The validated constraints.
    pub fn constraints(&self) -> whorl::Result<Constraints> {
        let mut c = Constraints::default();
        if let Some(f) = &self.formula {
            c = c.with_formula(f)?;
        }
        if let Some(e) = &self.elements {
            c = c.with_elements(e)?;
        }
        c.mass = self.mass;
        c.ihd = self.ihd;
        let ri = match (self.ri, self.rt, &self.alkanes) {
            (Some(v), _, _) => Some(v),
            (None, Some(t), Some(a)) => Some(retention_index(t, &parse_alkanes(a)?)?),
            _ => None,
        };
        if let Some(value) = ri {
            c.ri = Some(RiWindow {
                value,
                window: self.ri_window,
                phase: self.ri_phase.clone(),
            });
        } else if self.ri_phase.is_some() {
            return Err(whorl::Error::invalid(
                "--ri-phase needs a retention index",
                "give --ri VALUE (or --rt T --alkanes LIST) with it",
            ));
        }
        c.validate()?;
        Ok(c)
    }
}

pub fn run(args: SearchArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let config = ctx.config()?;
    let mut request = Request::new(args.technique);
    request.params = args.scoring.params(args.technique)?;
    // The library's whorl.toml sets defaults; options on the command line win over it.
    config.apply(&mut request);
    if let Some(t) = args.scoring.tolerance {
        request.params.peak_tolerance = t;
    }
    request.top = args.top.unwrap_or(config.top(args.technique)).max(1);
    request.filter = args.filter.clone();
    request.constraints = args.constraints.constraints()?;
    request.explain = args.explain;
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
            r.parameters.score.measure.label().to_string(),
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

/// The ranking measure with the parameters that shape it, for the `ranking` line.
fn measure_description(p: &ScoreParams, technique: Technique) -> String {
    let mut s = p.measure.label().to_string();
    match p.measure {
        Measure::Derivative => s.push_str(&format!(
            " (Savitzky-Golay window {}, order {})",
            p.derivative.window, p.derivative.order
        )),
        Measure::Composite => {
            let c = &p.composite;
            s.push_str(&format!(
                " (weights intensity^{} x (m/z)^{}{}",
                c.intensity_exponent,
                c.mass_exponent,
                if c.reverse {
                    ", reverse search"
                } else {
                    ", forward search"
                }
            ));
            if let Some(m) = p.min_mz {
                s.push_str(&format!(", m/z >= {m}"));
            }
            s.push(')');
        }
        Measure::ShiftMatch if p.referencing_correction || p.weak_line_discount => {
            let on: Vec<&str> = [
                (p.referencing_correction, "referencing correction"),
                (p.weak_line_discount, "weak-line discount"),
            ]
            .iter()
            .filter(|(yes, _)| *yes)
            .map(|(_, what)| *what)
            .collect();
            s.push_str(&format!(" ({})", on.join(", ")));
        }
        _ => {}
    }
    if technique == Technique::MsEi
        && p.measure != Measure::Composite
        && let Some(m) = p.min_mz
    {
        s.push_str(&format!(" (m/z >= {m})"));
    }
    s
}

/// The whole-spectrum measure shown beside the ranking one.
fn second_measure(m: Measure, technique: Technique) -> Measure {
    match m {
        Measure::Cosine if technique.is_nmr() && technique != Technique::Nmr13c => {
            Measure::Correlation
        }
        Measure::Cosine if technique == Technique::Nmr13c => Measure::ShiftMatch,
        Measure::Cosine if technique == Technique::MsEi => Measure::Composite,
        Measure::Cosine => Measure::Correlation,
        Measure::Derivative => Measure::Correlation,
        _ => Measure::Cosine,
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
    let technique = r.unknown.technique;
    let solvent = r
        .unknown
        .solvent
        .as_deref()
        .map(|s| format!(", in {s}"))
        .unwrap_or_default();
    writeln!(
        out,
        "unknown   {}  ({technique}{solvent}, sha256 {})",
        r.unknown.file,
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
        measure_description(p, technique),
        1.0 - p.spectral_weight,
        p.peak_tolerance,
        r.candidates
    )?;
    if let Some(c) = constraint_summary(&r.parameters.constraints) {
        writeln!(out, "limits    {c}; {} ruled out", r.excluded_count)?;
    }
    writeln!(out)?;
    let second = second_measure(p.measure, technique);
    let mut t = output::Table::new(&[
        ">rank",
        ">score",
        &format!(">{}", p.measure.label()),
        &format!(">{}", second.label()),
        ">peaks",
        ">fwd",
        ">rev",
        ">jacc",
        "compound",
        "formula",
        ">id",
        "status",
    ]);
    for h in &r.hits {
        let o = &h.components.peak_overlap;
        let c = &h.components;
        let other = c
            .value(second)
            .map_or_else(|| "-".to_string(), |v| format!("{v:.3}"));
        t.row(vec![
            h.rank.to_string(),
            format!("{:.3}", h.score),
            format!("{:.3}", c.spectral),
            other,
            format!("{}/{}", o.matched, o.reference_peaks),
            format!("{:.2}", o.forward),
            format!("{:.2}", o.reverse),
            format!("{:.2}", o.jaccard),
            h.name.clone(),
            h.formula.clone().unwrap_or_default(),
            h.spectrum_id.to_string(),
            h.status.to_string(),
        ]);
    }
    t.write_styled(out, paint, Some(0))?;
    writeln!(out)?;
    for h in &r.hits {
        for n in &h.notes {
            writeln!(out, "note      hit {} ({}): {n}", h.rank, h.name)?;
        }
    }
    if r.parameters.explain && r.excluded.is_empty() && r.excluded_count > 0 {
        writeln!(
            out,
            "ruled out: {} candidate(s), none scoring above the last hit listed",
            r.excluded_count
        )?;
        writeln!(out)?;
    }
    if !r.excluded.is_empty() {
        writeln!(out, "ruled out (scored above the last hit):")?;
        let mut t = output::Table::new(&[">score", "compound", "formula", ">id", "reason"]);
        for e in &r.excluded {
            t.row(vec![
                format!("{:.3}", e.score),
                e.name.clone(),
                e.formula.clone().unwrap_or_default(),
                e.spectrum_id.to_string(),
                e.reason.clone(),
            ]);
        }
        t.write(out)?;
        writeln!(out)?;
    }
    if let Some(m) = r.margin {
        writeln!(
            out,
            "margin    {m:.3} between hits 1 and 2   (peaks = matched / reference peaks; fwd = matched / unknown peaks, rev = matched / reference peaks, jacc = Jaccard)"
        )?;
    }
    for w in &r.warnings {
        writeln!(out, "{}   {w}", paint.warn("warning"))?;
    }
    writeln!(out, "caution   {}", r.caution)?;
    Ok(())
}

/// The constraints in one line, or `None` when there are none.
pub fn constraint_summary(c: &Constraints) -> Option<String> {
    let mut parts = Vec::new();
    if let Some(f) = &c.formula {
        parts.push(format!("formula {f}"));
    }
    if let Some(m) = c.mass {
        parts.push(format!("nominal mass {m}"));
    }
    if let Some(i) = c.ihd {
        parts.push(format!("IHD {i}"));
    }
    if let Some(e) = &c.elements {
        parts.push(format!(
            "elements {}",
            e.iter().cloned().collect::<Vec<_>>().join(",")
        ));
    }
    if let Some(ri) = &c.ri {
        let phase = ri
            .phase
            .as_deref()
            .map(|p| format!(" on {p}"))
            .unwrap_or_default();
        parts.push(format!("RI {:.0} +- {}{phase}", ri.value, ri.window));
    }
    (!parts.is_empty()).then(|| parts.join(", "))
}
