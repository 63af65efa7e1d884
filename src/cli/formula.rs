//! `whorl formula`: masses, IHD, nitrogen rule and isotope pattern of a formula.

use std::io::Write;
use std::process::ExitCode;

use clap::Args;
use whorl::chem::{FormulaSummary, parse_formula, summarize};

use super::{Context, output};

#[derive(Debug, Args)]
pub struct FormulaArgs {
    /// Molecular formula, e.g. C8H10N4O2 (element symbols with counts; no brackets or charges)
    pub formula: String,
    /// Print as JSON
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: FormulaArgs, _ctx: &Context) -> anyhow::Result<ExitCode> {
    let summary = summarize(&parse_formula(&args.formula)?)?;
    let mut out = std::io::stdout().lock();
    if args.json {
        output::json(&mut out, &summary)?;
    } else {
        write_summary(&mut out, &summary)?;
    }
    Ok(ExitCode::SUCCESS)
}

/// The label of an isotope peak: M, M+1, M-1.
fn peak_label(shift: i64) -> String {
    match shift {
        0 => "M".to_string(),
        s if s > 0 => format!("M+{s}"),
        s => format!("M{s}"),
    }
}

/// An IHD without a trailing ".0" when it is whole.
pub fn format_ihd(ihd: f64) -> String {
    if ihd.fract() == 0.0 {
        format!("{ihd:.0}")
    } else {
        format!("{ihd:.1}")
    }
}

fn write_summary(out: &mut impl Write, s: &FormulaSummary) -> anyhow::Result<()> {
    let weights = if s.conventional_weights.is_empty() {
        "CIAAW 2021 standard atomic weights".to_string()
    } else {
        format!(
            "CIAAW 2021 standard atomic weights; conventional values for {}",
            s.conventional_weights.join(", ")
        )
    };
    let rule = &s.nitrogen_rule;
    let verdict = if rule.consistent {
        "consistent with an even-electron neutral molecule"
    } else {
        "not possible for an even-electron neutral molecule (a radical or an ion?)"
    };
    let pattern: Vec<String> = s
        .isotopes
        .iter()
        .map(|p| format!("{} {:.2}", peak_label(p.shift), p.relative))
        .collect();
    writeln!(out, "formula            {}", s.formula)?;
    writeln!(
        out,
        "average mass       {:.4} g/mol  ({weights})",
        s.average_mass
    )?;
    writeln!(
        out,
        "monoisotopic mass  {:.6} u  (AME2016; most abundant isotopes)",
        s.monoisotopic_mass
    )?;
    writeln!(out, "nominal mass       {}", s.nominal_mass)?;
    writeln!(
        out,
        "IHD                {}  (rings plus double bonds)",
        format_ihd(s.ihd)
    )?;
    writeln!(
        out,
        "nitrogen rule      {} N, {} nominal mass: {verdict}",
        rule.nitrogens, rule.nominal_mass_parity
    )?;
    writeln!(
        out,
        "isotope pattern    {}  (M = 100; IUPAC 2009 abundances)",
        pattern.join("   ")
    )?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn labels() {
        assert_eq!(peak_label(0), "M");
        assert_eq!(peak_label(2), "M+2");
        assert_eq!(peak_label(-1), "M-1");
        assert_eq!(format_ihd(4.0), "4");
        assert_eq!(format_ihd(0.5), "0.5");
    }
}
