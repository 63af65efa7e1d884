//! Options that `search` and `identify` share: how hits are scored and what rules them out.

use clap::Args;
use whorl::score::{Measure, ScoreParams};
use whorl::search::{Constraints, RiWindow, parse_alkanes, retention_index};
use whorl::technique::Technique;

/// How hits are scored; every option defaults to the technique's documented default.
#[derive(Debug, Args)]
pub struct ScoringArgs {
    /// Ranking measure: correlation, derivative or cosine (IR, Raman); cosine or correlation
    /// (1H NMR); entropy, composite or cosine (EI-MS); shift-match or cosine (13C NMR)
    /// [default: IR correlation, Raman derivative, EI-MS entropy, 1H cosine, 13C shift-match]
    #[arg(long, value_name = "M")]
    pub measure: Option<Measure>,
    /// Peak matching tolerance in the technique's x unit [default: IR/Raman 6 cm-1, MS 0.5,
    /// 1H 0.03 ppm, 13C 1.0 ppm]
    #[arg(long, value_name = "X")]
    pub tolerance: Option<f64>,
    /// EI-MS composite measure, reverse search (its default): only m/z present in the
    /// reference count, so co-eluting and background ions in the unknown do not lower the score
    #[arg(long, conflicts_with = "forward")]
    pub reverse: bool,
    /// EI-MS composite measure, forward search: every m/z of the unknown counts
    #[arg(long)]
    pub forward: bool,
    /// EI-MS: leave out ions below this m/z, in the unknown and the references
    #[arg(long, value_name = "MZ")]
    pub min_mz: Option<f64>,
    /// EI-MS composite measure: exponent of m/z in the peak weight [default: 3]
    #[arg(long, value_name = "N")]
    pub mz_exponent: Option<f64>,
    /// EI-MS composite measure: exponent of the abundance in the peak weight [default: 0.6]
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
        let composite_only = [
            ("--reverse", self.reverse),
            ("--forward", self.forward),
            ("--mz-exponent", self.mz_exponent.is_some()),
            ("--intensity-exponent", self.intensity_exponent.is_some()),
        ];
        if technique == Technique::MsEi
            && p.measure != Measure::Composite
            && let Some((flag, _)) = composite_only.iter().find(|(_, given)| *given)
        {
            return Err(whorl::Error::invalid(
                format!("{flag} shapes the composite measure, not {}", p.measure),
                "add --measure composite to rank by the Stein & Scott composite",
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
    /// Half-width of the retention-index window, in index units
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
