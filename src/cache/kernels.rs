//! The inner loops of the scan, written so that the compiler vectorises them: fixed-width
//! chunks with separate accumulators. On x86-64 the i8 kernel is compiled twice, once for the
//! baseline and once with AVX2, and the AVX2 copy is chosen at run time when the CPU has it;
//! the build needs no `-C target-cpu`.

use std::cmp::{Ordering, Reverse};
use std::collections::BinaryHeap;

/// Dot product in f32 with 8 independent accumulators.
pub fn dot_f32(a: &[f32], b: &[f32]) -> f32 {
    let mut acc = [0f32; 8];
    let (ca, cb) = (a.chunks_exact(8), b.chunks_exact(8));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        for k in 0..8 {
            acc[k] += x[k] * y[k];
        }
    }
    let mut s: f32 = acc.iter().sum();
    for (x, y) in ra.iter().zip(rb) {
        s += x * y;
    }
    s
}

#[inline(always)]
fn dot_i8_body(a: &[i8], b: &[i8]) -> i32 {
    let mut acc = [0i32; 16];
    let (ca, cb) = (a.chunks_exact(16), b.chunks_exact(16));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        for k in 0..16 {
            acc[k] += i32::from(x[k]) * i32::from(y[k]);
        }
    }
    let mut s: i32 = acc.iter().sum();
    for (x, y) in ra.iter().zip(rb) {
        s += i32::from(*x) * i32::from(*y);
    }
    s
}

/// Rows processed together so that they stay in cache while every query of a block passes.
const ROW_BLOCK: usize = 64;
/// Queries processed together against one block of rows.
const QUERY_BLOCK: usize = 8;

#[inline(always)]
fn block_body(rows: &[i8], stride: usize, queries: &[i8], out: &mut [i32]) {
    let nrows = rows.len() / stride;
    let nq = queries.len() / stride;
    for r0 in (0..nrows).step_by(ROW_BLOCK) {
        let r1 = (r0 + ROW_BLOCK).min(nrows);
        for q0 in (0..nq).step_by(QUERY_BLOCK) {
            let q1 = (q0 + QUERY_BLOCK).min(nq);
            for r in r0..r1 {
                let row = &rows[r * stride..(r + 1) * stride];
                for q in q0..q1 {
                    out[r * nq + q] = dot_i8_body(row, &queries[q * stride..(q + 1) * stride]);
                }
            }
        }
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn block_avx2(rows: &[i8], stride: usize, queries: &[i8], out: &mut [i32]) {
    block_body(rows, stride, queries, out)
}

fn block_portable(rows: &[i8], stride: usize, queries: &[i8], out: &mut [i32]) {
    block_body(rows, stride, queries, out)
}

/// Integer dot products of every row (of length `stride`) with every query: `out[r * nq + q]`.
pub fn i8_dots(rows: &[i8], stride: usize, queries: &[i8], out: &mut [i32]) {
    debug_assert_eq!(out.len(), (rows.len() / stride) * (queries.len() / stride));
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the CPU has AVX2, checked just above.
        unsafe { block_avx2(rows, stride, queries, out) };
        return;
    }
    block_portable(rows, stride, queries, out)
}

/// A key with a row index, ordered by key, then by lower row first.
#[derive(Debug, Clone, Copy)]
pub struct Entry(pub f32, pub usize);

impl PartialEq for Entry {
    fn eq(&self, o: &Self) -> bool {
        self.cmp(o) == Ordering::Equal
    }
}
impl Eq for Entry {}
impl PartialOrd for Entry {
    fn partial_cmp(&self, o: &Self) -> Option<Ordering> {
        Some(self.cmp(o))
    }
}
impl Ord for Entry {
    fn cmp(&self, o: &Self) -> Ordering {
        self.0.total_cmp(&o.0).then(o.1.cmp(&self.1))
    }
}

/// The k largest keys seen.
#[derive(Debug, Clone)]
pub struct TopK {
    k: usize,
    heap: BinaryHeap<Reverse<Entry>>,
}

impl TopK {
    /// An empty selection of at most `k`.
    pub fn new(k: usize) -> TopK {
        TopK {
            k,
            heap: BinaryHeap::with_capacity(k + 1),
        }
    }

    /// Offers one key.
    #[inline]
    pub fn push(&mut self, key: f32, row: usize) {
        if self.heap.len() < self.k {
            self.heap.push(Reverse(Entry(key, row)));
        } else if let Some(Reverse(min)) = self.heap.peek()
            && Entry(key, row) > *min
        {
            self.heap.pop();
            self.heap.push(Reverse(Entry(key, row)));
        }
    }

    /// Merges another selection into this one.
    pub fn merge(mut self, other: TopK) -> TopK {
        for Reverse(e) in other.heap {
            self.push(e.0, e.1);
        }
        self
    }

    /// True when `k` keys are held, so keys not held are at most [`TopK::min`].
    pub fn full(&self) -> bool {
        self.heap.len() >= self.k
    }

    /// The smallest key held.
    pub fn min(&self) -> Option<f32> {
        self.heap.peek().map(|Reverse(e)| e.0)
    }

    /// The rows held.
    pub fn rows(&self) -> Vec<usize> {
        self.heap.iter().map(|Reverse(e)| e.1).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kernels_agree_with_plain_loops() {
        let a: Vec<i8> = (0..96).map(|i| ((i * 37) % 255 - 127) as i8).collect();
        let b: Vec<i8> = (0..96).map(|i| ((i * 91 + 5) % 255 - 127) as i8).collect();
        let plain: i32 = a
            .iter()
            .zip(&b)
            .map(|(&x, &y)| i32::from(x) * i32::from(y))
            .sum();
        let rows = [a.clone(), b.clone()].concat();
        let mut out = [0i32; 4];
        i8_dots(&rows, 96, &rows, &mut out);
        assert_eq!(out[1], plain);
        assert_eq!(out[2], plain);
        let fa: Vec<f32> = a.iter().map(|&x| f32::from(x)).collect();
        let fb: Vec<f32> = b.iter().map(|&x| f32::from(x)).collect();
        assert_eq!(dot_f32(&fa[..93], &fb[..93]) as i64, {
            a[..93]
                .iter()
                .zip(&b[..93])
                .map(|(&x, &y)| i64::from(x) * i64::from(y))
                .sum::<i64>()
        });
    }

    #[test]
    fn top_k_keeps_the_largest() {
        let mut t = TopK::new(3);
        for (i, k) in [0.1f32, 0.9, 0.5, 0.7, 0.2].iter().enumerate() {
            t.push(*k, i);
        }
        let mut rows = t.rows();
        rows.sort();
        assert_eq!(rows, vec![1, 2, 3]);
        assert_eq!(t.min(), Some(0.5));
    }
}
