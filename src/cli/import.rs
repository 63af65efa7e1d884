//! `whorl import`: import the spectra a manifest lists.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;
use serde_json::json;
use whorl::library::{
    Acceptance, BundleImport, ImportReport, Library, ManifestPaths, Outcome, Trust, import_rows,
    read_manifest_with,
};

use super::{Context, EXIT_INPUT, identity, output};

#[derive(Debug, Args)]
#[command(group(clap::ArgGroup::new("source").required(true).args(["path", "manifest", "bundle"])))]
pub struct ImportArgs {
    /// A manifest CSV or a bundle folder, told apart by what the path is (a folder is a bundle);
    /// `--manifest FILE` and `--bundle DIR` say which explicitly
    #[arg(value_name = "MANIFEST_OR_BUNDLE")]
    pub path: Option<PathBuf>,
    /// A manifest CSV: file,technique,name[,formula,cas,synonyms,tags,solvent,y_unit,x_unit,source,
    /// submitted_by,instrument,acquired,notes,...]; other columns are kept as searchable metadata
    #[arg(long, value_name = "CSV")]
    pub manifest: Option<PathBuf>,
    /// A bundle folder written by `whorl export` (its checksums and signature are verified)
    #[arg(long, value_name = "DIR")]
    pub bundle: Option<PathBuf>,
    /// Import nothing if any row is rejected (manifests; a bundle is always all or nothing)
    #[arg(long)]
    pub all_or_nothing: bool,
    /// Who imports, and the submitter of rows without submitted_by [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
    /// Accept a bundle that is unsigned or not signed by a trusted key; recorded as untrusted
    /// (bundles only)
    #[arg(long)]
    pub untrusted: bool,
    /// Print the summary as JSON
    #[arg(long)]
    pub json: bool,
}

/// The two forms of `import`.
enum Source {
    Manifest(PathBuf),
    Bundle(PathBuf),
}

impl ImportArgs {
    /// What is imported: the explicit form, checked against what the path is, or the path told
    /// apart by being a folder (a bundle) or not (a manifest).
    fn source(&self) -> whorl::Result<Source> {
        let refuse = |what: String, hint: &str| Err(whorl::Error::invalid(what, hint));
        let source = match (&self.path, &self.manifest, &self.bundle) {
            (_, Some(m), _) if m.is_dir() => {
                return refuse(
                    format!(
                        "--manifest {}: is a folder, not a manifest CSV",
                        output::shown(m.display())
                    ),
                    "a folder written by `whorl export` is imported with `--bundle DIR`",
                );
            }
            (_, Some(m), _) => Source::Manifest(m.clone()),
            (_, _, Some(b)) if b.exists() && !b.is_dir() => {
                return refuse(
                    format!(
                        "--bundle {}: is a file, not a bundle folder",
                        output::shown(b.display())
                    ),
                    "a manifest CSV is imported with `--manifest FILE`",
                );
            }
            (_, _, Some(b)) => Source::Bundle(b.clone()),
            (Some(p), _, _) if p.is_dir() => Source::Bundle(p.clone()),
            (Some(p), _, _) => Source::Manifest(p.clone()),
            (None, None, None) => unreachable!("clap requires one of the three"),
        };
        match &source {
            Source::Manifest(m) if self.untrusted => refuse(
                format!(
                    "--untrusted applies to bundles; {} is a manifest",
                    output::shown(m.display())
                ),
                "leave out --untrusted: the rows of a manifest are checked one by one",
            ),
            Source::Bundle(b) if self.all_or_nothing => refuse(
                format!(
                    "--all-or-nothing applies to manifests; {} is a bundle",
                    output::shown(b.display())
                ),
                "leave out --all-or-nothing: a bundle is imported whole or not at all",
            ),
            _ => Ok(source),
        }
    }
}

pub fn run(args: ImportArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let manifest = match args.source()? {
        Source::Bundle(dir) => return import_bundle(&mut ctx.open()?, &dir, &args, ctx),
        Source::Manifest(m) => m,
    };
    let mut lib = ctx.open()?;
    let report = import_manifest(
        &mut lib,
        &manifest,
        &identity(args.by.as_deref())?,
        args.all_or_nothing,
        true,
    )?;
    for line in warning_lines(&manifest, &report.rows) {
        eprintln!("{line}");
    }
    if let Some(note) = report.coverage_note() {
        eprintln!("note: {note}");
    }
    let mut out = std::io::stdout().lock();
    if args.json {
        let rejected: Vec<_> = report
            .rejected()
            .map(|(r, e)| json!({"line": r.line, "file": r.file, "reason": format!("{e}"), "hint": e.hint()}))
            .collect();
        let warnings: Vec<_> = report
            .rows
            .iter()
            .flat_map(|r| {
                r.warnings
                    .iter()
                    .map(|w| json!({"line": r.line, "file": r.file, "warning": w}))
            })
            .collect();
        output::json(
            &mut out,
            &json!({
                "imported": report.imported(),
                "already_present": report.already_present(),
                "rejected": rejected,
                "warnings": warnings,
                "coverage_note": report.coverage_note(),
                "rolled_back": report.rolled_back,
            }),
        )?;
    } else {
        print_summary(&mut out, &manifest, &report)?;
    }
    Ok(if report.rejected().next().is_some() {
        ExitCode::from(EXIT_INPUT)
    } else {
        ExitCode::SUCCESS
    })
}

/// The warnings of a bulk import for people: each distinct warning once, at its first row,
/// with how many other rows gave the same words and their lines (the first ten). `--json`
/// keeps every row's warning.
fn warning_lines(manifest: &std::path::Path, rows: &[whorl::library::RowReport]) -> Vec<String> {
    let mut order: Vec<&str> = Vec::new();
    let mut seen: std::collections::HashMap<&str, Vec<(usize, &str)>> =
        std::collections::HashMap::new();
    for row in rows {
        for w in &row.warnings {
            let at = seen.entry(w.as_str()).or_default();
            if at.is_empty() {
                order.push(w.as_str());
            }
            at.push((row.line, row.file.as_str()));
        }
    }
    let mut lines = Vec::new();
    for w in order {
        let at = &seen[w];
        let (line, file) = at[0];
        lines.push(format!(
            "warning: {}:{line} ({}): {}",
            output::shown(manifest.display()),
            output::shown(file),
            output::shown(w)
        ));
        if at.len() > 1 {
            let more: Vec<String> = at[1..].iter().take(10).map(|a| a.0.to_string()).collect();
            let rest = if at.len() - 1 > 10 { ", ..." } else { "" };
            lines.push(format!(
                "warning: the same for {} more row{} (line{} {}{rest})",
                at.len() - 1,
                if at.len() == 2 { "" } else { "s" },
                if at.len() == 2 { "" } else { "s" },
                more.join(", ")
            ));
        }
    }
    lines
}

fn import_bundle(
    lib: &mut Library,
    dir: &std::path::Path,
    args: &ImportArgs,
    _ctx: &Context,
) -> anyhow::Result<ExitCode> {
    let accept = if args.untrusted {
        Acceptance::Untrusted
    } else {
        Acceptance::Trusted
    };
    let BundleImport {
        info,
        trust,
        outcomes,
    } = lib.import_bundle(dir, &identity(args.by.as_deref())?, accept)?;
    let added = outcomes
        .iter()
        .filter(|o| matches!(o, Outcome::Added { .. }))
        .count();
    let present = outcomes.len() - added;
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(
            &mut out,
            &json!({ "bundle": info, "signature": trust, "imported": added, "already_present": present, "rejected": [], "state_hash": lib.state_hash()? }),
        )?;
    } else {
        writeln!(
            out,
            "bundle {} checksums verified ({} spectra, exported by {} at {})",
            output::shown(dir.display()),
            info.spectra,
            output::shown(&info.exported_by),
            output::shown(&info.exported_at)
        )?;
        match &trust {
            Trust::Signed { key, public_key } => writeln!(
                out,
                "signed by trusted key {} {}",
                output::shown(key),
                output::shown(public_key)
            )?,
            Trust::Untrusted { why } => writeln!(
                out,
                "accepted as untrusted (--untrusted): {}",
                output::shown(why)
            )?,
        }
        writeln!(
            out,
            "imported {added}, already present {present}, rejected 0"
        )?;
        if added > 0 {
            writeln!(
                out,
                "references arrive pending local review; their sign-offs elsewhere are kept as history"
            )?;
        }
        writeln!(
            out,
            "bundle state hash  {}",
            output::shown(&info.state_hash)
        )?;
        writeln!(out, "library state hash {}", lib.state_hash()?)?;
    }
    Ok(ExitCode::SUCCESS)
}

/// Reads a manifest given on the command line (its paths may be absolute or lead out of its
/// folder: the person running the command can read those files anyway) and imports its rows
/// with a progress bar; shared with `demo`.
pub fn import_manifest(
    lib: &mut Library,
    manifest: &std::path::Path,
    actor: &str,
    all_or_nothing: bool,
    show_progress: bool,
) -> anyhow::Result<ImportReport> {
    let rows = read_manifest_with(manifest, actor, ManifestPaths::Readable)?;
    let bar = if show_progress {
        output::progress(rows.len() as u64, "importing")
    } else {
        indicatif::ProgressBar::hidden()
    };
    let report = import_rows(lib, rows, actor, all_or_nothing, &|n| {
        bar.set_position(n as u64)
    })?;
    bar.finish_and_clear();
    Ok(report)
}

fn print_summary(
    out: &mut impl Write,
    manifest: &std::path::Path,
    report: &ImportReport,
) -> anyhow::Result<()> {
    for (row, err) in report.rejected() {
        writeln!(
            out,
            "rejected {}:{} ({}): {}",
            output::shown(manifest.display()),
            row.line,
            output::shown(&row.file),
            output::shown(err)
        )?;
        if let Some(h) = err.hint() {
            writeln!(out, "  hint: {}", output::shown(h))?;
        }
    }
    if report.rolled_back {
        writeln!(
            out,
            "nothing imported (--all-or-nothing): fix the rows above and run the import again"
        )?;
    }
    let added_ids: Vec<i64> = report
        .rows
        .iter()
        .filter_map(|r| match r.outcome {
            Ok(Outcome::Added { spectrum_id, .. }) => Some(spectrum_id),
            _ => None,
        })
        .collect();
    let range = match (added_ids.iter().min(), added_ids.iter().max()) {
        (Some(a), Some(b)) => format!(" (ids {a}..{b})"),
        _ => String::new(),
    };
    writeln!(
        out,
        "manifest {}: imported {}{range}, already present {}, rejected {}",
        output::shown(manifest.display()),
        report.imported(),
        report.already_present(),
        report.rejected().count()
    )?;
    Ok(())
}
