//! Preparation: from raw points to a vector on the library's grid plus a peak list.
//!
//! Every library spectrum and every unknown passes through [`prepare`] with the library's
//! [`Recipe`] for its technique, so that vectors are comparable bin for bin.

mod baseline;
mod carbon;
mod coverage;
mod despike;
mod masking;
mod nmr;
mod optical;
mod peaks;
mod plausible;
mod solvent;
mod spectrometry;

pub use baseline::{ALS_DEFAULT, Baseline, asls, rubber_band};
pub use carbon::PROFILE_POINTS;
pub use coverage::{Coverage, covered_bins, peak_in, shared_bins};
pub use despike::{DESPIKE_THRESHOLD, despike, modified_z_scores};
pub use masking::{mask_prepared, shared_solvent_regions};
pub use optical::{absorbance_from, detect_optical_y_unit, resample};
pub use peaks::{Maximum, Peak, area_between, find_maxima};
pub use plausible::plausibility;
pub use solvent::Solvent;
pub use spectrometry::nominal_mass as nominal_mz;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Location, Result};
use crate::spectrum::YUnit;
use crate::technique::{Grid, Technique};

/// How one technique's spectra are prepared in one library: the grid and the few
/// parameters that change the prepared vector. Stored in the database at `init`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Recipe {
    /// The technique this recipe is for.
    pub technique: Technique,
    /// The grid every vector is laid on.
    pub grid: Grid,
    /// Peaks below this fraction of the strongest peak's prominence are not listed.
    pub min_peak_prominence: f64,
    /// EI-MS: ions below this fraction of the base peak are dropped (DESIGN: 0.5 %).
    pub min_relative_abundance: f64,
    /// IR, Raman: baseline removed on the grid before masking and normalisation.
    #[serde(default)]
    pub baseline: Option<Baseline>,
    /// Peaks must also stand this many noise standard deviations above their bases (the
    /// noise estimated from the spectrum itself, [`noise_sd`]). `None` in libraries made
    /// before the noise floor existed, which keep picking as they did.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise_floor: Option<f64>,
    /// 1H NMR: how points are binned. Libraries made before linear binning existed keep
    /// nearest-bin binning, so their stored vectors stay comparable with their unknowns.
    #[serde(default, skip_serializing_if = "Binning::is_nearest")]
    pub binning: Binning,
    /// Raman: spikes (cosmic rays, bad detector pixels) are removed from the file's own
    /// points before anything else, with this modified Z-score threshold ([`despike`],
    /// Whitaker & Hayes 2018). `None` in libraries made before despiking existed, which keep
    /// preparing as they did; new Raman libraries use [`DESPIKE_THRESHOLD`].
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub despike: Option<f64>,
    /// IR, Raman, 1H NMR: where peaks are picked and how the noise floor's noise is
    /// estimated ([`Picking`]). Libraries made before [`Picking::Measured`] existed keep
    /// [`Picking::Whole`].
    #[serde(default, skip_serializing_if = "Picking::is_whole")]
    pub picking: Picking,
}

/// Where peaks are picked.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Picking {
    /// Over the whole prepared curve, with the noise estimated on the grid. A maximum can then
    /// sit where a file's range ends inside the grid (the step down to the zeros beyond it)
    /// or beside a masked region, and interpolating a coarse file onto a finer grid makes the
    /// noise look smaller than it is (an interpolated point averages its neighbours), so a
    /// coarse file gets noise maxima as peaks.
    #[default]
    Whole,
    /// Only where the file measured and nothing is masked, and never at the first or last
    /// point of such a stretch (a band cut there has no top and no prominence to measure).
    /// IR and Raman estimate the noise on the file's own points and carry it through the
    /// resampling and the normalisation, so the noise floor does not depend on the file's
    /// point spacing.
    Measured,
}

impl Picking {
    /// True for [`Picking::Whole`] (the value older recipes imply).
    pub fn is_whole(&self) -> bool {
        *self == Picking::Whole
    }
}

/// How 1H NMR points are gathered into grid bins.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Binning {
    /// Each point's area goes to the bin whose centre is nearest. A line sitting on a bin
    /// edge then jumps from one bin to the next when it moves by a hundredth of a ppm.
    #[default]
    Nearest,
    /// Each point's area is shared between the two nearest bin centres in proportion to
    /// closeness ("linear binning", common practice in kernel density estimation), so that
    /// a small shift changes the vector a little instead of moving a line across a bin edge.
    Linear,
}

impl Binning {
    /// True for [`Binning::Nearest`] (the value older recipes imply).
    pub fn is_nearest(&self) -> bool {
        *self == Binning::Nearest
    }
}

/// The noise floor new libraries use: a peak's prominence must reach 6 noise standard
/// deviations. In white Gaussian noise, the prominence (as [`find_maxima`] measures it) of
/// noise maxima exceeds 3 sd about 50 times per 1000 points but 6 sd about once per 1000
/// points (measured on seeded noise; see the test `noise_floor_rejects_noise_maxima`), so 6
/// keeps noise out of peak lists while a band of 6 sd is still found.
pub const NOISE_FLOOR: f64 = 6.0;

/// Robust estimate of the standard deviation of white noise on a sampled curve: the median
/// absolute first difference divided by 0.6745 sqrt(2) (the median absolute deviation of a
/// normal variable is 0.6745 sd, and a difference of two samples has sd sqrt(2) sd; common
/// practice). Smooth signal changes little from sample to sample, so the median difference
/// is set by the noise wherever most samples lie off the peaks.
pub fn noise_sd(y: &[f64]) -> f64 {
    let mut d: Vec<f64> = y.windows(2).map(|w| (w[1] - w[0]).abs()).collect();
    if d.is_empty() {
        return 0.0;
    }
    let mid = d.len() / 2;
    let (_, median, _) = d.select_nth_unstable_by(mid, f64::total_cmp);
    *median / (0.6745 * std::f64::consts::SQRT_2)
}

impl Recipe {
    /// The default recipe for a technique (DESIGN.md).
    pub fn default_for(technique: Technique) -> Recipe {
        Recipe {
            technique,
            grid: technique.default_grid(),
            min_peak_prominence: match technique {
                Technique::Nmr1h => 0.02,
                _ => 0.05,
            },
            // EI-MS ions below this share of the base peak are left out (only spectrometry
            // reads it). 0.2 % was chosen on the tuning evidence: the real EI spectra's tuning
            // part (other spectra of the same metabolite, 0.536 -> 0.542 top-1; degraded, 0.970
            // either way) and the generated tuning runs (docs/evaluation.md); 0.5 % before.
            min_relative_abundance: match technique {
                Technique::MsEi => 0.002,
                _ => 0.005,
            },
            // Raman spectra ride on fluorescence backgrounds far larger than their bands, so
            // a Raman library removes the baseline by default: the rubber band, chosen with the
            // derivative measure on the tuning evidence (the real spectra's tuning part across
            // instruments, as measured and degraded, and the generated tuning runs; ALS with
            // lambda 1e5, p 0.01 was the default before). IR keeps its baseline unless the
            // library asks otherwise.
            baseline: match technique {
                Technique::Raman => Some(Baseline::RubberBand),
                _ => None,
            },
            noise_floor: Some(NOISE_FLOOR),
            binning: match technique {
                Technique::Nmr1h => Binning::Linear,
                _ => Binning::Nearest,
            },
            despike: match technique {
                Technique::Raman => Some(DESPIKE_THRESHOLD),
                _ => None,
            },
            picking: match technique {
                Technique::Ir | Technique::Raman | Technique::Nmr1h => Picking::Measured,
                Technique::MsEi | Technique::Nmr13c => Picking::Whole,
            },
        }
    }

    /// Adds masked regions to the grid, keeping them sorted and without repeats.
    pub fn add_masks(&mut self, regions: &[(f64, f64)]) {
        for &r in regions {
            if !self.grid.masks.contains(&r) {
                self.grid.masks.push(r);
            }
        }
        self.grid.masks.sort_by(|a, b| a.0.total_cmp(&b.0));
    }
}

/// A named region of an IR spectrum that a library may choose to mask at `init`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RegionMask {
    /// Atmospheric CO2 (asymmetric stretch, about 2350 cm-1): masked by default.
    Co2,
    /// Water vapour in the beam path: the rotational-vibrational lines of the H2O bending
    /// fundamental (origin about 1595 cm-1) and of the two stretching fundamentals (about
    /// 3657 and 3756 cm-1) spread over roughly 1300-2000 and 3500-4000 cm-1 (from memory).
    /// Masking 1300-2000 cm-1 also hides the C=O and C=C stretching region, so this mask
    /// suits a library whose spectra carry uncompensated vapour lines and whose compounds
    /// can be told apart without that region; a lab that purges its bench does not need it.
    WaterVapour,
    /// Diamond ATR: the diamond's own two- and three-phonon lattice absorption is strong at
    /// about 1900-2300 cm-1 (from memory), where an ATR spectrum is noisy or clipped.
    DiamondAtr,
}

impl RegionMask {
    /// The masked regions, `(lo, hi)` in cm-1.
    pub fn regions(self) -> &'static [(f64, f64)] {
        match self {
            // DESIGN: CO2 2400-2280 cm-1 (common practice for mid-IR).
            RegionMask::Co2 => &[(2280.0, 2400.0)],
            RegionMask::WaterVapour => &[(1300.0, 2000.0), (3500.0, 4000.0)],
            RegionMask::DiamondAtr => &[(1900.0, 2300.0)],
        }
    }

    /// The command-line name.
    pub fn name(self) -> &'static str {
        match self {
            RegionMask::Co2 => "co2",
            RegionMask::WaterVapour => "water-vapour",
            RegionMask::DiamondAtr => "diamond-atr",
        }
    }

    /// Reads a mask: a name (`co2`, `water-vapour`, `diamond-atr`) or a range `LO-HI` in cm-1.
    pub fn parse_regions(s: &str) -> Result<Vec<(f64, f64)>> {
        let t = s.trim().to_ascii_lowercase().replace('_', "-");
        for m in [
            RegionMask::Co2,
            RegionMask::WaterVapour,
            RegionMask::DiamondAtr,
        ] {
            if t == m.name() || (m == RegionMask::WaterVapour && t == "water-vapor") {
                return Ok(m.regions().to_vec());
            }
        }
        let bad = || {
            Error::invalid(
                format!("'{s}' is not a mask"),
                "use co2, water-vapour, diamond-atr, or a range in cm-1 such as 1850-1950",
            )
        };
        let (lo, hi) = t.split_once('-').ok_or_else(bad)?;
        let (lo, hi): (f64, f64) = (
            lo.trim().parse().map_err(|_| bad())?,
            hi.trim().parse().map_err(|_| bad())?,
        );
        if !(lo.is_finite() && hi.is_finite() && lo < hi) {
            return Err(bad());
        }
        Ok(vec![(lo, hi)])
    }
}

/// Per-spectrum facts that change how it is prepared.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Conditions {
    /// The y unit as declared; `None` lets the preparer detect it (IR) or assume the usual one.
    pub y_unit: Option<YUnit>,
    /// The NMR solvent whose residual and water signals are masked.
    pub solvent: Option<Solvent>,
}

/// A spectrum made ready for comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Prepared {
    /// The technique.
    pub technique: Technique,
    /// Values on the recipe's grid: L2-normalised absorbance or counts (IR, Raman),
    /// abundance relative to the base peak (EI-MS), area fraction per bin (1H NMR).
    pub vector: Vec<f32>,
    /// Picked peaks, ascending in x.
    pub peaks: Vec<Peak>,
    /// The y unit that was used, declared or detected.
    pub y_unit: YUnit,
    /// Things the analyst should know about this preparation.
    pub warnings: Vec<String>,
    /// IR, Raman: the part of the grid the spectrum was measured on, when it is less than
    /// the whole grid; scores compare two spectra only over the bins both cover
    /// ([`shared_bins`]). `None`: the whole grid (every spectrum of the other techniques,
    /// and spectra stored before coverage was recorded, which read as they did).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub coverage: Option<Coverage>,
}

impl Prepared {
    /// The bins of `grid` this spectrum covers.
    pub fn covered_bins(&self, grid: &Grid) -> std::ops::Range<usize> {
        covered_bins(self.coverage.as_ref(), grid)
    }
}

/// Prepares checked points (x already in the technique's unit) with a library's recipe.
/// `path` is used only to name the file in errors.
pub fn prepare(
    path: &std::path::Path,
    recipe: &Recipe,
    points: &[(f64, f64)],
    conditions: &Conditions,
) -> Result<Prepared> {
    let mut sorted = points.to_vec();
    sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
    let prepared = match recipe.technique {
        Technique::Ir | Technique::Raman => optical::prepare(recipe, &sorted, conditions),
        Technique::MsEi => spectrometry::prepare(recipe, &sorted, conditions),
        Technique::Nmr1h => nmr::prepare(recipe, &sorted, conditions),
        Technique::Nmr13c => carbon::prepare(recipe, &sorted, conditions),
    }?;
    // Values that overflow in preparation (a y of 1e200 squared) would store NaN or infinity
    // and score as NaN: never stored, never searched.
    let finite = prepared.vector.iter().all(|v| v.is_finite())
        && prepared.peaks.iter().all(|p| {
            p.x.is_finite() && p.height.is_finite() && p.width.is_finite() && p.area.is_finite()
        });
    if !finite {
        return Err(Error::input(
            Location::file(path),
            "preparing the spectrum gave values that are not finite numbers (an overflow)",
            "check the y values: they must be measured values of ordinary size",
        ));
    }
    if prepared.vector.iter().all(|&v| v == 0.0) {
        return Err(Error::input(
            Location::file(path),
            format!(
                "no signal is left on the library's {} grid ({}..{}) after masking",
                recipe.technique, recipe.grid.start, recipe.grid.stop
            ),
            "check the technique, the x unit and the solvent; the spectrum must overlap the grid",
        ));
    }
    Ok(prepared)
}

/// Scales `v` to unit Euclidean length in place; leaves an all-zero vector unchanged.
pub fn l2_normalise(v: &mut [f32]) {
    let norm = v
        .iter()
        .map(|&a| f64::from(a) * f64::from(a))
        .sum::<f64>()
        .sqrt();
    if norm > 0.0 {
        for a in v.iter_mut() {
            *a = (f64::from(*a) / norm) as f32;
        }
    }
}

/// The regions an NMR spectrum masks: TMS within `tms_half_width` of 0 ppm, the declared
/// solvent's signals (`solvent_masks`), and the grid's own masks; with a warning when no
/// solvent was declared, naming what stays unmasked.
fn nmr_masks(
    tms_half_width: f64,
    solvent: Option<Solvent>,
    solvent_masks: fn(Solvent) -> Vec<(f64, f64)>,
    grid: &Grid,
    unmasked: &str,
) -> (Vec<(f64, f64)>, Vec<String>) {
    let mut masks = vec![(-tms_half_width, tms_half_width)];
    let mut warnings = Vec::new();
    match solvent {
        Some(s) => masks.extend(solvent_masks(s)),
        None => warnings.push(format!("no solvent declared: {unmasked} are not masked")),
    }
    masks.extend(grid.masks.iter().copied());
    (masks, warnings)
}

/// Picks peaks from a sampled curve and reports them in x units: maxima whose prominence
/// reaches the recipe's fraction of the strongest one and, when the recipe has a noise floor,
/// that many times `noise` (the noise standard deviation, which the caller estimates from
/// the data before clipping or masking: runs of zeros would make [`noise_sd`] too small).
/// With `measured` (one flag per sample: measured and not masked), a maximum on or beside
/// a sample that is not is dropped ([`Picking::Measured`]).
fn pick(
    x: &[f64],
    y: &[f64],
    recipe: &Recipe,
    noise: f64,
    measured: Option<&[bool]>,
) -> Vec<(Maximum, Peak)> {
    let mut all = find_maxima(y, 0.0);
    if let Some(ok) = measured {
        all.retain(|m| ok[m.index - 1] && ok[m.index] && ok[m.index + 1]);
    }
    let strongest = all.iter().map(|m| m.prominence).fold(0.0, f64::max);
    let floor = recipe.noise_floor.map_or(0.0, |k| k * noise);
    let least = (recipe.min_peak_prominence * strongest).max(floor);
    all.into_iter()
        .filter(|m| m.prominence >= least && m.prominence > 0.0)
        .map(|m| {
            let width = (peaks::x_at(x, m.right_half) - peaks::x_at(x, m.left_half)).abs();
            (
                m,
                Peak {
                    x: x[m.index],
                    height: y[m.index],
                    width,
                    area: peaks::area_between(x, y, m.left_half, m.right_half),
                },
            )
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn noise_floor_rejects_noise_maxima() {
        // Seeded white Gaussian noise (xorshift64* and Box-Muller), sd 1.
        let mut state = 0x2545_F491_4F6C_DD1Du64;
        let mut uniform = || {
            state ^= state >> 12;
            state ^= state << 25;
            state ^= state >> 27;
            (state.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
        };
        let y: Vec<f64> = (0..20_000)
            .map(|_| {
                let (u1, u2) = (uniform().max(1e-300), uniform());
                (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
            })
            .collect();
        let sd = noise_sd(&y);
        assert!((sd - 1.0).abs() < 0.03, "{sd}");
        let count = |k: f64| find_maxima(&y, k * sd).len() as f64 / y.len() as f64 * 1000.0;
        // Per 1000 points: many noise maxima reach 3 sd, about one reaches 6 sd.
        assert!(count(3.0) > 30.0, "{}", count(3.0));
        assert!(count(NOISE_FLOOR) < 2.0, "{}", count(NOISE_FLOOR));
    }

    #[test]
    fn masks_parse_by_name_or_range() {
        assert_eq!(
            RegionMask::parse_regions("Diamond_ATR").unwrap(),
            [(1900.0, 2300.0)]
        );
        assert_eq!(RegionMask::parse_regions("water-vapor").unwrap().len(), 2);
        assert_eq!(
            RegionMask::parse_regions("1850-1950").unwrap(),
            [(1850.0, 1950.0)]
        );
        assert!(RegionMask::parse_regions("1950-1850").is_err());
        assert!(RegionMask::parse_regions("co3").is_err());
    }

    #[test]
    fn older_recipes_read_as_they_were_written() {
        // A recipe stored before the noise floor and linear binning existed.
        let old = r#"{"technique":"nmr-1h","grid":{"start":-1.0,"stop":14.0,"step":0.04,"masks":[]},
                     "min_peak_prominence":0.02,"min_relative_abundance":0.005,"baseline":null}"#;
        let r: Recipe = serde_json::from_str(old).unwrap();
        assert_eq!(r.noise_floor, None);
        assert_eq!(r.binning, Binning::Nearest);
        assert_eq!(r.despike, None);
        assert_eq!(r.picking, Picking::Whole);
        // ... and serialise without the new fields, so the library state hash is unchanged.
        let text = serde_json::to_string(&r).unwrap();
        for field in ["noise_floor", "binning", "despike", "picking"] {
            assert!(!text.contains(field), "{text}");
        }
        let new = Recipe::default_for(Technique::Nmr1h);
        assert_eq!(new.binning, Binning::Linear);
        assert_eq!(new.noise_floor, Some(NOISE_FLOOR));
        assert_eq!(new.picking, Picking::Measured);
        // New Raman libraries despike; the fields round-trip.
        let raman = Recipe::default_for(Technique::Raman);
        assert_eq!(raman.despike, Some(DESPIKE_THRESHOLD));
        let text = serde_json::to_string(&raman).unwrap();
        assert!(text.contains(r#""despike":8.0"#) && text.contains(r#""picking":"measured""#));
        assert_eq!(serde_json::from_str::<Recipe>(&text).unwrap(), raman);
        assert_eq!(Recipe::default_for(Technique::Ir).despike, None);
    }
}
