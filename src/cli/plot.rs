//! `whorl plot`: spectra from the library and from files, on one axis, as SVG.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::Context as _;
use clap::Args;
use serde::Serialize;
use whorl::Error;
use whorl::library::read_and_prepare;
use whorl::prepare::{Prepared, Solvent};
use whorl::report::{Series, spectra};
use whorl::spectrum::{XUnit, YUnit};
use whorl::technique::Technique;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct PlotArgs {
    /// Library spectrum ids and/or spectrum files; files are prepared with the library's recipe
    #[arg(required = true, value_name = "ID|FILE")]
    pub items: Vec<String>,
    /// Technique of the files: ir, raman, ms-ei or nmr-1h [default: that of the library ids]
    #[arg(long, short)]
    pub technique: Option<Technique>,
    /// Write the SVG here ('-' for stdout)
    #[arg(long, short, value_name = "FILE", visible_alias = "svg")]
    pub output: PathBuf,
    /// NMR solvent of the files [default: from whorl.toml]
    #[arg(long)]
    pub solvent: Option<Solvent>,
    /// y unit of the files (detected for IR when not given)
    #[arg(long)]
    pub y_unit: Option<YUnit>,
    /// x unit for IR files given as wavelength: um or nm
    #[arg(long)]
    pub x_unit: Option<XUnit>,
    /// Print what was plotted as JSON
    #[arg(long)]
    pub json: bool,
}

/// What one plotted item was.
#[derive(Debug, Serialize)]
struct Plotted {
    label: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    spectrum_id: Option<i64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    file: Option<String>,
    peaks: usize,
}

enum Item {
    Id(i64),
    File(PathBuf),
}

/// A bare number names a library spectrum unless a file of that name exists.
fn item(text: &str) -> Item {
    match text.parse::<i64>() {
        Ok(id) if !Path::new(text).exists() => Item::Id(id),
        _ => Item::File(PathBuf::from(text)),
    }
}

pub fn run(args: PlotArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let lib = ctx.open()?;
    let config = ctx.config()?;
    let items: Vec<Item> = args.items.iter().map(|s| item(s)).collect();

    // The technique: given, else that of the first library id.
    let mut technique = args.technique;
    if technique.is_none() {
        for it in &items {
            if let Item::Id(id) = it {
                technique = Some(lib.spectrum(*id)?.technique);
                break;
            }
        }
    }
    let Some(technique) = technique else {
        return Err(Error::invalid(
            "the technique of the files is not known",
            "give it with --technique ir|raman|ms-ei|nmr-1h",
        )
        .into());
    };
    let recipe = lib.recipe(technique)?.clone();
    let solvent = args.solvent.or(config.solvent(technique));

    let mut prepared: Vec<Prepared> = Vec::new();
    let mut plotted: Vec<Plotted> = Vec::new();
    for it in &items {
        match it {
            Item::Id(id) => {
                let rec = lib.spectrum(*id)?;
                if rec.technique != technique {
                    return Err(Error::invalid(
                        format!(
                            "spectrum {id} ({}) is {}, not {technique}",
                            rec.metadata.name, rec.technique
                        ),
                        "one plot holds one technique: plot each technique separately",
                    )
                    .into());
                }
                let p = lib.prepared(*id)?;
                plotted.push(Plotted {
                    label: format!("{} (spectrum {id})", rec.metadata.name),
                    spectrum_id: Some(*id),
                    file: None,
                    peaks: p.peaks.len(),
                });
                prepared.push(p);
            }
            Item::File(path) => {
                let (_, p) = read_and_prepare(path, &recipe, args.x_unit, args.y_unit, solvent)?;
                for w in &p.warnings {
                    eprintln!(
                        "{}: {}: {}",
                        ctx.paint_stderr().warn("warning"),
                        output::shown(path.display()),
                        output::shown(w)
                    );
                }
                plotted.push(Plotted {
                    label: path
                        .file_name()
                        .map(|f| f.to_string_lossy().into_owned())
                        .unwrap_or_else(|| path.display().to_string()),
                    spectrum_id: None,
                    file: Some(path.display().to_string()),
                    peaks: p.peaks.len(),
                });
                prepared.push(p);
            }
        }
    }
    let series: Vec<Series<'_>> = plotted
        .iter()
        .zip(&prepared)
        .map(|(p, prep)| Series {
            label: p.label.clone(),
            prepared: prep,
        })
        .collect();
    let svg = spectra(&recipe.grid, &series)?;
    let to_stdout = args.output.as_os_str() == "-";
    if to_stdout {
        std::io::stdout().lock().write_all(svg.as_bytes())?;
    } else {
        std::fs::write(&args.output, &svg)
            .with_context(|| format!("writing the plot to {}", args.output.display()))?;
    }
    if args.json && !to_stdout {
        output::json(
            &mut std::io::stdout().lock(),
            &serde_json::json!({
                "svg": args.output.display().to_string(),
                "technique": technique,
                "spectra": plotted,
            }),
        )?;
    } else if !to_stdout {
        eprintln!(
            "plot of {} {technique} spectra written to {}",
            plotted.len(),
            args.output.display()
        );
    }
    Ok(ExitCode::SUCCESS)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_ids_unless_a_file_has_that_name() {
        assert!(matches!(item("12"), Item::Id(12)));
        assert!(matches!(item("u.csv"), Item::File(_)));
        let dir = tempfile::tempdir().unwrap();
        let file = dir.path().join("7");
        std::fs::write(&file, "x").unwrap();
        assert!(matches!(item(file.to_str().unwrap()), Item::File(_)));
    }
}
