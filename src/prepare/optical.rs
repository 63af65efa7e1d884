//! IR and Raman: absorbance, resampling onto the grid, masks, L2 normalisation, peaks.

use super::despike::{self, despike};
use super::{Conditions, Coverage, Picking, Prepared, Recipe, l2_normalise, noise_sd, pick};
use crate::error::Result;
use crate::spectrum::YUnit;
use crate::technique::{Grid, Technique};

/// Transmittance is clamped here before the logarithm, so that a zero or negative reading
/// (detector noise at total absorption) gives absorbance 4 instead of infinity.
const MIN_TRANSMITTANCE: f64 = 1e-4;

/// Converts a y value to absorbance: A = -log10(T) for transmittance (IUPAC Gold Book,
/// "absorbance"), with T as a fraction; absorbance and counts pass through.
pub fn absorbance_from(y: f64, unit: YUnit) -> f64 {
    match unit {
        YUnit::Transmittance => -(y.max(MIN_TRANSMITTANCE)).log10(),
        YUnit::TransmittancePercent => -((y / 100.0).max(MIN_TRANSMITTANCE)).log10(),
        _ => y,
    }
}

/// Guesses the y unit of an IR spectrum whose unit was not declared; `ys` in x order.
///
/// An absorbance spectrum sits mostly near zero with a few bands; a transmittance spectrum
/// sits mostly near its maximum with dips. So: values within 0..1.05 with a median above
/// 0.5 are a transmittance fraction; values within 0..105 with a median above 40 and a
/// maximum above 2 are percent transmittance; anything else is absorbance. The ends of a
/// spectrum are its baseline, high for transmittance and low for absorbance: values whose
/// median says transmittance but whose ends sit in the lower half of their range (a file cut
/// close around one absorbance band, mostly band) are read as absorbance, and
/// [`unit_is_ambiguous`] says so (common practice of reading a spectrum's baseline).
pub fn detect_optical_y_unit(technique: Technique, ys: &[f64]) -> YUnit {
    if technique == Technique::Raman {
        return YUnit::Counts;
    }
    match by_median(ys) {
        Some(u) if ends_level(ys) >= 0.5 => u,
        _ => YUnit::Absorbance,
    }
}

/// The unit the median alone suggests, when it suggests transmittance.
fn by_median(ys: &[f64]) -> Option<YUnit> {
    let mut sorted: Vec<f64> = ys.to_vec();
    sorted.sort_by(f64::total_cmp);
    let (min, max, median) = (
        sorted[0],
        sorted[sorted.len() - 1],
        sorted[sorted.len() / 2],
    );
    if min >= -0.05 && max <= 1.05 && median > 0.5 {
        Some(YUnit::Transmittance)
    } else if min >= -5.0 && max <= 105.0 && max > 2.0 && median > 40.0 {
        Some(YUnit::TransmittancePercent)
    } else {
        None
    }
}

/// Where the ends of a spectrum (its first and last 5 %, at least 3 points each; `ys` in x
/// order) sit within its range: 0 at the minimum, 1 at the maximum.
pub(super) fn ends_level(ys: &[f64]) -> f64 {
    let n = ys.len();
    let k = (n / 20).max(3).min(n.div_ceil(2));
    let mut ends: Vec<f64> = ys[..k].iter().chain(&ys[n - k..]).copied().collect();
    ends.sort_by(f64::total_cmp);
    let edge = ends[ends.len() / 2];
    let (min, max) = ys
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &y| {
            (lo.min(y), hi.max(y))
        });
    if max > min {
        (edge - min) / (max - min)
    } else {
        0.5
    }
}

/// True when the median of an undeclared IR spectrum says transmittance but its ends say
/// absorbance (see [`detect_optical_y_unit`]): the reading is a guess worth a warning.
pub fn unit_is_ambiguous(ys: &[f64]) -> bool {
    by_median(ys).is_some() && ends_level(ys) < 0.5
}

/// Resamples sorted `(x, y)` points onto the grid. Where the source is finer than the grid,
/// each grid point takes the mean of the source points within half a step of it
/// (bin-averaging keeps the noise reduction a fine source offers); elsewhere it takes the
/// linear interpolation between the two neighbouring source points. Grid points outside the
/// source's span are zero.
pub fn resample(points: &[(f64, f64)], grid: &Grid) -> Vec<f64> {
    let n = grid.len();
    let mut out = vec![0.0; n];
    if points.len() < 2 {
        return out;
    }
    let (first, last) = (points[0].0, points[points.len() - 1].0);
    let mut spacings: Vec<f64> = points.windows(2).map(|w| w[1].0 - w[0].0).collect();
    spacings.sort_by(f64::total_cmp);
    let finer = spacings[spacings.len() / 2] < 0.75 * grid.step;
    let half = grid.step / 2.0;

    let mut j = 0; // first source point not left of the current window
    for (i, slot) in out.iter_mut().enumerate() {
        let g = grid.x(i);
        if g < first || g > last {
            continue;
        }
        if finer {
            while j < points.len() && points[j].0 < g - half {
                j += 1;
            }
            let (mut sum, mut count, mut k) = (0.0, 0usize, j);
            while k < points.len() && points[k].0 < g + half {
                sum += points[k].1;
                count += 1;
                k += 1;
            }
            if count > 0 {
                *slot = sum / count as f64;
                continue;
            }
        }
        while j + 1 < points.len() && points[j + 1].0 < g {
            j += 1;
        }
        let k = (j + 1).min(points.len() - 1);
        let ((x0, y0), (x1, y1)) = (points[j], points[k]);
        *slot = if x1 == x0 {
            y0
        } else {
            y0 + (y1 - y0) * (g - x0) / (x1 - x0)
        };
    }
    out
}

pub(super) fn prepare(
    recipe: &Recipe,
    sorted: &[(f64, f64)],
    conditions: &Conditions,
) -> Result<Prepared> {
    let mut ys: Vec<f64> = sorted.iter().map(|p| p.1).collect();
    let mut warnings = Vec::new();
    if recipe.technique == Technique::Raman
        && let Some(threshold) = recipe.despike
    {
        let (fixed, replaced) = despike(&ys, threshold);
        if !replaced.is_empty() {
            let xs: Vec<f64> = sorted.iter().map(|p| p.0).collect();
            warnings.push(despike::warning(&xs, &replaced));
        }
        ys = fixed;
    }
    let y_unit = match conditions.y_unit {
        Some(u) => u,
        None => {
            let u = detect_optical_y_unit(recipe.technique, &ys);
            if u.is_transmittance() {
                warnings.push(format!("y unit not declared; detected {u} from the baseline and converted to absorbance"));
            }
            u
        }
    };
    let converted: Vec<(f64, f64)> = sorted
        .iter()
        .zip(&ys)
        .map(|(&(x, _), &y)| (x, absorbance_from(y, y_unit)))
        .collect();
    let grid = &recipe.grid;
    let mut values = resample(&converted, grid);
    if let Some(method) = recipe.baseline {
        let base = method.estimate(&values);
        for (v, b) in values.iter_mut().zip(base) {
            *v -= b;
        }
    }
    for (i, v) in values.iter_mut().enumerate() {
        if grid.masked(grid.x(i)) {
            *v = 0.0;
        }
    }
    // What the file does not cover stays zero on the grid; the coverage says so, and scores
    // leave those bins out. An import tells once how many of its files cover less.
    let (first, last) = (converted[0].0, converted[converted.len() - 1].0);
    let coverage = Coverage::measured(first, last, grid);
    let xs: Vec<f64> = (0..grid.len()).map(|i| grid.x(i)).collect();
    let mut vector: Vec<f32> = values.iter().map(|&v| v as f32).collect();
    let norm = vector
        .iter()
        .map(|&a| f64::from(a) * f64::from(a))
        .sum::<f64>()
        .sqrt();
    l2_normalise(&mut vector);
    let normalised: Vec<f64> = vector.iter().map(|&v| f64::from(v)).collect();
    let picked = match recipe.picking {
        Picking::Whole => {
            // Noise from the unmasked stretch only: masked bins are runs of zeros.
            let unmasked: Vec<f64> = normalised
                .iter()
                .enumerate()
                .filter(|(i, _)| !grid.masked(grid.x(*i)))
                .map(|(_, &v)| v)
                .collect();
            pick(&xs, &normalised, recipe, noise_sd(&unmasked), None)
        }
        Picking::Measured => {
            let measured: Vec<bool> = xs
                .iter()
                .map(|&x| x >= first && x <= last && !grid.masked(x))
                .collect();
            let noise = if norm > 0.0 {
                noise_on_grid(&converted, grid) / norm
            } else {
                0.0
            };
            pick(&xs, &normalised, recipe, noise, Some(&measured))
        }
    };
    Ok(Prepared {
        technique: recipe.technique,
        vector,
        peaks: picked.into_iter().map(|(_, p)| p).collect(),
        y_unit,
        warnings,
        coverage,
    })
}

/// The noise standard deviation of the values [`resample`] puts on the grid, estimated on
/// the file's own points (those on the grid's span and outside its masks) with [`noise_sd`].
/// Where the file is coarser than the grid, the grid values between two file points are
/// interpolated and the noise maxima stay at the file's points, so the noise is the file's;
/// where the file is finer, each grid value averages about step / spacing points, which
/// divides the noise standard deviation by the square root of that number (the standard
/// error of a mean). Estimated on the grid instead, interpolation would halve it: two
/// interpolated steps each cover half of one step of the file.
fn noise_on_grid(points: &[(f64, f64)], grid: &Grid) -> f64 {
    let own: Vec<f64> = points
        .iter()
        .filter(|p| p.0 >= grid.start && p.0 <= grid.stop && !grid.masked(p.0))
        .map(|p| p.1)
        .collect();
    let noise = noise_sd(&own);
    let mut spacings: Vec<f64> = points.windows(2).map(|w| w[1].0 - w[0].0).collect();
    if spacings.is_empty() {
        return noise;
    }
    spacings.sort_by(f64::total_cmp);
    let spacing = spacings[spacings.len() / 2];
    // The same test as `resample`: finer sources are bin-averaged.
    if spacing < 0.75 * grid.step {
        noise * (spacing / grid.step).sqrt()
    } else {
        noise
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ir_peak_areas_are_the_area_between_the_half_height_crossings() {
        // One Gaussian band, FWHM 20 cm-1, on the default 2 cm-1 grid, no baseline step that
        // could move it. Between its half-height crossings a Gaussian holds
        // sqrt(pi / (4 ln 2)) erf(sqrt(ln 2)) = 0.8100 of height x FWHM (from the Gaussian's
        // integral; math.erf in Python gives 0.81003). The trapezoidal rule on 2 cm-1 steps
        // is within 1 % of it.
        let mut recipe = Recipe::default_for(Technique::Ir);
        recipe.baseline = None;
        let sigma = 20.0 / (2.0 * (2.0 * 2f64.ln()).sqrt());
        let points: Vec<(f64, f64)> = (0..=1800)
            .map(|i| {
                let x = 400.0 + 2.0 * i as f64;
                (
                    x,
                    0.8 * (-(x - 1716.0).powi(2) / (2.0 * sigma * sigma)).exp(),
                )
            })
            .collect();
        let conditions = Conditions {
            y_unit: Some(YUnit::Absorbance),
            solvent: None,
        };
        let p = super::super::prepare(std::path::Path::new("t"), &recipe, &points, &conditions)
            .unwrap();
        assert_eq!(p.peaks.len(), 1);
        let peak = p.peaks[0];
        assert_eq!(peak.x, 1716.0);
        assert!((peak.width - 20.0).abs() < 0.2, "{peak:?}");
        let ratio = peak.area / (peak.height * peak.width);
        assert!((ratio - 0.8100).abs() < 0.008, "{ratio} {peak:?}");
    }

    #[test]
    fn transmittance_to_absorbance_follows_the_definition() {
        // A = -log10(T) (IUPAC Gold Book, "absorbance"): T = 10 % gives A = 1, T = 1 % gives A = 2.
        assert!((absorbance_from(0.1, YUnit::Transmittance) - 1.0).abs() < 1e-12);
        assert!((absorbance_from(1.0, YUnit::TransmittancePercent) - 2.0).abs() < 1e-12);
        assert!(
            (absorbance_from(50.0, YUnit::TransmittancePercent) - std::f64::consts::LOG10_2).abs()
                < 1e-12
        );
        assert_eq!(absorbance_from(0.0, YUnit::Transmittance), 4.0);
        assert_eq!(absorbance_from(0.37, YUnit::Absorbance), 0.37);
    }

    #[test]
    fn y_unit_detection_reads_the_baseline() {
        let absorb: Vec<f64> = (0..100).map(|i| if i == 50 { 0.9 } else { 0.01 }).collect();
        let trans: Vec<f64> = absorb.iter().map(|a| 10f64.powf(-a)).collect();
        let percent: Vec<f64> = trans.iter().map(|t| 100.0 * t).collect();
        assert_eq!(
            detect_optical_y_unit(Technique::Ir, &absorb),
            YUnit::Absorbance
        );
        assert_eq!(
            detect_optical_y_unit(Technique::Ir, &trans),
            YUnit::Transmittance
        );
        assert_eq!(
            detect_optical_y_unit(Technique::Ir, &percent),
            YUnit::TransmittancePercent
        );
        // A file cut close around one absorbance band (issue 13, item 17): mostly band, so
        // its median is high, but its ends are the baseline near zero: absorbance.
        let band: Vec<f64> = (0..61)
            .map(|i| 0.95 * (-((f64::from(i) - 30.0) / 22.0).powi(2)).exp())
            .collect();
        assert!(
            by_median(&band).is_some(),
            "the median alone says transmittance"
        );
        assert_eq!(
            detect_optical_y_unit(Technique::Ir, &band),
            YUnit::Absorbance
        );
        assert!(unit_is_ambiguous(&band));
        assert!(!unit_is_ambiguous(&trans) && !unit_is_ambiguous(&absorb));
    }

    #[test]
    fn resampling_interpolates_and_bin_averages() {
        let grid = Grid {
            start: 0.0,
            stop: 10.0,
            step: 2.0,
            masks: vec![],
        };
        // Coarser source: linear interpolation of y = x.
        let coarse: Vec<(f64, f64)> = (0..=4).map(|i| (i as f64 * 2.5, i as f64 * 2.5)).collect();
        assert_eq!(
            resample(&coarse, &grid),
            vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]
        );
        // Finer source: mean within +-1 of each grid point (half-open window).
        let fine: Vec<(f64, f64)> = (0..=20).map(|i| (i as f64 * 0.5, i as f64 * 0.5)).collect();
        let out = resample(&fine, &grid);
        assert_eq!(out[0], 0.25); // points 0 and 0.5
        assert_eq!(out[1], 1.75); // 1, 1.5, 2, 2.5
        // Outside the source's span stays zero.
        let short: Vec<(f64, f64)> = (0..=2).map(|i| (i as f64 * 2.0 + 4.0, 1.0)).collect();
        assert_eq!(resample(&short, &grid), vec![0.0, 0.0, 1.0, 1.0, 1.0, 0.0]);
    }

    /// Seeded white Gaussian noise of sd 1 (xorshift64* and Box-Muller).
    fn gaussian_noise(seed: u64) -> impl FnMut() -> f64 {
        let mut state = seed;
        let mut uniform = move || {
            state ^= state >> 12;
            state ^= state << 25;
            state ^= state >> 27;
            (state.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
        };
        move || {
            let (u1, u2) = (uniform().max(1e-300), uniform());
            (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
        }
    }

    /// Nine Gaussian bands (centre, FWHM, height), all at least 15 noise sd tall for the
    /// noise of [`same_bands_at`].
    const NINE: [(f64, f64, f64); 9] = [
        (620.0, 14.0, 0.5),
        (830.0, 12.0, 0.3),
        (1030.0, 16.0, 1.0),
        (1250.0, 14.0, 0.4),
        (1460.0, 12.0, 0.6),
        (1715.0, 16.0, 0.9),
        (2120.0, 14.0, 0.35),
        (2930.0, 16.0, 0.7),
        (3300.0, 14.0, 0.45),
    ];

    /// The bands of [`NINE`] sampled every `spacing` cm-1 over 400..4000 with noise of sd
    /// 0.02 on every point (the same noise per point whatever the spacing, as when one
    /// instrument records at another resolution setting).
    fn same_bands_at(spacing: f64, seed: u64) -> Vec<(f64, f64)> {
        let mut noise = gaussian_noise(seed);
        let n = ((4000.0 - 400.0) / spacing) as usize;
        (0..=n)
            .map(|i| {
                let x = 400.0 + spacing * i as f64;
                let y: f64 = NINE
                    .iter()
                    .map(|&(c, w, h)| {
                        let sigma = w / (2.0 * (2.0 * 2f64.ln()).sqrt());
                        h * (-(x - c).powi(2) / (2.0 * sigma * sigma)).exp()
                    })
                    .sum();
                (x, y + 0.02 * noise())
            })
            .collect()
    }

    fn absorbance() -> Conditions {
        Conditions {
            y_unit: Some(YUnit::Absorbance),
            solvent: None,
        }
    }

    #[test]
    fn the_same_spectrum_gives_the_same_peaks_at_any_point_spacing() {
        // Issue 12: a 4 cm-1 file with the same noise gave 12-14 peaks instead of 9, because
        // the noise was estimated on the 2 cm-1 grid, where every other value is interpolated.
        let recipe = Recipe::default_for(Technique::Ir);
        assert_eq!(recipe.picking, Picking::Measured);
        for seed in [1u64, 2, 3, 4, 5] {
            for spacing in [1.0, 2.0, 4.0] {
                let points = same_bands_at(spacing, 0x9E37_79B9_7F4A_7C15 ^ seed);
                let p = super::super::prepare(
                    std::path::Path::new("t"),
                    &recipe,
                    &points,
                    &absorbance(),
                )
                .unwrap();
                let xs: Vec<f64> = p.peaks.iter().map(|q| q.x).collect();
                // The nine bands and nothing else, each within 4 cm-1 (two grid steps: the
                // top of a noisy band sampled every 4 cm-1 can move by a step either way).
                assert_eq!(xs.len(), 9, "{spacing} cm-1, seed {seed}: {xs:?}");
                for (x, band) in xs.iter().zip(NINE) {
                    assert!((x - band.0).abs() <= 4.0, "{spacing} cm-1: {xs:?}");
                }
            }
        }
        // The old picking, noise estimated on the grid, finds noise maxima in the coarse file.
        let whole = Recipe {
            picking: Picking::Whole,
            ..recipe
        };
        let points = same_bands_at(4.0, 0x9E37_79B9_7F4A_7C15 ^ 1);
        let p = super::super::prepare(std::path::Path::new("t"), &whole, &points, &absorbance())
            .unwrap();
        assert!(p.peaks.len() > 9, "{:?}", p.peaks);
    }

    #[test]
    fn range_and_mask_edges_are_not_peaks() {
        // A file covering 700..3600 cm-1 of the 400..4000 grid that starts on a falling
        // slope (the step down to the zeros beyond it makes its first point a maximum), and a
        // band at 2300 cm-1 inside the CO2 mask (2280..2400) whose flanks rise towards the
        // mask from both sides. Two real bands at 1200 and 3000 cm-1.
        let recipe = Recipe::default_for(Technique::Ir);
        let mut noise = gaussian_noise(7);
        let points: Vec<(f64, f64)> = (0..=1450)
            .map(|i| {
                let x = 700.0 + 2.0 * i as f64;
                let band = |c: f64, sigma: f64, h: f64| {
                    h * (-(x - c).powi(2) / (2.0 * sigma * sigma)).exp()
                };
                let y = 0.6 * (-(x - 700.0) / 150.0).exp()
                    + band(1200.0, 8.0, 0.5)
                    + band(3000.0, 8.0, 0.7)
                    + band(2300.0, 17.0, 0.8)
                    + 0.002 * noise();
                (x, y)
            })
            .collect();
        let at = |p: &Prepared, x: f64| p.peaks.iter().any(|q| (q.x - x).abs() <= 4.0);
        let p = super::super::prepare(std::path::Path::new("t"), &recipe, &points, &absorbance())
            .unwrap();
        let xs: Vec<f64> = p.peaks.iter().map(|q| q.x).collect();
        assert_eq!(xs, [1200.0, 3000.0], "{xs:?}");
        // The old picking takes the first point of the range and the mask's edge as peaks.
        let whole = Recipe {
            picking: Picking::Whole,
            ..recipe
        };
        let old = super::super::prepare(std::path::Path::new("t"), &whole, &points, &absorbance())
            .unwrap();
        assert!(at(&old, 700.0) && at(&old, 2278.0), "{:?}", old.peaks);
    }

    #[test]
    fn real_raman_files_get_no_peak_at_their_range_ends() {
        // The measured spectra of real-spectra/raman (CHARISMA round-robin, via ramanchada2;
        // 150-3400 cm-1 at most, so the 100..3500 grid is zero beyond them, and the baseline
        // removal bends at the step). No peak may sit on the first or last grid point a file
        // covers (calcite's lattice band at 155 cm-1, 4 cm-1 inside raman123.csv, may).
        let recipe = Recipe::default_for(Technique::Raman);
        let whole = Recipe {
            picking: Picking::Whole,
            ..recipe.clone()
        };
        let (mut old_edges, mut files) = (0, 0);
        for spectrum in super::super::despike::real::spectra() {
            let (name, points) = (spectrum.file, spectrum.points);
            let path = std::path::Path::new(&name);
            let (first, last) = (points[0].0, points[points.len() - 1].0);
            let edge = |p: &Prepared| {
                p.peaks
                    .iter()
                    .any(|q| q.x - first < recipe.grid.step || last - q.x < recipe.grid.step)
            };
            let conditions = Conditions::default();
            let p = super::super::prepare(path, &recipe, &points, &conditions).unwrap();
            assert!(!edge(&p), "{name}: {first}..{last} {:?}", p.peaks);
            let old = super::super::prepare(path, &whole, &points, &conditions).unwrap();
            old_edges += usize::from(edge(&old));
            files += 1;
        }
        assert_eq!(files, 124);
        // With the old picking 97 of the 124 files had a peak at an end of their range.
        assert!(old_edges > 60, "{old_edges}");
    }
}
