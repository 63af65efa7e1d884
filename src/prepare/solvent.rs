//! NMR solvents and the residual signals that are masked before comparison.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// A deuterated NMR solvent.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum Solvent {
    /// Chloroform-d.
    #[serde(rename = "CDCl3")]
    Cdcl3,
    /// Dimethyl sulfoxide-d6.
    #[serde(rename = "DMSO-d6")]
    DmsoD6,
    /// Deuterium oxide.
    #[serde(rename = "D2O")]
    D2o,
    /// Methanol-d4.
    #[serde(rename = "CD3OD")]
    Cd3od,
    /// Acetone-d6.
    #[serde(rename = "acetone-d6")]
    AcetoneD6,
    /// Benzene-d6.
    #[serde(rename = "C6D6")]
    C6d6,
    /// Acetonitrile-d3.
    #[serde(rename = "CD3CN")]
    Cd3cn,
}

/// Half-width of the window masked around a residual solvent signal, ppm. Residual
/// multiplets span a few hundredths of a ppm (common practice).
pub const RESIDUAL_HALF_WIDTH: f64 = 0.05;
/// Half-width of the window masked around water, ppm; water moves with temperature and
/// concentration, so its window is wider (common practice).
pub const WATER_HALF_WIDTH: f64 = 0.10;

/// Half-width of the window masked around a solvent's 13C signal, ppm. The widest solvent
/// multiplet, the DMSO-d6 septet, spans about +-0.63 ppm at 100 MHz (J(C,D) about 21 Hz,
/// from memory), and 1 ppm also covers the 13C matching tolerance.
pub const CARBON_HALF_WIDTH: f64 = 1.0;

impl Solvent {
    /// Every supported solvent.
    pub const ALL: [Solvent; 7] = [
        Solvent::Cdcl3,
        Solvent::DmsoD6,
        Solvent::D2o,
        Solvent::Cd3od,
        Solvent::AcetoneD6,
        Solvent::C6d6,
        Solvent::Cd3cn,
    ];

    /// The conventional name.
    pub fn name(self) -> &'static str {
        match self {
            Solvent::Cdcl3 => "CDCl3",
            Solvent::DmsoD6 => "DMSO-d6",
            Solvent::D2o => "D2O",
            Solvent::Cd3od => "CD3OD",
            Solvent::AcetoneD6 => "acetone-d6",
            Solvent::C6d6 => "C6D6",
            Solvent::Cd3cn => "CD3CN",
        }
    }

    /// The residual protio-solvent 1H signal, ppm, when the solvent has one.
    ///
    /// Gottlieb, Kotlyar & Nudelman, "NMR Chemical Shifts of Common Laboratory Solvents as
    /// Trace Impurities", J. Org. Chem. 1997, 62, 7512-7515, Table 1.
    pub fn residual_ppm(self) -> Option<f64> {
        match self {
            Solvent::Cdcl3 => Some(7.26),
            Solvent::DmsoD6 => Some(2.50),
            Solvent::D2o => None,
            Solvent::Cd3od => Some(3.31),
            Solvent::AcetoneD6 => Some(2.05),
            Solvent::C6d6 => Some(7.16),
            Solvent::Cd3cn => Some(1.94),
        }
    }

    /// The water (HOD/H2O) signal in this solvent, ppm (Gottlieb et al. 1997, Table 1).
    pub fn water_ppm(self) -> f64 {
        match self {
            Solvent::Cdcl3 => 1.56,
            Solvent::DmsoD6 => 3.33,
            Solvent::D2o => 4.79,
            Solvent::Cd3od => 4.87,
            Solvent::AcetoneD6 => 2.84,
            Solvent::C6d6 => 0.40,
            Solvent::Cd3cn => 2.13,
        }
    }

    /// The solvent's own 13C signals (the centres of its C-D multiplets), ppm; none for D2O.
    ///
    /// Gottlieb, Kotlyar & Nudelman, J. Org. Chem. 1997, 62, 7512-7515, Table 1.
    pub fn carbon_ppm(self) -> &'static [f64] {
        match self {
            Solvent::Cdcl3 => &[77.16],
            Solvent::DmsoD6 => &[39.52],
            Solvent::D2o => &[],
            Solvent::Cd3od => &[49.00],
            Solvent::AcetoneD6 => &[29.84, 206.26],
            Solvent::C6d6 => &[128.06],
            Solvent::Cd3cn => &[1.32, 118.26],
        }
    }

    /// The regions masked in a 13C peak list for this solvent, `(lo, hi)` in ppm: each
    /// solvent signal +- [`CARBON_HALF_WIDTH`].
    pub fn carbon_masks(self) -> Vec<(f64, f64)> {
        self.carbon_ppm()
            .iter()
            .map(|&c| (c - CARBON_HALF_WIDTH, c + CARBON_HALF_WIDTH))
            .collect()
    }

    /// The regions masked for this solvent in a 1H spectrum, `(lo, hi)` in ppm.
    pub fn masks(self) -> Vec<(f64, f64)> {
        let mut out = Vec::with_capacity(2);
        if let Some(r) = self.residual_ppm() {
            out.push((r - RESIDUAL_HALF_WIDTH, r + RESIDUAL_HALF_WIDTH));
        }
        let w = self.water_ppm();
        out.push((w - WATER_HALF_WIDTH, w + WATER_HALF_WIDTH));
        out
    }
}

impl fmt::Display for Solvent {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Solvent {
    type Err = Error;

    fn from_str(s: &str) -> Result<Solvent> {
        let want = s.trim().to_ascii_lowercase().replace(['_', ' '], "-");
        let alias = match want.as_str() {
            "chloroform-d" => "cdcl3",
            "dmso" | "dmsod6" => "dmso-d6",
            "methanol-d4" => "cd3od",
            "acetoned6" => "acetone-d6",
            "benzene-d6" => "c6d6",
            "acetonitrile-d3" => "cd3cn",
            "water-d2" => "d2o",
            other => other,
        };
        Solvent::ALL
            .into_iter()
            .find(|s| s.name().to_ascii_lowercase() == alias)
            .ok_or_else(|| {
                let names: Vec<_> = Solvent::ALL.iter().map(|s| s.name()).collect();
                Error::invalid(
                    format!("unknown NMR solvent '{s}'"),
                    format!("use one of: {}", names.join(", ")),
                )
            })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn residual_and_water_positions_follow_gottlieb_1997() {
        // Gottlieb, Kotlyar & Nudelman, J. Org. Chem. 1997, 62, 7512, Table 1.
        let table = [
            (Solvent::Cdcl3, Some(7.26), 1.56),
            (Solvent::DmsoD6, Some(2.50), 3.33),
            (Solvent::D2o, None, 4.79),
            (Solvent::Cd3od, Some(3.31), 4.87),
            (Solvent::AcetoneD6, Some(2.05), 2.84),
            (Solvent::C6d6, Some(7.16), 0.40),
            (Solvent::Cd3cn, Some(1.94), 2.13),
        ];
        for (solvent, residual, water) in table {
            assert_eq!(solvent.residual_ppm(), residual, "{solvent}");
            assert_eq!(solvent.water_ppm(), water, "{solvent}");
        }
    }

    #[test]
    fn carbon_signals_follow_gottlieb_1997() {
        // Gottlieb, Kotlyar & Nudelman, J. Org. Chem. 1997, 62, 7512, Table 1 (13C).
        assert_eq!(Solvent::Cdcl3.carbon_ppm(), &[77.16]);
        assert_eq!(Solvent::DmsoD6.carbon_ppm(), &[39.52]);
        assert_eq!(Solvent::AcetoneD6.carbon_ppm(), &[29.84, 206.26]);
        assert!(Solvent::D2o.carbon_ppm().is_empty());
        assert_eq!(Solvent::Cdcl3.carbon_masks(), vec![(76.16, 78.16)]);
    }

    #[test]
    fn names_parse_case_insensitively() {
        assert_eq!("cdcl3".parse::<Solvent>().unwrap(), Solvent::Cdcl3);
        assert_eq!("DMSO".parse::<Solvent>().unwrap(), Solvent::DmsoD6);
        assert!(
            "CCl4"
                .parse::<Solvent>()
                .unwrap_err()
                .hint()
                .unwrap()
                .contains("CDCl3")
        );
    }
}
