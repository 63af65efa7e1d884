//! Techniques, their plausible input ranges and their default grids.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// A measurement technique. The names are the ones used on the command line and in manifests.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub enum Technique {
    /// Infrared absorption (transmission or ATR), x in cm-1.
    #[serde(rename = "ir")]
    Ir,
    /// Raman scattering, x as Raman shift in cm-1.
    #[serde(rename = "raman")]
    Raman,
    /// Electron-ionisation mass spectrum at unit resolution, x in m/z.
    #[serde(rename = "ms-ei")]
    MsEi,
    /// Proton NMR, x in ppm.
    #[serde(rename = "nmr-1h")]
    Nmr1h,
    /// Carbon-13 NMR peak list, x in ppm.
    #[serde(rename = "nmr-13c")]
    Nmr13c,
}

impl Technique {
    /// Every technique, in display order.
    pub const ALL: [Technique; 5] = [
        Technique::Ir,
        Technique::Raman,
        Technique::MsEi,
        Technique::Nmr1h,
        Technique::Nmr13c,
    ];

    /// The command-line name.
    pub fn name(self) -> &'static str {
        match self {
            Technique::Ir => "ir",
            Technique::Raman => "raman",
            Technique::MsEi => "ms-ei",
            Technique::Nmr1h => "nmr-1h",
            Technique::Nmr13c => "nmr-13c",
        }
    }

    /// The quantity on the x axis, for headers and messages.
    pub fn x_label(self) -> &'static str {
        match self {
            Technique::Ir => "wavenumber (cm-1)",
            Technique::Raman => "Raman shift (cm-1)",
            Technique::MsEi => "m/z",
            Technique::Nmr1h | Technique::Nmr13c => "chemical shift (ppm)",
        }
    }

    /// The technique's name as reports write it in titles and headings, e.g. `¹H NMR`.
    pub fn title(self) -> &'static str {
        match self {
            Technique::Ir => "IR",
            Technique::Raman => "Raman",
            Technique::MsEi => "EI mass spectrum",
            Technique::Nmr1h => "\u{B9}H NMR",
            Technique::Nmr13c => "\u{B9}\u{B3}C NMR",
        }
    }

    /// The unit of x as reports typeset it: `cm⁻¹`, `m/z` or `ppm` ([`Technique::x_label`]
    /// writes `cm-1` for terminals).
    pub fn x_unit_symbol(self) -> &'static str {
        match self {
            Technique::Ir | Technique::Raman => "cm\u{207B}\u{B9}",
            Technique::MsEi => "m/z",
            Technique::Nmr1h | Technique::Nmr13c => "ppm",
        }
    }

    /// The title of a plot's x axis, typeset: the quantity and its unit.
    pub fn x_axis_title(self) -> &'static str {
        match self {
            Technique::Ir => "wavenumber / cm\u{207B}\u{B9}",
            Technique::Raman => "Raman shift / cm\u{207B}\u{B9}",
            Technique::MsEi => "m/z",
            Technique::Nmr1h | Technique::Nmr13c => "chemical shift \u{3B4} / ppm",
        }
    }

    /// The title of a plot's y axis for prepared spectra, each drawn scaled to its maximum.
    pub fn y_axis_title(self) -> &'static str {
        match self {
            Technique::MsEi => "relative abundance / %",
            Technique::Ir => "absorbance, scaled to 1",
            Technique::Raman => "intensity, scaled to 1",
            Technique::Nmr1h => "area per bin, scaled to 1",
            Technique::Nmr13c => "line intensity, scaled to 1",
        }
    }

    /// The range of x values that can belong to this technique at all; values outside it
    /// mean a wrong file, a wrong unit or a wrong technique.
    pub fn plausible_x(self) -> (f64, f64) {
        match self {
            Technique::Ir => (10.0, 10_000.0),
            Technique::Raman => (-500.0, 5_000.0),
            Technique::MsEi => (0.0, 5_000.0),
            Technique::Nmr1h => (-5.0, 20.0),
            // 13C shifts of organic compounds lie within about 0..230 ppm (common practice);
            // -10..250 leaves room for referencing offsets and unusual carbons.
            Technique::Nmr13c => (-10.0, 250.0),
        }
    }

    /// True when a file of this technique may be a bare list of positions, one per line
    /// (a 13C shift list: broadband-decoupled 13C heights are not compared, so a list of
    /// shifts is a complete spectrum). Every other technique needs x and y.
    pub fn reads_position_list(self) -> bool {
        self == Technique::Nmr13c
    }

    /// The fewest points a usable spectrum of this technique has.
    pub fn min_points(self) -> usize {
        match self {
            // Peak lists: one peak is a (poor but) usable spectrum.
            Technique::MsEi | Technique::Nmr13c => 1,
            _ => 10,
        }
    }

    /// The default grid a new library records for this technique.
    pub fn default_grid(self) -> Grid {
        match self {
            // DESIGN: 4000-400 cm-1 at 2 cm-1, CO2 masked (common practice for mid-IR).
            Technique::Ir => Grid {
                start: 400.0,
                stop: 4000.0,
                step: 2.0,
                masks: vec![(2280.0, 2400.0)],
            },
            // Raman does not see atmospheric CO2 the way an IR beam path does, so no mask.
            Technique::Raman => Grid {
                start: 100.0,
                stop: 3500.0,
                step: 2.0,
                masks: vec![],
            },
            // Nominal masses 1..1000.
            Technique::MsEi => Grid {
                start: 1.0,
                stop: 1000.0,
                step: 1.0,
                masks: vec![],
            },
            // 0.04 ppm bins (common practice in NMR metabolomics) over -1..14 ppm.
            Technique::Nmr1h => Grid {
                start: -1.0,
                stop: 14.0,
                step: 0.04,
                masks: vec![],
            },
            // 1 ppm sticks over -10..250 ppm, the plausible range: a 13C peak list is compared
            // by its peak positions; the stick vector only serves the cosine column.
            Technique::Nmr13c => Grid {
                start: -10.0,
                stop: 250.0,
                step: 1.0,
                masks: vec![],
            },
        }
    }

    /// Default one-to-one peak matching tolerance in x units (DESIGN: IR 4-8 cm-1,
    /// MS exact nominal mass, 1H 0.03 ppm, 13C 1 ppm).
    pub fn peak_tolerance(self) -> f64 {
        match self {
            Technique::Ir | Technique::Raman => 6.0,
            Technique::MsEi => 0.5,
            Technique::Nmr1h => 0.03,
            // Solvent and referencing differences move 13C shifts by up to about 1 ppm
            // (common practice).
            Technique::Nmr13c => 1.0,
        }
    }

    /// True for the two NMR techniques, whose spectra carry a solvent.
    pub fn is_nmr(self) -> bool {
        matches!(self, Technique::Nmr1h | Technique::Nmr13c)
    }
}

impl fmt::Display for Technique {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Technique {
    type Err = Error;

    fn from_str(s: &str) -> Result<Technique> {
        let wanted = s.trim().to_ascii_lowercase();
        let found = match wanted.as_str() {
            "ir" | "ftir" | "atr-ir" => Some(Technique::Ir),
            "raman" => Some(Technique::Raman),
            "ms-ei" | "ei-ms" | "ms" => Some(Technique::MsEi),
            "nmr-1h" | "1h-nmr" | "1h" => Some(Technique::Nmr1h),
            "nmr-13c" | "13c-nmr" | "13c" => Some(Technique::Nmr13c),
            _ => None,
        };
        found.ok_or_else(|| {
            // clap shows only the message of a value parser's error, so the message itself
            // names the techniques.
            let which = if wanted.contains("nmr") {
                " (NMR is nmr-1h or nmr-13c)"
            } else {
                ""
            };
            Error::invalid(
                format!("unknown technique '{s}'{which}: use ir, raman, ms-ei, nmr-1h or nmr-13c"),
                "use one of: ir, raman, ms-ei, nmr-1h, nmr-13c",
            )
        })
    }
}

/// The x positions every prepared vector of one technique is laid on, and the regions
/// that are zeroed before normalisation. One grid per technique per library, fixed at `init`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Grid {
    /// First grid point (inclusive).
    pub start: f64,
    /// Last grid point (inclusive).
    pub stop: f64,
    /// Spacing between points.
    pub step: f64,
    /// Regions `(lo, hi)` in x units that are set to zero.
    pub masks: Vec<(f64, f64)>,
}

impl Grid {
    /// Number of points on the grid.
    pub fn len(&self) -> usize {
        ((self.stop - self.start) / self.step).round() as usize + 1
    }

    /// True when the grid has no points (never for a valid grid).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The x value of point `i`.
    pub fn x(&self, i: usize) -> f64 {
        self.start + i as f64 * self.step
    }

    /// The index of the grid point nearest to `x`, if `x` lies within half a step of the grid.
    pub fn index_of(&self, x: f64) -> Option<usize> {
        let i = ((x - self.start) / self.step).round();
        (i >= 0.0 && (i as usize) < self.len()).then_some(i as usize)
    }

    /// True when `x` lies inside one of the masked regions.
    pub fn masked(&self, x: f64) -> bool {
        self.masks.iter().any(|&(lo, hi)| x >= lo && x <= hi)
    }

    /// Checks the grid is usable.
    pub fn validate(&self) -> Result<()> {
        if !(self.step > 0.0
            && self.stop > self.start
            && self.start.is_finite()
            && self.stop.is_finite())
        {
            return Err(Error::invalid(
                format!(
                    "grid {}..{} step {} is not valid",
                    self.start, self.stop, self.step
                ),
                "give start < stop and a positive step",
            ));
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_grids_have_the_documented_sizes() {
        // 4000-400 cm-1 at 2 cm-1 is 1801 points (DESIGN.md).
        assert_eq!(Technique::Ir.default_grid().len(), 1801);
        assert_eq!(Technique::MsEi.default_grid().len(), 1000);
        assert_eq!(Technique::Nmr1h.default_grid().len(), 376);
        assert_eq!(Technique::Nmr13c.default_grid().len(), 261);
    }

    #[test]
    fn technique_names_round_trip() {
        for t in Technique::ALL {
            assert_eq!(t.name().parse::<Technique>().unwrap(), t);
        }
        let err = "uv".parse::<Technique>().unwrap_err();
        assert!(err.hint().unwrap().contains("ms-ei"));
    }

    #[test]
    fn labels_are_distinct_and_name_the_unit() {
        // The x unit of each technique (common practice): wavenumber and Raman shift in cm-1,
        // mass-to-charge ratio as m/z, chemical shift in ppm.
        let units = |t: Technique| match t {
            Technique::Ir | Technique::Raman => ("cm-1", "cm\u{207B}\u{B9}"),
            Technique::MsEi => ("m/z", "m/z"),
            Technique::Nmr1h | Technique::Nmr13c => ("ppm", "ppm"),
        };
        for t in Technique::ALL {
            let (plain, typeset) = units(t);
            assert!(t.x_label().contains(plain), "{t}: {}", t.x_label());
            assert!(
                t.x_axis_title().contains(typeset),
                "{t}: {}",
                t.x_axis_title()
            );
            assert_eq!(t.x_unit_symbol(), typeset, "{t}");
            for u in Technique::ALL.into_iter().filter(|&u| u != t) {
                assert_ne!(t.title(), u.title());
                assert_ne!(t.y_axis_title(), u.y_axis_title());
            }
        }
    }

    #[test]
    fn grid_index_and_mask() {
        let g = Technique::Ir.default_grid();
        assert_eq!(g.index_of(400.0), Some(0));
        assert_eq!(g.index_of(4000.0), Some(1800));
        assert_eq!(g.index_of(401.2), Some(1));
        assert_eq!(g.index_of(4002.0), None);
        assert!(g.masked(2350.0));
        assert!(!g.masked(1715.0));
    }
}
