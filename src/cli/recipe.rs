//! `whorl recipe`: show the preparation recipes, or change one technique's recipe and prepare
//! its spectra again.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use whorl::prepare::Recipe;
use whorl::technique::Technique;

use super::init::{add_masks, print_recipes, set_baseline};
use super::{Context, identity, output};

#[derive(Debug, Args)]
pub struct RecipeArgs {
    /// The technique whose recipe to show or change [default: show every technique]
    pub technique: Option<Technique>,
    /// Start from this whorl's default recipe for the technique (for a library made by an
    /// older whorl, or to undo earlier changes)
    #[arg(long)]
    pub defaults: bool,
    /// Baseline removal (IR, Raman): none, als or rubber-band
    #[arg(long, value_name = "METHOD")]
    pub baseline: Option<String>,
    /// Asymmetric least squares smoothness lambda, with --baseline als
    #[arg(long, value_name = "LAMBDA")]
    pub als_lambda: Option<f64>,
    /// Asymmetric least squares asymmetry p, with --baseline als
    #[arg(long, value_name = "P")]
    pub als_p: Option<f64>,
    /// Remove the masked regions added to the technique's default ones
    #[arg(long)]
    pub clear_masks: bool,
    /// Region to mask (IR, Raman; repeatable): water-vapour, diamond-atr, co2, or LO-HI in cm-1
    #[arg(long = "mask", value_name = "MASK")]
    pub masks: Vec<String>,
    /// Why the recipe changes (required to change it; recorded in the audit trail)
    #[arg(long, value_name = "TEXT")]
    pub reason: Option<String>,
    /// Who changes it [default: $WHORL_USER, else the OS user]
    #[arg(long, value_name = "WHO")]
    pub by: Option<String>,
    /// Print the recipes, or the change, as JSON
    #[arg(long)]
    pub json: bool,
}

impl RecipeArgs {
    /// True when the options ask for a change rather than a listing.
    fn changes(&self) -> bool {
        self.defaults
            || self.baseline.is_some()
            || self.als_lambda.is_some()
            || self.als_p.is_some()
            || self.clear_masks
            || !self.masks.is_empty()
    }

    /// The recipe these options make of the current one.
    fn apply(&self, technique: Technique, current: Option<&Recipe>) -> whorl::Result<Recipe> {
        let default = Recipe::default_for(technique);
        let mut recipe = match current {
            Some(r) if !self.defaults => r.clone(),
            _ => default.clone(),
        };
        let optical = matches!(technique, Technique::Ir | Technique::Raman);
        let touches_optics = self.baseline.is_some()
            || self.als_lambda.is_some()
            || self.als_p.is_some()
            || self.clear_masks
            || !self.masks.is_empty();
        if touches_optics && !optical {
            return Err(whorl::Error::invalid(
                format!("baseline and mask options do not apply to {technique}"),
                "they change IR and Raman recipes; for this technique use --defaults",
            ));
        }
        if self.baseline.is_none() && (self.als_lambda.is_some() || self.als_p.is_some()) {
            return Err(whorl::Error::invalid(
                "--als-lambda and --als-p need --baseline als",
                "add --baseline als",
            ));
        }
        if let Some(choice) = &self.baseline {
            set_baseline(&mut recipe, choice, self.als_lambda, self.als_p)?;
        }
        if self.clear_masks {
            recipe.grid.masks = default.grid.masks.clone();
        }
        add_masks(&mut recipe, &self.masks)?;
        Ok(recipe)
    }
}

pub fn run(args: RecipeArgs, ctx: &Context) -> anyhow::Result<ExitCode> {
    let mut lib = ctx.open()?;
    let mut out = std::io::stdout().lock();
    let Some(technique) = args.technique.filter(|_| args.changes()) else {
        if args.reason.is_some() {
            return Err(whorl::Error::invalid(
                "--reason was given but nothing to change",
                "name a technique and what to change, e.g. `whorl recipe ir --baseline als --reason TEXT`",
            )
            .into());
        }
        let shown: Vec<&Recipe> = lib
            .recipes()
            .values()
            .filter(|r| args.technique.is_none_or(|t| r.technique == t))
            .collect();
        if args.json {
            output::json(&mut out, &shown)?;
        } else {
            print_recipes(&mut out, shown)?;
        }
        return Ok(ExitCode::SUCCESS);
    };
    let Some(reason) = args.reason.as_deref() else {
        return Err(whorl::Error::invalid(
            format!("changing the {technique} recipe needs a reason"),
            "say why with --reason TEXT; it goes into the audit trail",
        )
        .into());
    };
    let recipe = args.apply(technique, lib.recipes().get(&technique))?;
    let bar = output::progress(0, "preparing again");
    let change = lib.change_recipe(recipe, &identity(args.by.as_deref())?, reason, &|d, t| {
        bar.set_length(t as u64);
        bar.set_position(d as u64);
    })?;
    bar.finish_and_clear();
    if args.json {
        output::json(&mut out, &change)?;
        return Ok(ExitCode::SUCCESS);
    }
    writeln!(out, "{technique} recipe changed")?;
    if let Some(from) = &change.from {
        writeln!(out, "before")?;
        print_recipes(&mut out, [from])?;
    }
    writeln!(out, "after")?;
    print_recipes(&mut out, [&change.to])?;
    writeln!(
        out,
        "prepared again: {} {technique} spectra (every status; raw points, metadata and sign-offs unchanged)",
        change.spectra
    )?;
    writeln!(
        out,
        "state hash {} -> {}",
        output::short(&change.state_hash_before),
        output::short(&change.state_hash_after)
    )?;
    writeln!(
        out,
        "searches saved before this change replay as different; `whorl log` records it"
    )?;
    Ok(ExitCode::SUCCESS)
}
