//! Row transforms: a prepared spectrum made ready for the cache's dot products, its coarse
//! row, its i8 quantisation, and the Stein & Scott weights of a peak list.

use std::ops::Range;

use super::layout::{BLOCK_REST, BLOCKS, Kind, NO_BLOCK};
use crate::prepare::Peak;
use crate::score::{CompositeParams, entropy_weights};
use crate::technique::Grid;

/// The unmasked bins of a grid.
pub fn active_bins(grid: &Grid) -> Vec<bool> {
    (0..grid.len()).map(|i| !grid.masked(grid.x(i))).collect()
}

/// A prepared vector made ready for dot products (see the module docs), in f64 then f32.
pub fn dense_row(v: &[f32], kind: Kind, active: &[bool]) -> Vec<f32> {
    let mut x: Vec<f64> = v.iter().map(|&a| f64::from(a)).collect();
    if kind == Kind::Centred {
        let (mut n, mut s) = (0f64, 0f64);
        for (a, &on) in x.iter().zip(active) {
            if on {
                n += 1.0;
                s += a;
            }
        }
        let mean = if n > 0.0 { s / n } else { 0.0 };
        for (a, &on) in x.iter_mut().zip(active) {
            *a = if on { *a - mean } else { 0.0 };
        }
        if n < 2.0 {
            x.iter_mut().for_each(|a| *a = 0.0);
        }
    }
    let norm = x.iter().map(|a| a * a).sum::<f64>().sqrt();
    x.iter()
        .map(|&a| if norm > 0.0 { (a / norm) as f32 } else { 0.0 })
        .collect()
}

/// The dense row of a prepared vector covering only the bins `covered` (see
/// `prepare::Coverage`): the vector over its own active bins, the unmasked bins it covers,
/// with every other bin 0. For a vector covering the whole grid it is [`dense_row`].
pub fn covered_row(v: &[f32], kind: Kind, active: &[bool], covered: Range<usize>) -> Vec<f32> {
    if covered == (0..v.len()) {
        return dense_row(v, kind, active);
    }
    let inside = |i: usize| covered.contains(&i);
    let vector: Vec<f32> = (v.iter().enumerate())
        .map(|(i, &a)| if inside(i) { a } else { 0.0 })
        .collect();
    let active: Vec<bool> = (active.iter().enumerate())
        .map(|(i, &on)| on && inside(i))
        .collect();
    dense_row(&vector, kind, &active)
}

/// The coarse row of a dense row, and an upper bound on the L2 norm of what it leaves out.
///
/// Let P be the orthogonal projection onto vectors constant over each block of `block`
/// consecutive values. Every vector splits as x = Px + x', with Px and x' orthogonal, so for
/// two rows q.x = Pq.Px + q'.x', and by the Cauchy-Schwarz inequality
/// |q'.x'| <= |q'| |x'|. The coarse row holds sqrt(block) times each block mean, so that the
/// dot product of two coarse rows is Pq.Px; `rest` is |x'|. The scan bounds q.x by the
/// coarse dot product plus |q'| |x'|, reading 1/block of the bytes of the full i8 row.
/// Smooth spectra (bands several grid steps wide) leave little out, so the bound is tight
/// where it matters. The norm is computed in f64 and rounded up, so it is never too small.
pub fn coarse_row(row: &[f32], coarse_stride: usize, block: usize) -> (Vec<f32>, f32) {
    let mut coarse = vec![0f32; coarse_stride];
    let mut rest = 0f64;
    let root = (block as f64).sqrt();
    for (c, values) in coarse.iter_mut().zip(row.chunks(block)) {
        // A short last block is padded with zeros, as the cache's rows are.
        let mean = values.iter().map(|&a| f64::from(a)).sum::<f64>() / block as f64;
        rest += values
            .iter()
            .map(|&a| (f64::from(a) - mean).powi(2))
            .sum::<f64>()
            + (block - values.len()) as f64 * mean * mean;
        *c = (mean * root) as f32;
    }
    let rest = rest.sqrt();
    (coarse, (rest * (1.0 + 1e-6) + 1e-7) as f32)
}

/// The block size of a cache's coarse rows, from a sample of its dense rows: the coarsest of
/// [`BLOCKS`] whose median left-out norm stays within [`BLOCK_REST`], else the finest. Only
/// speed depends on it (a looser coarse bound sends more rows to the full i8 row); the hits
/// never do. Smooth spectra (IR and Raman bands several grid steps wide) take blocks of 8,
/// spectra with lines one or two grid steps wide (1H NMR) small ones.
pub fn choose_block(rows: &[Vec<f32>]) -> usize {
    if rows.is_empty() {
        return NO_BLOCK;
    }
    for block in BLOCKS {
        let mut rests: Vec<f32> = rows
            .iter()
            .map(|r| coarse_row(r, r.len().div_ceil(block), block).1)
            .collect();
        rests.sort_by(f32::total_cmp);
        if f64::from(rests[rests.len() / 2]) <= BLOCK_REST {
            return block;
        }
    }
    BLOCKS[BLOCKS.len() - 1]
}

/// Quantises a row to i8 with one scale (value = scale x q): the scale, and the L1 norm of
/// the dequantised row, which bounds the error of a quantised query against it.
pub fn quantise(row: &[f32]) -> (Vec<i8>, f32, f32) {
    let max = row.iter().fold(0f32, |m, &a| m.max(a.abs()));
    if max == 0.0 {
        return (vec![0; row.len()], 0.0, 0.0);
    }
    let scale = max / 127.0;
    let q: Vec<i8> = row
        .iter()
        .map(|&a| {
            // Rounded to nearest, halves away from zero (as `f32::round`, without a libm
            // call on baseline x86-64): `t` truncates, and `v - t` is exact.
            let v = (a / scale).clamp(-127.0, 127.0);
            let t = v as i32;
            let f = v - t as f32;
            (t + i32::from(f >= 0.5) - i32::from(f <= -0.5)) as i8
        })
        .collect();
    let l1 = q.iter().map(|&v| f32::from(v).abs() * scale).sum();
    (q, scale, l1)
}

/// Stein & Scott weights I^m (m/z)^n of a peak list, L2-normalised (see `score::stein_scott`).
pub fn weights(peaks: &[Peak], params: &CompositeParams) -> Vec<f32> {
    let w: Vec<f64> = peaks
        .iter()
        .map(|p| {
            if p.height > 0.0 {
                p.height.powf(params.intensity_exponent) * p.x.powf(params.mass_exponent)
            } else {
                0.0
            }
        })
        .collect();
    let norm = w.iter().map(|a| a * a).sum::<f64>().sqrt();
    w.iter()
        .map(|&a| if norm > 0.0 { (a / norm) as f32 } else { 0.0 })
        .collect()
}

/// The entropy-weighted probabilities of a peak list (`score::entropy_weights`), in f32: what
/// the entropy similarity sums over the common m/z.
pub fn entropy_row(peaks: &[Peak]) -> Vec<f32> {
    let heights: Vec<f64> = peaks.iter().map(|p| p.height).collect();
    entropy_weights(&heights)
        .iter()
        .map(|&a| a as f32)
        .collect()
}

/// The weight a posting carries: the peak's cached weight, negated (sign bit set, also for
/// 0) when the cached height or weight may be a positive value lost to f32 rounding, so that
/// reverse search can leave the row's bound at 1 (see `scan::reverse_sums`).
pub fn posting_weight(height: f32, weight: f32) -> f32 {
    if height > 0.0 && weight > 0.0 {
        weight
    } else {
        -weight.abs()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_coarse_split_adds_up_to_the_dot_product() {
        // q.x = Pq.Px + q'.x' for the orthogonal projection P onto blockwise-constant
        // vectors (linear algebra, common practice); the coarse rows carry Pq.Px, and the
        // rest norms are |q'| and |x'|. Values worked by hand: blocks of 4, one block.
        let q = [1.0f32, 0.0, 0.0, 0.0];
        let x = [0.5f32, 0.5, 0.5, 0.5];
        let (cq, rq) = coarse_row(&q, 32, 4);
        let (cx, rx) = coarse_row(&x, 32, 4);
        // Block means 1/4 and 1/2, times sqrt(4) = 2: 0.5 and 1.0.
        assert!((cq[0] - 0.5).abs() < 1e-7 && (cx[0] - 1.0).abs() < 1e-7);
        assert!(cq[1..].iter().chain(&cx[1..]).all(|&a| a == 0.0));
        // q' = (3/4, -1/4, -1/4, -1/4): |q'| = sqrt(12/16); x' = 0.
        assert!((f64::from(rq) - 0.75f64.sqrt()).abs() < 1e-6 && rx < 1e-6);
        // Pq.Px = 0.5 = q.x, since x' = 0.
        assert!((cq[0] * cx[0] - 0.5).abs() < 1e-7);
    }

    #[test]
    fn the_block_size_follows_how_smooth_the_rows_are() {
        let unit = |v: Vec<f32>| {
            let n = v.iter().map(|a| a * a).sum::<f32>().sqrt();
            v.into_iter().map(|a| a / n).collect::<Vec<f32>>()
        };
        // Gaussian bands 20 grid steps wide: blocks of 8 leave little out.
        let smooth: Vec<Vec<f32>> = (0..9)
            .map(|k| {
                let c = 100.0 + 150.0 * k as f32;
                unit(
                    (0..1801)
                        .map(|i| (-((i as f32 - c) / 20.0).powi(2)).exp())
                        .collect(),
                )
            })
            .collect();
        assert_eq!(choose_block(&smooth), 8);
        // Lines one grid step wide (every row a few isolated spikes): the finest block.
        let spiky: Vec<Vec<f32>> = (0..9)
            .map(|k| {
                let mut v = vec![0f32; 1801];
                for j in 0..5 {
                    v[37 * k + 301 * j + 3] = 1.0;
                }
                unit(v)
            })
            .collect();
        assert_eq!(choose_block(&spiky), 2);
        // Nothing to sample: the default.
        assert_eq!(choose_block(&[]), 4);
    }
}
