//! The plain baselines, computed here from the raw CSV points and nothing of whorl's
//! preparation: what a careful analyst would do with a spreadsheet, against which whorl's
//! scorings must show their worth.

/// EI baseline vector: intensities summed per nominal m/z (m/z rounded to the nearest
/// integer), square roots taken (a common damping of the base peak's weight, common practice),
/// scaled to unit length. Sparse: `(m/z, value)` in ascending m/z.
pub fn ei_vector(points: &[(f64, f64)]) -> Vec<(i64, f64)> {
    let mut sums: std::collections::BTreeMap<i64, f64> = Default::default();
    for &(mz, y) in points {
        *sums.entry(mz.round() as i64).or_default() += y.max(0.0);
    }
    let mut v: Vec<(i64, f64)> = sums.into_iter().map(|(m, y)| (m, y.sqrt())).collect();
    let norm = v.iter().map(|p| p.1 * p.1).sum::<f64>().sqrt();
    if norm > 0.0 {
        for p in &mut v {
            p.1 /= norm;
        }
    }
    v
}

/// Cosine of two unit-length sparse vectors.
pub fn ei_cosine(a: &[(i64, f64)], b: &[(i64, f64)]) -> f64 {
    let (mut i, mut j, mut dot) = (0, 0, 0.0);
    while i < a.len() && j < b.len() {
        match a[i].0.cmp(&b[j].0) {
            std::cmp::Ordering::Less => i += 1,
            std::cmp::Ordering::Greater => j += 1,
            std::cmp::Ordering::Equal => {
                dot += a[i].1 * b[j].1;
                i += 1;
                j += 1;
            }
        }
    }
    dot
}

/// The Raman baseline's grid: 160 to 1990 cm-1 by 2 (inside the span of every spectrum of the
/// set, also after a calibration offset of a few cm-1).
const GRID: (f64, f64, f64) = (160.0, 1990.0, 2.0);
/// Half-width, in grid points, of the running minimum: 50 points, so a window of 101 points
/// (200 cm-1), wider than any band of the four materials.
const MIN_HALF: usize = 50;
/// Half-width, in grid points, of the moving average that smooths the running minimum: also
/// 50 points (200 cm-1).
const SMOOTH_HALF: usize = 50;
/// The window compared: 200-1800 cm-1.
const WINDOW: (f64, f64) = (200.0, 1800.0);

/// Raman baseline vector: the raw counts interpolated linearly onto 2 cm-1 steps, minus a
/// baseline that is the running minimum (101 points, 200 cm-1) smoothed by a moving average
/// (101 points), over 200-1800 cm-1, scaled to unit length. Windows shrink at the ends of
/// the grid.
pub fn raman_vector(points: &[(f64, f64)]) -> Vec<f64> {
    let mut sorted = points.to_vec();
    sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
    let n = ((GRID.1 - GRID.0) / GRID.2).round() as usize + 1;
    let xs: Vec<f64> = (0..n).map(|i| GRID.0 + GRID.2 * i as f64).collect();
    let mut j = 0;
    let ys: Vec<f64> = xs
        .iter()
        .map(|&x| {
            while j + 2 < sorted.len() && sorted[j + 1].0 < x {
                j += 1;
            }
            let ((x0, y0), (x1, y1)) = (sorted[j], sorted[j + 1]);
            let t = ((x - x0) / (x1 - x0)).clamp(0.0, 1.0);
            y0 + t * (y1 - y0)
        })
        .collect();
    let window = |i: usize, half: usize| i.saturating_sub(half)..(i + half + 1).min(n);
    let minima: Vec<f64> = (0..n)
        .map(|i| {
            ys[window(i, MIN_HALF)]
                .iter()
                .copied()
                .fold(f64::INFINITY, f64::min)
        })
        .collect();
    let baseline: Vec<f64> = (0..n)
        .map(|i| {
            let w = &minima[window(i, SMOOTH_HALF)];
            w.iter().sum::<f64>() / w.len() as f64
        })
        .collect();
    let mut v: Vec<f64> = (0..n)
        .filter(|&i| (WINDOW.0..=WINDOW.1).contains(&xs[i]))
        .map(|i| ys[i] - baseline[i])
        .collect();
    let norm = v.iter().map(|y| y * y).sum::<f64>().sqrt();
    if norm > 0.0 {
        for y in &mut v {
            *y /= norm;
        }
    }
    v
}

/// Cosine of two unit-length vectors on the same grid.
pub fn raman_cosine(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Indices of `candidates` ranked by `score` (highest first, ties by index).
pub fn ranked(candidates: impl Iterator<Item = usize>, score: impl Fn(usize) -> f64) -> Vec<usize> {
    let mut scored: Vec<(f64, usize)> = candidates.map(|i| (score(i), i)).collect();
    scored.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
    scored.into_iter().map(|p| p.1).collect()
}
