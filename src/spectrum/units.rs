//! Units of the x and y axes, and the conversions between them.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// Unit of the x axis as given in a file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum XUnit {
    /// Wavenumber or Raman shift, cm-1.
    #[serde(rename = "cm-1")]
    Wavenumber,
    /// Wavelength in micrometres (IR only).
    #[serde(rename = "um")]
    Micrometre,
    /// Wavelength in nanometres (IR only).
    #[serde(rename = "nm")]
    Nanometre,
    /// Mass-to-charge ratio.
    #[serde(rename = "m/z")]
    MassToCharge,
    /// Chemical shift, ppm.
    #[serde(rename = "ppm")]
    Ppm,
}

impl XUnit {
    /// The name used on the command line.
    pub fn name(self) -> &'static str {
        match self {
            XUnit::Wavenumber => "cm-1",
            XUnit::Micrometre => "um",
            XUnit::Nanometre => "nm",
            XUnit::MassToCharge => "m/z",
            XUnit::Ppm => "ppm",
        }
    }

    /// Converts an x value in this unit to wavenumber (cm-1); identity for other units.
    pub fn to_wavenumber(self, x: f64) -> f64 {
        match self {
            // 1 cm = 1e4 um = 1e7 nm.
            XUnit::Micrometre => 1.0e4 / x,
            XUnit::Nanometre => 1.0e7 / x,
            _ => x,
        }
    }
}

impl fmt::Display for XUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for XUnit {
    type Err = Error;

    fn from_str(s: &str) -> Result<XUnit> {
        match s.trim().to_ascii_lowercase().as_str() {
            "cm-1" | "cm^-1" | "1/cm" | "wavenumber" => Ok(XUnit::Wavenumber),
            "um" | "µm" | "micrometre" | "micron" => Ok(XUnit::Micrometre),
            "nm" | "nanometre" => Ok(XUnit::Nanometre),
            "m/z" | "mz" => Ok(XUnit::MassToCharge),
            "ppm" => Ok(XUnit::Ppm),
            _ => Err(Error::invalid(
                format!("unknown x unit '{s}'"),
                "use one of: cm-1, um, nm (IR), m/z, ppm",
            )),
        }
    }
}

/// Unit of the y axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum YUnit {
    /// Absorbance (IR).
    Absorbance,
    /// Transmittance as a fraction 0..1 (IR).
    Transmittance,
    /// Transmittance in percent 0..100 (IR).
    TransmittancePercent,
    /// Detector counts or arbitrary intensity (Raman, NMR).
    Counts,
    /// Relative or absolute ion abundance (MS).
    Relative,
    /// Arbitrary intensity (NMR).
    Intensity,
}

impl YUnit {
    /// The name used on the command line and in manifests.
    pub fn name(self) -> &'static str {
        match self {
            YUnit::Absorbance => "absorbance",
            YUnit::Transmittance => "transmittance",
            YUnit::TransmittancePercent => "transmittance-percent",
            YUnit::Counts => "counts",
            YUnit::Relative => "relative",
            YUnit::Intensity => "intensity",
        }
    }

    /// True for the two transmittance units.
    pub fn is_transmittance(self) -> bool {
        matches!(self, YUnit::Transmittance | YUnit::TransmittancePercent)
    }
}

impl fmt::Display for YUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for YUnit {
    type Err = Error;

    fn from_str(s: &str) -> Result<YUnit> {
        let norm = s.trim().to_ascii_lowercase().replace(['_', ' '], "-");
        match norm.as_str() {
            "absorbance" | "a" | "abs" => Ok(YUnit::Absorbance),
            "transmittance" | "t" => Ok(YUnit::Transmittance),
            "transmittance-percent" | "%t" | "percent-transmittance" | "t%" => {
                Ok(YUnit::TransmittancePercent)
            }
            "counts" | "count" => Ok(YUnit::Counts),
            "relative" | "abundance" | "relative-abundance" => Ok(YUnit::Relative),
            "intensity" | "arbitrary" | "a.u." | "au" => Ok(YUnit::Intensity),
            _ => Err(Error::invalid(
                format!("unknown y unit '{s}'"),
                "use one of: absorbance, transmittance, transmittance-percent, counts, relative, intensity",
            )),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wavelength_converts_to_wavenumber() {
        // 1 um corresponds to 10000 cm-1 and 2.5 um to 4000 cm-1 (definition of wavenumber).
        assert_eq!(XUnit::Micrometre.to_wavenumber(2.5), 4000.0);
        assert_eq!(XUnit::Nanometre.to_wavenumber(25_000.0), 400.0);
    }

    #[test]
    fn unit_names_parse() {
        assert_eq!(
            "transmittance_percent".parse::<YUnit>().unwrap(),
            YUnit::TransmittancePercent
        );
        assert_eq!("%T".parse::<YUnit>().unwrap(), YUnit::TransmittancePercent);
        assert!("furlong".parse::<YUnit>().is_err());
    }
}
