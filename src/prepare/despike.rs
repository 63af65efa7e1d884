//! Raman spikes: one- or two-point events (cosmic rays striking the detector, hot or dead
//! pixels) found by the modified Z-scores of the first differences and replaced by the mean
//! of their neighbours.

/// The modified Z-score threshold new Raman libraries despike with. Chosen on the 124
/// measured spectra of `real-spectra/raman/`: at 8 every event found is a single point off
/// every band (dark-subtraction dips and hot pixels: 14 events, 16 points, in 9 of the 124 files), and no point
/// of a band is touched. The test `real_raman_bands_survive_despiking` checks it on every file.
pub const DESPIKE_THRESHOLD: f64 = 8.0;

/// A spike is at most this many points wide: a cosmic ray lights one or two detector pixels
/// (common practice), while a Raman band spans several.
pub const MAX_SPIKE_WIDTH: usize = 2;

/// The differences just outside a spike must be at most this fraction of its flanks (in
/// modified Z-score): a spike leaves and rejoins a curve that changes slowly around it,
/// while the top of a sharp band is reached by a flank that already rises steeply. On the
/// real spectra, single-point events have outer differences below 0.25 of their flanks and
/// the tops of sharp bands (silicon 520, calcite 1086 cm-1) above 0.55.
pub const QUIET_FRACTION: f64 = 1.0 / 3.0;

/// A spike point is replaced by the mean of the non-spike points within this many points on
/// either side.
pub const NEIGHBOURS: usize = 3;

/// The modified Z-scores of `v`: 0.6745 (v - median) / MAD, MAD the median absolute
/// deviation from the median (Iglewicz & Hoaglin, "How to Detect and Handle Outliers", ASQC
/// 1993). When more than half the values are equal (MAD = 0, as in the differences of
/// heavily quantised counts) the mean absolute deviation stands in:
/// (v - median) / (1.2533 MeanAD), 1.2533 = sqrt(pi / 2) because the mean absolute deviation
/// of a normal variable is sqrt(2 / pi) sd (the same scale as 0.6745 / MAD). All zeros when
/// every value is the median.
pub fn modified_z_scores(v: &[f64]) -> Vec<f64> {
    if v.is_empty() {
        return Vec::new();
    }
    let median = |mut w: Vec<f64>| -> f64 {
        w.sort_by(f64::total_cmp);
        let n = w.len();
        if n % 2 == 1 {
            w[n / 2]
        } else {
            (w[n / 2 - 1] + w[n / 2]) / 2.0
        }
    };
    let med = median(v.to_vec());
    let mad = median(v.iter().map(|x| (x - med).abs()).collect());
    if mad > 0.0 {
        return v.iter().map(|x| 0.6745 * (x - med) / mad).collect();
    }
    let mean_ad = v.iter().map(|x| (x - med).abs()).sum::<f64>() / v.len() as f64;
    if mean_ad > 0.0 {
        let scale = (std::f64::consts::PI / 2.0).sqrt() * mean_ad;
        v.iter().map(|x| (x - med) / scale).collect()
    } else {
        vec![0.0; v.len()]
    }
}

/// Finds spikes in `y` (values in the file's own order of ascending x) and returns the
/// despiked values with the indices of the points replaced, ascending.
///
/// Whitaker & Hayes, "A simple algorithm for despiking Raman spectra", Chemometrics and
/// Intelligent Laboratory Systems 179 (2018) 82-84: a spike is where the first differences
/// of the spectrum have a modified Z-score ([`modified_z_scores`]) above a threshold, and
/// each spike point is replaced by the mean of the non-spike points near it. Their test
/// alone also flags the flanks of sharp bands when a band spans only a few points (the
/// silicon line at 520 cm-1 on a 2.6 cm-1 sampling), so a run is taken as a spike only when
/// it also has the shape of one: points `k .. k + w - 1`, `w` at most
/// [`MAX_SPIKE_WIDTH`], entered by a difference above the threshold and left by one above
/// it of the opposite sign (the signal jumps and comes back), with the differences just
/// outside at most [`QUIET_FRACTION`] of the smaller of the two (quiet surroundings); the
/// narrowest such stretch from `k` is taken, and the search goes on after it. Each
/// point of a spike becomes the mean of the non-spike points within [`NEIGHBOURS`] points
/// of it. Fewer than four points are returned unchanged.
pub fn despike(y: &[f64], threshold: f64) -> (Vec<f64>, Vec<usize>) {
    let n = y.len();
    let mut out = y.to_vec();
    if n < 4 {
        return (out, Vec::new());
    }
    let diffs: Vec<f64> = y.windows(2).map(|w| w[1] - w[0]).collect();
    let z = modified_z_scores(&diffs);
    let loud = |i: usize| z[i].abs() > threshold;
    let mut spike = vec![false; n];
    // Point k is entered by difference k - 1; a spike of width w is left by difference
    // k + w - 1, which must exist (the last point cannot be a spike's last point).
    let mut k = 1;
    while k + 1 < n {
        let mut width = None;
        if loud(k - 1) {
            for w in 1..=MAX_SPIKE_WIDTH {
                let leave = k + w - 1;
                if leave >= diffs.len() {
                    break;
                }
                if loud(leave) && z[leave].signum() != z[k - 1].signum() {
                    let flank = z[k - 1].abs().min(z[leave].abs());
                    let before = if k >= 2 { z[k - 2].abs() } else { 0.0 };
                    let after = z.get(leave + 1).map_or(0.0, |v| v.abs());
                    if before <= QUIET_FRACTION * flank && after <= QUIET_FRACTION * flank {
                        width = Some(w);
                        break;
                    }
                }
            }
        }
        match width {
            Some(w) => {
                spike[k..k + w].iter_mut().for_each(|s| *s = true);
                k += w;
            }
            None => k += 1,
        }
    }
    let replaced: Vec<usize> = (0..n).filter(|&i| spike[i]).collect();
    for &i in &replaced {
        let (lo, hi) = (i.saturating_sub(NEIGHBOURS), (i + NEIGHBOURS).min(n - 1));
        let (sum, count) = (lo..=hi)
            .filter(|&j| !spike[j])
            .fold((0.0, 0usize), |(s, c), j| (s + y[j], c + 1));
        if count > 0 {
            out[i] = sum / count as f64;
        }
    }
    (out, replaced)
}

/// The warning a despiked spectrum carries: how many points were replaced and where.
pub(super) fn warning(xs: &[f64], replaced: &[usize]) -> String {
    const SHOWN: usize = 8;
    let mut at: Vec<String> = replaced
        .iter()
        .take(SHOWN)
        .map(|&i| format!("{:.1}", xs[i]))
        .collect();
    if replaced.len() > SHOWN {
        at.push(format!("and {} more", replaced.len() - SHOWN));
    }
    format!(
        "{} spike point{} (cosmic ray or bad detector pixel) replaced by the mean of {} neighbours, at {} cm-1",
        replaced.len(),
        if replaced.len() == 1 { "" } else { "s" },
        if replaced.len() == 1 { "its" } else { "their" },
        at.join(", ")
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn modified_z_scores_follow_iglewicz_and_hoaglin() {
        // Worked by hand from the definition (Iglewicz & Hoaglin 1993): values 1..=5 and 100
        // have median 3.5 and absolute deviations 2.5 1.5 0.5 0.5 1.5 96.5, whose median is
        // 1.5; so z(100) = 0.6745 x 96.5 / 1.5 = 43.3928 and z(1) = -0.6745 x 2.5 / 1.5 =
        // -1.1242.
        let z = modified_z_scores(&[1.0, 2.0, 3.0, 4.0, 5.0, 100.0]);
        assert!((z[5] - 43.392_833_333).abs() < 1e-8, "{z:?}");
        assert!((z[0] + 1.124_166_667).abs() < 1e-8, "{z:?}");
        // More than half equal: the mean absolute deviation stands in. Median 0, MeanAD
        // 10 / 5 = 2, so z(10) = 10 / (sqrt(pi / 2) x 2) = 3.9894.
        let z = modified_z_scores(&[0.0, 0.0, 0.0, 10.0, 0.0]);
        assert!((z[3] - 3.989_422_8).abs() < 1e-6, "{z:?}");
        assert_eq!(modified_z_scores(&[2.0; 4]), vec![0.0; 4]);
    }

    /// A seeded curve: a broad band and a sharp one on a slope, with small noise.
    fn curve(n: usize) -> Vec<f64> {
        let mut state = 0x9E37_79B9_7F4A_7C15u64;
        (0..n)
            .map(|i| {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                let noise = (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
                let x = i as f64;
                100.0
                    + 0.05 * x
                    + 400.0 * (-((x - 120.0) / 12.0).powi(2)).exp()
                    + 900.0 * (-((x - 300.0) / 1.6).powi(2)).exp()
                    + 4.0 * noise
            })
            .collect()
    }

    #[test]
    fn a_one_point_spike_is_replaced_and_the_bands_are_kept() {
        // The algorithm of Whitaker & Hayes 2018: the spike's two differences stand far out,
        // and the spike point becomes the mean of its neighbours.
        let clean = curve(400);
        assert_eq!(despike(&clean, DESPIKE_THRESHOLD).1, Vec::<usize>::new());
        let mut y = clean.clone();
        y[200] += 500.0;
        let (fixed, replaced) = despike(&y, DESPIKE_THRESHOLD);
        assert_eq!(replaced, vec![200]);
        let expected = [197, 198, 199, 201, 202, 203]
            .iter()
            .map(|&j| y[j])
            .sum::<f64>()
            / 6.0;
        assert_eq!(fixed[200], expected);
        assert!((fixed[200] - clean[200]).abs() < 5.0);
        // Every other point is untouched, the sharp band at 300 (3 points above half height)
        // included.
        for i in (0..400).filter(|&i| i != 200) {
            assert_eq!(fixed[i], y[i], "{i}");
        }
    }

    #[test]
    fn two_point_spikes_and_dips_are_replaced() {
        let clean = curve(400);
        let mut y = clean.clone();
        y[60] += 300.0;
        y[61] += 280.0;
        y[250] -= 400.0; // a dead pixel after dark subtraction
        let (fixed, replaced) = despike(&y, DESPIKE_THRESHOLD);
        assert_eq!(replaced, vec![60, 61, 250]);
        for i in replaced {
            assert!((fixed[i] - clean[i]).abs() < 5.0, "{i} {}", fixed[i]);
        }
    }
}

#[cfg(test)]
pub(super) mod real {
    //! Despiking the measured Raman spectra of `real-spectra/raman/` (CHARISMA round-robin,
    //! raw counts, cosmic rays not removed; see its README).

    use super::*;
    use crate::prepare::{Conditions, Recipe, noise_sd, prepare};
    use crate::technique::Technique;

    /// Raman bands of the four materials, cm-1 (from memory: silicon's optical phonon and
    /// its broad second-order bands; calcite's lattice, in-plane bend, symmetric stretch,
    /// combination bands; anatase and rutile TiO2; polystyrene's ring and C-H bands).
    fn bands(material: &str) -> &'static [f64] {
        match material {
            "silicon" => &[300.0, 520.7, 960.0],
            "calcite" => &[155.0, 282.0, 712.0, 1086.0, 1435.0, 1749.0],
            "titanium dioxide" => &[144.0, 197.0, 235.0, 399.0, 447.0, 515.0, 612.0, 639.0],
            "polystyrene" => &[
                621.0, 795.0, 1001.0, 1031.0, 1155.0, 1583.0, 1602.0, 2904.0, 3054.0,
            ],
            other => panic!("no bands listed for {other}"),
        }
    }

    /// One measured spectrum of the set.
    pub(in crate::prepare) struct Measured {
        /// The file name, e.g. `raman059.csv`.
        pub file: String,
        /// The material (the manifest's `tags`).
        pub material: String,
        /// The points as read.
        pub points: Vec<(f64, f64)>,
    }

    /// Every spectrum of the set, in the manifest's order.
    pub(in crate::prepare) fn spectra() -> Vec<Measured> {
        let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("real-spectra/raman");
        let manifest = std::fs::read_to_string(dir.join("manifest.csv")).unwrap();
        manifest
            .lines()
            .skip(1)
            .map(|line| {
                let cols: Vec<&str> = line.split(',').collect();
                let text = std::fs::read_to_string(dir.join(cols[0])).unwrap();
                let points = text
                    .lines()
                    .skip(1)
                    .map(|l| {
                        let (x, y) = l.split_once(',').unwrap();
                        (x.parse().unwrap(), y.parse().unwrap())
                    })
                    .collect();
                Measured {
                    file: cols[0].to_string(),
                    material: cols[3].to_string(),
                    points,
                }
            })
            .collect()
    }

    #[test]
    fn real_raman_bands_survive_despiking() {
        let set = spectra();
        assert_eq!(set.len(), 124);
        let mut total = 0;
        for Measured {
            file,
            material,
            points,
        } in &set
        {
            let (x, y): (Vec<f64>, Vec<f64>) = points.iter().copied().unzip();
            let (fixed, replaced) = despike(&y, DESPIKE_THRESHOLD);
            total += replaced.len();
            for &i in &replaced {
                let near = bands(material).iter().find(|b| (x[i] - *b).abs() < 15.0);
                assert!(
                    near.is_none(),
                    "{file}: point at {} near band {near:?}",
                    x[i]
                );
            }
            // The strongest point (the silicon line, calcite 1086, ...) is untouched.
            let top = (0..y.len()).max_by(|&a, &b| y[a].total_cmp(&y[b])).unwrap();
            assert_eq!(fixed[top], y[top], "{file}");
        }
        // 14 events of one or two points in 9 files, all off the bands: dips of a few counts
        // on instrument B-785, dark-subtraction dips and a hot pixel on E-785.
        assert_eq!(total, 16);
    }

    #[test]
    fn a_spike_added_to_real_spectra_is_removed() {
        // A one-point spike near 1900 cm-1, where none of the four materials has a band, a
        // tenth of the spectrum's range plus 20 noise standard deviations tall: the kind of
        // event a cosmic ray leaves (thousands of counts are common, so this is a small one).
        for Measured { file, points, .. } in spectra() {
            let (x, mut y): (Vec<f64>, Vec<f64>) = points.into_iter().unzip();
            let k = (0..x.len())
                .min_by(|&a, &b| (x[a] - 1900.0).abs().total_cmp(&(x[b] - 1900.0).abs()))
                .unwrap();
            let (lo, hi) = y
                .iter()
                .fold((f64::MAX, f64::MIN), |(l, h), &v| (l.min(v), h.max(v)));
            // Counts are whole numbers: at least one count of noise, where the median
            // difference is 0 (instrument B-785 sampled at 0.2 cm-1).
            let sd = noise_sd(&y).max(1.0);
            let height = 0.1 * (hi - lo) + 20.0 * sd;
            let before = y[k];
            y[k] += height;
            let (fixed, replaced) = despike(&y, DESPIKE_THRESHOLD);
            assert!(replaced.contains(&k), "{file}: {replaced:?}");
            assert!(
                (fixed[k] - before).abs() < 0.05 * height + 4.0 * sd,
                "{file}: {before} -> {}",
                fixed[k]
            );
        }
    }

    #[test]
    fn the_silicon_line_survives_preparation_and_a_spike_does_not() {
        // raman059.csv: silicon on instrument D-532, 2.6 cm-1 sampling, the 520 cm-1 line
        // about three points above half height.
        let points = spectra()
            .into_iter()
            .find(|s| s.file == "raman059.csv")
            .unwrap()
            .points;
        let recipe = Recipe::default_for(Technique::Raman);
        let plain = Recipe {
            despike: None,
            ..recipe.clone()
        };
        let path = std::path::Path::new("raman059.csv");
        let conditions = Conditions::default();
        let clean = prepare(path, &recipe, &points, &conditions).unwrap();
        let unspiked = prepare(path, &plain, &points, &conditions).unwrap();
        // Silicon's optical phonon, 520.7 cm-1 (common practice as a wavenumber standard).
        assert!(
            clean.peaks.iter().any(|p| (p.x - 520.7).abs() < 3.0),
            "{:?}",
            clean.peaks
        );
        assert_eq!(clean.peaks, unspiked.peaks);
        assert_eq!(clean.vector, unspiked.vector);
        // A spike of half the silicon line's height at 1500 cm-1.
        let mut spiked = points.clone();
        let k = spiked.iter().position(|p| p.0 > 1500.0).unwrap();
        let top = points.iter().map(|p| p.1).fold(f64::MIN, f64::max);
        spiked[k].1 += 0.5 * top;
        let fixed = prepare(path, &recipe, &spiked, &conditions).unwrap();
        let kept = prepare(path, &plain, &spiked, &conditions).unwrap();
        let at =
            |p: &crate::prepare::Prepared| p.peaks.iter().any(|q| (q.x - spiked[k].0).abs() < 4.0);
        assert!(at(&kept), "without despiking the spike is a peak");
        assert!(!at(&fixed), "{:?}", fixed.peaks);
        let warning = fixed.warnings.iter().find(|w| w.contains("spike")).unwrap();
        assert!(
            warning.starts_with("1 spike point")
                && warning.contains(&format!("{:.1}", spiked[k].0)),
            "{warning}"
        );
    }
}
