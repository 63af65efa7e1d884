//! Checks of parsed points against what a technique allows: x converted to the technique's
//! unit, the plausible range, enough points, and a shape that fits the technique (a file
//! that looks like another technique's is refused, saying what it looks like).

use std::path::Path;

use super::ParsedPoints;
use crate::error::{Error, Location, Result};
use crate::spectrum::XUnit;
use crate::technique::Technique;

/// The largest |y| accepted. Far above any detector's counts or abundances (a 64-bit
/// counter ends near 1.8e19), and far below where preparing overflows: a square of 1e200 is
/// infinite in f64, and a value above 3.4e38 is infinite in the f32 of a stored vector
/// (IEEE 754-2019, binary32 and binary64 ranges).
pub const MAX_MAGNITUDE: f64 = 1e30;

/// Checks parsed points against what the technique allows, after converting x to the
/// technique's own unit. Returns the converted points.
pub fn check_points(
    path: &Path,
    parsed: &ParsedPoints,
    technique: Technique,
    x_unit: XUnit,
) -> Result<Vec<(f64, f64)>> {
    let n = parsed.points.len();
    let at = |i: usize| Location::line(path, parsed.lines[i]);
    let shape = Shape::of(&parsed.points);
    if n < technique.min_points() {
        let mut reason = format!(
            "only {n} data points; a usable {technique} spectrum has at least {}",
            technique.min_points()
        );
        let hint = match shape.looks_like(technique) {
            Some((what, _)) => {
                reason.push_str(&format!("; {}: this looks like {what}", shape.describe()));
                shape.hint(technique)
            }
            None => "check that the whole spectrum was exported".to_string(),
        };
        return Err(Error::input(Location::file(path), reason, hint));
    }

    let converted: Vec<(f64, f64)> = parsed
        .points
        .iter()
        .map(|&(x, y)| (x_unit.to_wavenumber(x), y))
        .collect();

    if let Some(reason) = shape.refuses(technique, x_unit) {
        return Err(Error::input(
            Location::file(path),
            reason,
            shape.hint(technique),
        ));
    }

    if technique == Technique::Ir && x_unit == XUnit::Wavenumber {
        let max_x = parsed.points.iter().map(|p| p.0).fold(f64::MIN, f64::max);
        if max_x <= 50.0 && max_x > 0.0 {
            // Mid-IR wavelengths (2.5-25 um) and 1H shifts (0-16 ppm) overlap: say both.
            let (also, or_nmr) = match shape.looks_like(technique) {
                Some((what, [Technique::Nmr1h])) => (
                    format!("; {}: it may also be {what}", shape.describe()),
                    ", or give the technique as nmr-1h",
                ),
                _ => (String::new(), ""),
            };
            return Err(Error::input(
                Location::file(path),
                format!(
                    "x values end at {max_x}, which looks like a wavelength in micrometres, not cm-1{also}"
                ),
                format!(
                    "pass --x-unit um (or put x_unit=um in the manifest) to convert wavelength to wavenumber{or_nmr}"
                ),
            ));
        }
        if max_x > technique.plausible_x().1 {
            return Err(Error::input(
                Location::file(path),
                format!(
                    "x values reach {max_x}, which looks like a wavelength in nanometres, not cm-1"
                ),
                "pass --x-unit nm (or put x_unit=nm in the manifest) to convert wavelength to wavenumber",
            ));
        }
    }

    let (lo, hi) = technique.plausible_x();
    for (i, &(x, y)) in converted.iter().enumerate() {
        if y.abs() > MAX_MAGNITUDE {
            return Err(Error::input(
                at(i),
                format!(
                    "y = {y:e} is far larger than any measured value (more than {MAX_MAGNITUDE:e})"
                ),
                "check the column and the export: intensities of this size overflow when the spectrum is prepared",
            ));
        }
        let out_of_range = if technique == Technique::MsEi {
            x <= lo || x > hi
        } else {
            x < lo || x > hi
        };
        if out_of_range {
            let mut reason = format!(
                "x = {} is outside the plausible {technique} range {lo}..{hi} ({})",
                parsed.points[i].0,
                technique.x_label()
            );
            let hint = match shape.looks_like(technique) {
                Some(guess) => {
                    reason.push_str(&format!(
                        "; {}: this looks like {}",
                        shape.describe(),
                        guess.0
                    ));
                    shape.hint(technique)
                }
                None => "check the technique and the x unit of the file".to_string(),
            };
            return Err(Error::input(at(i), reason, hint));
        }
        if technique == Technique::MsEi && y < 0.0 {
            return Err(Error::input(
                at(i),
                format!("negative ion abundance {y} at m/z {x}"),
                "a mass spectrum's abundances must be zero or positive; export the centroided peak list",
            ));
        }
    }

    if converted.iter().all(|p| p.1 == 0.0) {
        let reason = if technique == Technique::MsEi {
            "no peaks: every abundance is zero"
        } else {
            "every intensity is zero"
        };
        return Err(Error::input(
            Location::file(path),
            reason,
            "the export holds no signal; export the spectrum again",
        ));
    }

    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| converted[a].0.total_cmp(&converted[b].0));
    for pair in order.windows(2) {
        if converted[pair[0]].0 == converted[pair[1]].0 {
            let (first, second) = (
                parsed.lines[pair[0]].min(parsed.lines[pair[1]]),
                parsed.lines[pair[0]].max(parsed.lines[pair[1]]),
            );
            return Err(Error::input(
                Location::line(path, second),
                format!(
                    "x = {} appears twice (lines {first} and {second})",
                    parsed.points[pair[0]].0
                ),
                "remove or average the repeated point",
            ));
        }
    }
    Ok(converted)
}

/// What a file's x axis looks like: its range, its number of points and whether they are
/// evenly spaced. Used to refuse a file that cannot be the technique it is given as, and to
/// say in the message which technique it looks like.
#[derive(Debug, Clone, Copy)]
struct Shape {
    lo: f64,
    hi: f64,
    n: usize,
    /// The spacing, when every gap is within 1 % of the median gap (a sampled spectrum).
    step: Option<f64>,
    /// True when every x is a whole number (nominal masses, or a coarse grid).
    whole: bool,
}

/// A spectrum with at least this many points sampled on a grid is a continuous spectrum, not
/// a peak list: an EI peak list of a small molecule has tens of ions, a 13C list tens of
/// lines (common practice).
const DENSE_POINTS: usize = 200;

/// EI spectra of the compounds a GC-MS library holds are recorded up to about m/z 1000
/// (common practice; the default EI grid stops there).
const EI_TOP: f64 = 1000.0;

/// What these points look like (by their x range, spacing and number, the ranges the
/// refusals of [`check_points`] name): a description of the kind of spectrum and the
/// techniques it suggests, most likely first; `None` when no kind fits. For a form that
/// suggests a technique.
pub fn looks_like(points: &[(f64, f64)]) -> Option<(&'static str, &'static [Technique])> {
    if points.is_empty() {
        return None;
    }
    Shape::of(points)
        .guesses()
        .into_iter()
        .find(|(fits, _, _)| *fits)
        .map(|(_, what, techniques)| (what, techniques))
}

impl Shape {
    fn of(points: &[(f64, f64)]) -> Shape {
        let mut xs: Vec<f64> = points.iter().map(|p| p.0).collect();
        xs.sort_by(f64::total_cmp);
        let (lo, hi) = (xs[0], xs[xs.len() - 1]);
        let mut gaps: Vec<f64> = xs.windows(2).map(|w| w[1] - w[0]).collect();
        gaps.sort_by(f64::total_cmp);
        let step = gaps.get(gaps.len() / 2).copied().filter(|&median| {
            median > 0.0 && gaps.iter().all(|g| (g - median).abs() <= 0.01 * median)
        });
        Shape {
            lo,
            hi,
            n: xs.len(),
            step,
            whole: xs.iter().all(|x| x.fract() == 0.0),
        }
    }

    fn dense(&self) -> bool {
        self.n >= DENSE_POINTS
    }

    /// "x runs from 400 to 4000 in 1801 evenly spaced points".
    fn describe(&self) -> String {
        let spacing = match self.step {
            Some(_) => " evenly spaced",
            None => "",
        };
        let noun = if self.n == 1 { "point" } else { "points" };
        format!(
            "x runs from {} to {} in {}{spacing} {noun}",
            round_for_display(self.lo),
            round_for_display(self.hi),
            self.n
        )
    }

    /// What the file looks like, other than `given`: a description and the techniques it
    /// suggests. Ranges from the techniques' own plausible ranges, narrowed to where real
    /// spectra lie (common practice): IR and Raman spectra reach beyond 1000 cm-1, 1H spectra
    /// lie within -2..16 ppm, 13C within its plausible -10..250 ppm, EI peaks at whole m/z up
    /// to about 1000.
    fn looks_like(&self, given: Technique) -> Option<(&'static str, &'static [Technique])> {
        self.guesses()
            .into_iter()
            .find(|(fits, _, techniques)| *fits && !techniques.contains(&given))
            .map(|(_, what, techniques)| (what, techniques))
    }

    /// Each kind of spectrum [`Shape::looks_like`] knows, whether this shape fits it, how it
    /// is described and the techniques it suggests.
    fn guesses(&self) -> [(bool, &'static str, &'static [Technique]); 4] {
        let optical = self.dense() && self.hi > EI_TOP && self.lo >= -500.0 && self.hi <= 10_000.0;
        let proton = self.lo >= -2.0 && self.hi <= 16.0;
        let (carbon_lo, carbon_hi) = Technique::Nmr13c.plausible_x();
        let carbon = self.lo >= carbon_lo && self.hi <= carbon_hi;
        let ei = self.whole && self.lo >= 1.0 && self.hi <= EI_TOP && !self.dense();
        [
            (
                optical,
                "an IR or Raman spectrum (cm-1)",
                &[Technique::Ir, Technique::Raman],
            ),
            (proton, "a 1H NMR spectrum (ppm)", &[Technique::Nmr1h]),
            (
                carbon && !ei,
                "a 13C NMR spectrum or shift list (ppm)",
                &[Technique::Nmr13c],
            ),
            (ei, "an EI mass spectrum (m/z)", &[Technique::MsEi]),
        ]
    }

    /// Why a file inside `technique`'s plausible range still cannot be that technique, if it
    /// cannot: a dense spectrum running past m/z 1000 given as EI-MS, a spectrum within NMR's
    /// ppm range given as IR or Raman, a dense spectrum within 1H's range given as 13C.
    fn refuses(&self, technique: Technique, x_unit: XUnit) -> Option<String> {
        let wrong = match technique {
            Technique::MsEi => self.dense() && self.hi > EI_TOP,
            // An IR or Raman spectrum reaches into the fingerprint region above 250 cm-1;
            // x that ends below it is a chemical shift. A positive range ending at 50 or
            // below is left to the micrometre check, which says more.
            Technique::Ir | Technique::Raman => {
                x_unit == XUnit::Wavenumber
                    && self.hi <= 250.0
                    && !(technique == Technique::Ir && self.lo > 0.0 && self.hi <= 50.0)
            }
            Technique::Nmr13c => self.dense() && self.lo >= -2.0 && self.hi <= 16.0,
            Technique::Nmr1h => false,
        };
        if !wrong {
            return None;
        }
        let (what, _) = self.looks_like(technique)?;
        Some(format!(
            "{}: this looks like {what}, not {technique} data",
            self.describe(),
        ))
    }

    /// The hint for a refused file: the techniques it looks like.
    fn hint(&self, given: Technique) -> String {
        match self.looks_like(given) {
            Some((_, techniques)) => {
                let names: Vec<&str> = techniques.iter().map(|t| t.name()).collect();
                format!(
                    "give the technique as {} (--technique, or the technique column of a \
                     manifest), or check that this is the file you meant",
                    names.join(" or ")
                )
            }
            None => "check the technique and the x unit of the file".to_string(),
        }
    }
}

/// A number as a message shows it: whole numbers without decimals, others to 4 significant
/// digits.
fn round_for_display(x: f64) -> String {
    if x.fract() == 0.0 && x.abs() < 1e9 {
        format!("{x:.0}")
    } else {
        let digits = (3 - x.abs().log10().floor() as i32).clamp(0, 6) as usize;
        let text = format!("{x:.digits$}");
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}
