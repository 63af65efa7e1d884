//! `whorl init`: create a library, with its library-wide preparation choices.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use whorl::library::{Library, Recipes, default_recipes};
use whorl::prepare::{Baseline, Recipe, RegionMask};
use whorl::technique::Technique;

use super::{Context, identity};

#[derive(Debug, Args)]
pub struct InitArgs {
    /// Who creates the library [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
    /// Print the new library's recipes and state hash as JSON
    #[arg(long)]
    pub json: bool,
    /// IR baseline removal: none, als or rubber-band
    #[arg(long, value_name = "METHOD", default_value = "none")]
    pub ir_baseline: String,
    /// Raman baseline removal: none, als or rubber-band
    #[arg(long, value_name = "METHOD", default_value = "rubber-band")]
    pub raman_baseline: String,
    /// Asymmetric least squares smoothness lambda, for the techniques using als
    #[arg(long, value_name = "LAMBDA")]
    pub als_lambda: Option<f64>,
    /// Asymmetric least squares asymmetry p, for the techniques using als
    #[arg(long, value_name = "P")]
    pub als_p: Option<f64>,
    /// Extra IR region to mask (repeatable): water-vapour, diamond-atr, or a range LO-HI in cm-1
    #[arg(long = "ir-mask", value_name = "MASK")]
    pub ir_masks: Vec<String>,
}

impl InitArgs {
    /// The recipes these options ask for.
    pub fn recipes(&self) -> whorl::Result<Recipes> {
        let mut recipes = default_recipes();
        let uses_als =
            |c: &str| matches!(Baseline::parse_choice(c), Ok(Some(Baseline::Als { .. })));
        if (self.als_lambda.is_some() || self.als_p.is_some())
            && !uses_als(&self.ir_baseline)
            && !uses_als(&self.raman_baseline)
        {
            return Err(whorl::Error::invalid(
                "--als-lambda and --als-p apply to a technique using als, and none does",
                "add --ir-baseline als or --raman-baseline als, or leave the ALS parameters out",
            ));
        }
        for (technique, choice) in [
            (Technique::Ir, &self.ir_baseline),
            (Technique::Raman, &self.raman_baseline),
        ] {
            if let Some(r) = recipes.get_mut(&technique) {
                set_baseline(r, choice, self.als_lambda, self.als_p)?;
            }
        }
        if let Some(r) = recipes.get_mut(&Technique::Ir) {
            add_masks(r, &self.ir_masks)?;
        }
        Ok(recipes)
    }
}

/// Sets a recipe's baseline removal from a choice (`none`, `als`, `rubber-band`), with the ALS
/// parameters when given.
pub fn set_baseline(
    recipe: &mut Recipe,
    choice: &str,
    als_lambda: Option<f64>,
    als_p: Option<f64>,
) -> whorl::Result<()> {
    let mut baseline = Baseline::parse_choice(choice)?;
    if let Some(Baseline::Als { lambda, p }) = &mut baseline {
        if let Some(l) = als_lambda {
            *lambda = l;
        }
        if let Some(q) = als_p {
            *p = q;
        }
        if !(lambda.is_finite() && *lambda > 0.0 && *p > 0.0 && *p < 1.0) {
            return Err(whorl::Error::invalid(
                format!("ALS lambda {lambda} and p {p} are not usable"),
                "give a positive lambda (e.g. 1e5) and 0 < p < 1 (e.g. 0.01)",
            ));
        }
    }
    recipe.baseline = baseline;
    Ok(())
}

/// Adds masked regions (`water-vapour`, `diamond-atr`, `co2` or `LO-HI` in cm-1) to a recipe.
pub fn add_masks(recipe: &mut Recipe, masks: &[String]) -> whorl::Result<()> {
    let mut regions = Vec::new();
    for m in masks {
        regions.extend(RegionMask::parse_regions(m)?);
    }
    recipe.add_masks(&regions);
    Ok(())
}

/// Prints recipes a line each: technique, grid, baseline and masked regions.
pub fn print_recipes<'a>(
    out: &mut impl Write,
    recipes: impl IntoIterator<Item = &'a Recipe>,
) -> std::io::Result<()> {
    for r in recipes {
        let g = &r.grid;
        let mut extra = String::new();
        if let Some(b) = r.baseline {
            extra.push_str(&format!("; baseline {}", b.name()));
        }
        if let Some(z) = r.despike {
            extra.push_str(&format!("; spikes removed above modified z {z}"));
        }
        if !g.masks.is_empty() {
            let masks: Vec<String> = g
                .masks
                .iter()
                .map(|(lo, hi)| format!("{lo}-{hi}"))
                .collect();
            extra.push_str(&format!("; masked {}", masks.join(", ")));
        }
        writeln!(
            out,
            "  {:<7} grid {}..{} step {} ({} points){extra}",
            r.technique.name(),
            g.start,
            g.stop,
            g.step,
            g.len()
        )?;
    }
    Ok(())
}

pub fn run(args: InitArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let recipes = args.recipes()?;
    let lib = Library::init_with(&ctx.library, &identity(args.by.as_deref())?, recipes)?;
    let mut out = std::io::stdout().lock();
    if args.json {
        super::output::json(
            &mut out,
            &serde_json::json!({
                "library": ctx.library.display().to_string(),
                "recipes": lib.recipes().values().collect::<Vec<_>>(),
                "state_hash": lib.state_hash()?,
            }),
        )?;
        return Ok(ExitCode::SUCCESS);
    }
    writeln!(out, "created library {}", ctx.library.display())?;
    print_recipes(&mut out, lib.recipes().values())?;
    writeln!(out, "state hash {}", lib.state_hash()?)?;
    Ok(ExitCode::SUCCESS)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cli::{Cli, Command};
    use clap::Parser;

    fn init_args(extra: &[&str]) -> InitArgs {
        let mut argv = vec!["whorl", "init"];
        argv.extend_from_slice(extra);
        match Cli::try_parse_from(argv).unwrap().command {
            Command::Init(a) => a,
            _ => unreachable!(),
        }
    }

    #[test]
    fn defaults_match_the_default_recipes() {
        assert_eq!(init_args(&[]).recipes().unwrap(), default_recipes());
    }

    #[test]
    fn baselines_and_masks_go_into_the_recipes() {
        let r = init_args(&[
            "--ir-baseline",
            "rubber-band",
            "--raman-baseline",
            "none",
            "--ir-mask",
            "diamond-atr",
            "--ir-mask",
            "water-vapour",
        ])
        .recipes()
        .unwrap();
        let ir = &r[&Technique::Ir];
        assert_eq!(ir.baseline, Some(Baseline::RubberBand));
        assert_eq!(
            ir.grid.masks,
            vec![
                (1300.0, 2000.0),
                (1900.0, 2300.0),
                (2280.0, 2400.0),
                (3500.0, 4000.0)
            ]
        );
        assert_eq!(r[&Technique::Raman].baseline, None);
        let r = init_args(&["--ir-baseline", "als", "--als-lambda", "1e6"])
            .recipes()
            .unwrap();
        assert_eq!(
            r[&Technique::Ir].baseline,
            Some(Baseline::Als {
                lambda: 1e6,
                p: 0.01
            })
        );
        assert!(init_args(&["--ir-mask", "4000"]).recipes().is_err());
        assert!(init_args(&["--ir-baseline", "spline"]).recipes().is_err());
        assert!(
            init_args(&["--raman-baseline", "als", "--als-p", "2"])
                .recipes()
                .is_err()
        );
        // ALS parameters without a technique using ALS would silently do nothing.
        assert!(init_args(&["--als-p", "0.05"]).recipes().is_err());
        // Raman defaults to the rubber band (chosen on the tuning evidence).
        assert_eq!(
            init_args(&[]).recipes().unwrap()[&Technique::Raman].baseline,
            Some(Baseline::RubberBand)
        );
    }
}
