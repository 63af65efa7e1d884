//! Synthetic spectra for the scan's equivalence tests and for `scripts/bench`: seeded,
//! deterministic, and stored through the ordinary staging and `Library::store` path.

use std::path::PathBuf;

use super::{Metadata, Recipes, Staged, Submission};
use crate::error::Result;
use crate::prepare::{Conditions, prepare};
use crate::spectrum::{RawSpectrum, XUnit, YUnit, encode_points, sha256_hex};
use crate::technique::Technique;

/// A small seeded generator (SplitMix64, Steele, Lea & Flood, OOPSLA 2014).
#[derive(Debug, Clone)]
pub struct Rng(u64);

impl Rng {
    /// A generator from a seed.
    pub fn new(seed: u64) -> Rng {
        Rng(seed)
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in `lo..hi`.
    pub fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// An IR absorbance spectrum, 4000 to 400 cm-1 every 4 cm-1: a sloping baseline and 4 to 12
/// Gaussian bands.
pub fn ir_points(rng: &mut Rng) -> Vec<(f64, f64)> {
    let n = 4 + (rng.next_u64() % 9) as usize;
    let bands: Vec<(f64, f64, f64)> = (0..n)
        .map(|_| {
            (
                rng.uniform(450.0, 3950.0),
                rng.uniform(5.0, 40.0),
                rng.uniform(0.05, 1.0),
            )
        })
        .collect();
    let slope = rng.uniform(0.0, 0.05);
    (0..=900)
        .map(|i| {
            let x = 4000.0 - 4.0 * f64::from(i);
            let y = 0.02
                + slope * (4000.0 - x) / 3600.0
                + bands
                    .iter()
                    .map(|&(c, w, h)| h * (-((x - c) / w).powi(2)).exp())
                    .sum::<f64>();
            (x, y)
        })
        .collect()
}

/// An EI mass spectrum at unit resolution: 8 to 40 ions between m/z 15 and 400.
pub fn ms_points(rng: &mut Rng) -> Vec<(f64, f64)> {
    let n = 8 + (rng.next_u64() % 33) as usize;
    let mut ions: Vec<(f64, f64)> = (0..n)
        .map(|_| {
            (
                (15 + rng.next_u64() % 386) as f64,
                rng.uniform(1.0, 100.0).powi(2) / 10.0,
            )
        })
        .collect();
    ions.sort_by(|a, b| a.0.total_cmp(&b.0));
    ions.dedup_by(|a, b| a.0 == b.0);
    ions
}

/// A measured-again copy: every y scaled by `1 + noise x uniform(-1, 1)`.
pub fn perturb(points: &[(f64, f64)], rng: &mut Rng, noise: f64) -> Vec<(f64, f64)> {
    points
        .iter()
        .map(|&(x, y)| (x, y * (1.0 + noise * rng.uniform(-1.0, 1.0))))
        .collect()
}

/// Stages synthetic points as a library spectrum named `name` with `tags`.
pub fn staged(
    recipes: &Recipes,
    technique: Technique,
    points: Vec<(f64, f64)>,
    name: &str,
    tags: &[&str],
) -> Result<Staged> {
    let recipe = &recipes[&technique];
    let (x_unit, y_unit) = match technique {
        Technique::MsEi => (XUnit::MassToCharge, YUnit::Relative),
        Technique::Nmr1h | Technique::Nmr13c => (XUnit::Ppm, YUnit::Intensity),
        Technique::Raman => (XUnit::Wavenumber, YUnit::Counts),
        Technique::Ir => (XUnit::Wavenumber, YUnit::Absorbance),
    };
    let path = PathBuf::from(format!("synthetic/{name}.csv"));
    let conditions = Conditions {
        y_unit: Some(y_unit),
        solvent: None,
    };
    let prepared = prepare(&path, recipe, &points, &conditions)?;
    let file_sha256 = sha256_hex(&encode_points(&points));
    Ok(Staged {
        submission: Submission {
            path,
            technique,
            metadata: Metadata {
                name: name.to_string(),
                tags: tags.iter().map(|t| t.to_string()).collect(),
                ..Metadata::default()
            },
            x_unit: None,
            y_unit: Some(y_unit),
            submitted_by: "synthetic".into(),
        },
        raw: RawSpectrum {
            points,
            x_unit,
            y_unit: prepared.y_unit,
            file_sha256,
        },
        prepared,
    })
}
