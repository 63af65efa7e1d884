//! `whorl demo`: build a library from seed-library/ and search its example unknowns.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Instant;

use anyhow::Context as _;
use clap::Args;
use whorl::library::{Decision, Library, resolve_within};
use whorl::search::{Request, Unknown, run_search};

use super::hits::print_report;
use super::{Context, EXIT_FAILURE};

#[derive(Debug, Args)]
pub struct DemoArgs {
    /// The seed library folder [default: ./seed-library, else the one in the source tree]
    #[arg(long, value_name = "DIR")]
    pub seed: Option<PathBuf>,
    /// Keep the demo library in this folder (e.g. ./whorl-demo) instead of a temporary one
    #[arg(long, value_name = "DIR")]
    pub keep: Option<PathBuf>,
    /// Hits to show per unknown
    #[arg(long, default_value_t = 5)]
    pub top: usize,
    /// Print the import summary and every search report as JSON
    #[arg(long)]
    pub json: bool,
}

/// The invented second analyst who reviews the demo library.
const REVIEWER: &str = "demo.reviewer";

fn seed_folder(given: Option<PathBuf>) -> anyhow::Result<PathBuf> {
    if let Some(dir) = given {
        if !dir.join("manifest.csv").is_file() {
            return Err(whorl::Error::invalid(
                format!("{} holds no manifest.csv", dir.display()),
                "pass --seed the folder of the repository's seed-library/, or leave --seed out",
            )
            .into());
        }
        return Ok(dir);
    }
    let here = PathBuf::from("seed-library");
    if here.join("manifest.csv").is_file() {
        return Ok(here);
    }
    let built_in = Path::new(env!("CARGO_MANIFEST_DIR")).join("seed-library");
    if built_in.join("manifest.csv").is_file() {
        return Ok(built_in);
    }
    Err(whorl::Error::invalid(
        "no seed-library/ found here or in the source tree",
        "run the demo from the repository folder, or pass --seed DIR",
    )
    .into())
}

pub fn run(args: DemoArgs, _ctx: &Context) -> anyhow::Result<ExitCode> {
    let seed = seed_folder(args.seed)?;
    let temp;
    let root = match &args.keep {
        Some(dir) => dir.clone(),
        None => {
            temp =
                tempfile::tempdir().context("creating a temporary folder for the demo library")?;
            temp.path().join("library")
        }
    };
    let actor = "demo";
    let started = Instant::now();
    let mut lib = Library::init(&root, actor)?;
    let report =
        super::import::import_manifest(&mut lib, &seed.join("manifest.csv"), actor, false, true)?;
    // A second analyst signs off every demo spectrum, so the demo searches verified references
    // as a lab would.
    let ids: Vec<i64> = lib.list(None)?.iter().map(|s| s.id).collect();
    lib.review_many(
        &ids,
        REVIEWER,
        Decision::Approve,
        None,
        Some("demo library: synthetic reference"),
    )?;
    let mut out = std::io::stdout().lock();
    let stats = lib.stats()?;
    // With --json, the human lines go nowhere and the searches are collected instead.
    let mut sink = std::io::sink();
    let mut text: &mut dyn Write = if args.json { &mut sink } else { &mut out };
    let mut searches = Vec::new();
    writeln!(
        text,
        "demo library {}: {} spectra of {} compounds imported from {} in {:.1} s",
        root.display(),
        report.imported(),
        stats.compounds,
        seed.display(),
        started.elapsed().as_secs_f64()
    )?;
    for (row, err) in report.rejected() {
        writeln!(text, "  rejected line {} ({}): {err}", row.line, row.file)?;
    }

    let unknowns = seed.join("unknowns");
    let manifest = unknowns.join("manifest.csv");
    let mut reader = csv::Reader::from_path(&manifest)
        .with_context(|| format!("reading {}", manifest.display()))?;
    let mut top1 = (0, 0);
    for record in reader.deserialize::<UnknownRow>() {
        let row = record.with_context(|| format!("reading {}", manifest.display()))?;
        let file = resolve_within(&unknowns, &row.file)
            .map_err(|e| anyhow::anyhow!("{}: {e}", manifest.display()))?;
        let technique = row.technique.parse()?;
        let mut request = Request::new(technique);
        request.top = args.top;
        let solvent = row
            .solvent
            .as_deref()
            .filter(|s| !s.is_empty())
            .map(str::parse)
            .transpose()?;
        let y_unit = row
            .y_unit
            .as_deref()
            .filter(|s| !s.is_empty())
            .map(str::parse)
            .transpose()?;
        let x_unit = row
            .x_unit
            .as_deref()
            .filter(|s| !s.is_empty())
            .map(str::parse)
            .transpose()?;
        let t = Instant::now();
        let unknown = Unknown {
            technique,
            file: file.clone(),
            x_unit,
            y_unit,
            solvent,
        };
        let r = run_search(&lib, &unknown, &request)?;
        let elapsed = t.elapsed();
        writeln!(
            text,
            "\n== {} ({}; {})",
            row.file, technique, row.degradations
        )?;
        print_report(&mut text, &r)?;
        let rank = r
            .hits
            .iter()
            .position(|h| h.name == row.expected)
            .map(|i| i + 1);
        match rank {
            Some(k) => writeln!(
                text,
                "expected  {} at rank {k}  (searched in {:.1} ms)",
                row.expected,
                elapsed.as_secs_f64() * 1e3
            )?,
            None => writeln!(
                text,
                "expected  {} not in the top {}",
                row.expected, args.top
            )?,
        }
        top1.1 += 1;
        if rank == Some(1) {
            top1.0 += 1;
        }
        searches.push(serde_json::json!({
            "file": row.file,
            "degradations": row.degradations,
            "expected": row.expected,
            "expected_rank": rank,
            "milliseconds": elapsed.as_secs_f64() * 1e3,
            "report": r,
        }));
    }
    writeln!(
        text,
        "\n{} of {} example unknowns have the expected compound at rank 1.",
        top1.0, top1.1
    )?;
    if args.keep.is_some() {
        writeln!(
            text,
            "The demo library is kept in {}; try `whorl --library {} find solvent`.",
            root.display(),
            root.display()
        )?;
    }
    if args.json {
        super::output::json(
            &mut out,
            &serde_json::json!({
                "library": root.display().to_string(),
                "kept": args.keep.is_some(),
                "imported": report.imported(),
                "rejected": report.rejected().count(),
                "compounds": stats.compounds,
                "expected_at_rank_1": top1.0,
                "unknowns": top1.1,
                "searches": searches,
            }),
        )?;
    }
    Ok(if top1.1 == 0 {
        ExitCode::from(EXIT_FAILURE)
    } else {
        ExitCode::SUCCESS
    })
}

#[derive(Debug, serde::Deserialize)]
struct UnknownRow {
    file: String,
    technique: String,
    expected: String,
    solvent: Option<String>,
    y_unit: Option<String>,
    x_unit: Option<String>,
    degradations: String,
}
