//! `whorl add`: import one spectrum.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;
use whorl::library::{Metadata, Outcome, Submission, stage};
use whorl::spectrum::{XUnit, YUnit};
use whorl::technique::Technique;

use super::{Context, identity, output};

#[derive(Debug, Args)]
pub struct AddArgs {
    /// The spectrum file: two columns, x and y
    pub file: PathBuf,
    /// ir, raman, ms-ei, nmr-1h or nmr-13c
    #[arg(long, short)]
    pub technique: Technique,
    /// Compound name
    #[arg(long)]
    pub name: String,
    /// Molecular formula, e.g. C7H8
    #[arg(long)]
    pub formula: Option<String>,
    /// CAS Registry Number, e.g. 108-88-3
    #[arg(long)]
    pub cas: Option<String>,
    /// Another name (repeatable)
    #[arg(long = "synonym", value_name = "S")]
    pub synonyms: Vec<String>,
    /// A label (repeatable)
    #[arg(long = "tag", value_name = "T")]
    pub tags: Vec<String>,
    /// NMR solvent, e.g. CDCl3
    #[arg(long)]
    pub solvent: Option<String>,
    /// y unit: absorbance, transmittance, transmittance-percent, counts, relative, intensity
    #[arg(long)]
    pub y_unit: Option<YUnit>,
    /// x unit for IR files given as wavelength: um or nm
    #[arg(long)]
    pub x_unit: Option<XUnit>,
    /// Where the material came from
    #[arg(long)]
    pub source: Option<String>,
    /// Who submits it [default: $WHORL_USER, else the OS account]; whoever runs the command is recorded as its importer too
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
    /// Instrument
    #[arg(long)]
    pub instrument: Option<String>,
    /// Acquisition date
    #[arg(long)]
    pub acquired: Option<String>,
    /// Free note
    #[arg(long)]
    pub note: Option<String>,
    /// An extra field, KEY=VALUE, as a manifest's extra columns give them (e.g. `--set ri=1012
    /// --set ri_phase=DB-5`; repeatable); searchable as `KEY:VALUE`
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
    /// Print the result as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: AddArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    // Who the record says submitted it (`--by`), and who ran the command: the four-eyes rule
    // keeps both from signing it off.
    let submitter = identity(args.by.as_deref())?;
    let actor = identity(None)?;
    let submission = Submission {
        path: args.file.clone(),
        technique: args.technique,
        metadata: Metadata {
            name: args.name,
            formula: args.formula,
            cas: args.cas,
            synonyms: args.synonyms,
            tags: args.tags,
            solvent: args.solvent,
            source: args.source,
            instrument: args.instrument,
            acquired: args.acquired,
            notes: args.note,
            extra: whorl::spectrum::extra_fields(
                args.set.iter().map(String::as_str),
                "--set",
                "--set KEY=VALUE, e.g. --set ri=1012",
            )?,
        },
        x_unit: args.x_unit,
        y_unit: args.y_unit,
        submitted_by: submitter,
    };
    let staged = stage(lib.recipes(), submission)?;
    let mut warnings = staged.prepared.warnings.clone();
    let outcome = lib
        .store(std::slice::from_ref(&staged), &actor, true)?
        .pop()
        .expect("one outcome per spectrum")?;
    warnings.extend(outcome.same_name_warning());
    // A file of a withdrawn spectrum is refused by `store`, naming it and the way back.
    let mut out = std::io::stdout().lock();
    for w in &warnings {
        eprintln!(
            "warning: {}: {}",
            output::terminal_text(&args.file.display().to_string()),
            output::terminal_text(w)
        );
    }
    if let Some(c) = staged.prepared.coverage {
        eprintln!(
            "note: {} covers {:.0}-{:.0} cm-1, less than the grid; scores compare it with an unknown over the range both cover",
            output::terminal_text(&args.file.display().to_string()),
            c.lo,
            c.hi
        );
    }
    if args.json {
        super::output::json(&mut out, &outcome)?;
    } else {
        match outcome {
            Outcome::Added { spectrum_id, .. } => writeln!(out, "{spectrum_id}")?,
            Outcome::AlreadyPresent { spectrum_id } => {
                eprintln!("already present: the same raw points are spectrum {spectrum_id}");
                writeln!(out, "{spectrum_id}")?;
            }
        }
    }
    Ok(ExitCode::SUCCESS)
}
