//! `whorl config`: the library's settings, with the built-in default of every setting the
//! file leaves out, and the derived thresholds that apply where it sets none.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use serde_json::json;
use whorl::config::Config;

use super::{Context, output};

#[derive(Debug, Args)]
pub struct ConfigArgs {
    /// Print as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: ConfigArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let path = Config::path(&ctx.library);
    let config = ctx.config()?;
    let found = path.is_file();
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(
            &mut out,
            &json!({ "file": path.display().to_string(), "found": found, "config": config }),
        )?;
    } else {
        let state = if found {
            "read"
        } else {
            "not present: defaults in use"
        };
        writeln!(out, "# {} ({state})", path.display())?;
        let text = toml::to_string_pretty(&config)?;
        // An empty [thresholds] table means "derived per technique and measure": say which.
        let unset = config.thresholds == whorl::config::Thresholds::default();
        for line in text.lines() {
            writeln!(out, "{line}")?;
            if unset && line == "[thresholds]" {
                write_derived(&mut out)?;
            }
            if let Some(name) = line
                .strip_prefix("[technique.")
                .and_then(|l| l.strip_suffix(']'))
            {
                write_built_in(&mut out, &config, name.parse()?)?;
            }
        }
    }
    Ok(ExitCode::SUCCESS)
}

/// Comment lines naming the derived thresholds of each technique's default scoring, which
/// apply while `[thresholds]` sets none.
fn write_derived(out: &mut impl Write) -> anyhow::Result<()> {
    use whorl::score::ScoreParams;
    use whorl::technique::Technique;
    writeln!(
        out,
        "# not set: each technique's hit lists use the thresholds derived for its measure;"
    )?;
    writeln!(
        out,
        "# for the default measures (weak score, close margin, strong score):"
    )?;
    for technique in Technique::ALL {
        let params = ScoreParams::default_for(technique);
        let c = whorl::search::confidence(technique, &params);
        let applies = match c.evidence {
            whorl::search::Evidence::Score => "",
            whorl::search::Evidence::Discriminant => {
                " (the weak threshold applies to 0.6 x score + 0.4 x relative lead over the next compound)"
            }
        };
        writeln!(
            out,
            "#   {technique} {}: {:.2}, {:.2}, {:.2}{applies}",
            params.measure, c.weak_score, c.close_margin, c.strong_score
        )?;
        let ri = whorl::search::confidence_for(technique, &params, true);
        if ri.retention_index {
            writeln!(
                out,
                "#     searched with --ri: weak threshold {:.2}{}",
                ri.weak_score,
                match ri.evidence {
                    whorl::search::Evidence::Score => " on the best score",
                    whorl::search::Evidence::Discriminant => " on the same combination",
                }
            )?;
        }
    }
    writeln!(
        out,
        "# weak_score set here is compared with the best score itself, for every technique"
    )?;
    Ok(())
}

/// A comment naming the built-in values of the technique options the file leaves out.
fn write_built_in(
    out: &mut impl Write,
    config: &Config,
    technique: whorl::technique::Technique,
) -> anyhow::Result<()> {
    let set = config.technique.get(technique);
    let params = whorl::score::ScoreParams::default_for(technique);
    let mut left = Vec::new();
    if set.top.is_none() {
        left.push(format!("top {} (from [search])", config.search.top));
    }
    if set.spectral_weight.is_none() {
        left.push(format!("spectral_weight {}", params.spectral_weight));
    }
    if set.peak_tolerance.is_none() {
        left.push(format!("peak_tolerance {}", params.peak_tolerance));
    }
    if set.solvent.is_none() && technique.is_nmr() {
        left.push("no solvent".to_string());
    }
    if !left.is_empty() {
        writeln!(out, "# not set, built in: {}", left.join(", "))?;
    }
    Ok(())
}
