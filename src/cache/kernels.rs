//! The inner loops of the scan. The portable ones are written so that the compiler
//! vectorises them: fixed-width chunks with separate accumulators. On x86-64 the i8 kernel
//! also has an AVX2 version written with `std::arch` intrinsics, chosen at run time when the
//! CPU has AVX2; the build needs no `-C target-cpu`.

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
/// Queries processed together against one block of rows (portable kernel).
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

fn block_portable(rows: &[i8], stride: usize, queries: &[i8], out: &mut [i32]) {
    block_body(rows, stride, queries, out)
}

/// The AVX2 kernel: 32 products per instruction with `vpmaddubsw`, which multiplies unsigned
/// by signed bytes, so each row byte x is split into |x| (unsigned) and the query byte y
/// takes x's sign (`vpsignb`): |x| * (y sign(x)) = x y. Two adjacent products are summed
/// in i16: |x|, |y| <= 128, so |x y + x' y'| <= 2 * 128 * 127 = 32512 < 32767, never
/// saturating (the cache's bytes are within -127..127 anyway); `vpmaddwd` with ones widens
/// the pairs to i32. The result equals the portable kernel's exactly.
#[cfg(target_arch = "x86_64")]
mod avx2 {
    use std::arch::x86_64::*;

    /// Horizontal sum of eight i32 lanes.
    #[target_feature(enable = "avx2")]
    fn hsum(v: __m256i) -> i32 {
        let lo = _mm256_castsi256_si128(v);
        let hi = _mm256_extracti128_si256::<1>(v);
        let s = _mm_add_epi32(lo, hi);
        let s = _mm_add_epi32(s, _mm_shuffle_epi32::<0b01_00_11_10>(s));
        let s = _mm_add_epi32(s, _mm_shuffle_epi32::<0b10_11_00_01>(s));
        _mm_cvtsi128_si32(s)
    }

    /// Dot products of `R` rows with `Q` queries (all of one length, a multiple of 32):
    /// `out[r * nq + j]` for row `r` and query `j`.
    #[target_feature(enable = "avx2")]
    fn block<const R: usize, const Q: usize>(
        rows: [&[i8]; R],
        queries: [&[i8]; Q],
        nq: usize,
        out: &mut [i32],
    ) {
        let len = rows[0].len();
        let ones = _mm256_set1_epi16(1);
        let mut acc = [[_mm256_setzero_si256(); Q]; R];
        for k in 0..len / 32 {
            let at = k * 32;
            let mut ys = [_mm256_setzero_si256(); Q];
            for j in 0..Q {
                // SAFETY: at + 32 <= len, and every query has the rows' length (checked by
                // the caller); unaligned loads need no alignment.
                ys[j] = unsafe { _mm256_loadu_si256(queries[j].as_ptr().add(at).cast()) };
            }
            for i in 0..R {
                // SAFETY: as above.
                let x = unsafe { _mm256_loadu_si256(rows[i].as_ptr().add(at).cast()) };
                let ax = _mm256_abs_epi8(x);
                for j in 0..Q {
                    let p = _mm256_maddubs_epi16(ax, _mm256_sign_epi8(ys[j], x));
                    acc[i][j] = _mm256_add_epi32(acc[i][j], _mm256_madd_epi16(p, ones));
                }
            }
        }
        for i in 0..R {
            for j in 0..Q {
                out[i * nq + j] = hsum(acc[i][j]);
            }
        }
    }

    /// `i8_dots` with AVX2; `stride` must be a multiple of 32.
    #[target_feature(enable = "avx2")]
    pub(super) fn dots(rows: &[i8], stride: usize, queries: &[i8], out: &mut [i32]) {
        assert!(stride.is_multiple_of(32) && stride > 0);
        let nrows = rows.len() / stride;
        let nq = queries.len() / stride;
        assert!(queries.len() == nq * stride && out.len() >= nrows * nq);
        let q = |j: usize| &queries[j * stride..(j + 1) * stride];
        let row = |r: usize| &rows[r * stride..(r + 1) * stride];
        for r0 in (0..nrows).step_by(super::ROW_BLOCK) {
            let r1 = (r0 + super::ROW_BLOCK).min(nrows);
            let mut q0 = 0;
            while q0 < nq {
                let take = if nq - q0 >= 4 { 4 } else { 1 };
                let mut r = r0;
                // Two rows share each query load; four queries share each row load.
                while r < r1 {
                    let o = &mut out[r * nq + q0..];
                    match (take, r + 1 < r1) {
                        (4, _) => {
                            block::<1, 4>([row(r)], [q(q0), q(q0 + 1), q(q0 + 2), q(q0 + 3)], nq, o)
                        }
                        (_, true) => {
                            block::<2, 1>([row(r), row(r + 1)], [q(q0)], nq, o);
                            r += 1;
                        }
                        _ => block::<1, 1>([row(r)], [q(q0)], nq, o),
                    }
                    r += 1;
                }
                q0 += take;
            }
        }
    }
}

/// Integer dot products of every row (of length `stride`) with every query: `out[r * nq + q]`.
pub fn i8_dots(rows: &[i8], stride: usize, queries: &[i8], out: &mut [i32]) {
    debug_assert_eq!(out.len(), (rows.len() / stride) * (queries.len() / stride));
    #[cfg(target_arch = "x86_64")]
    if stride.is_multiple_of(32) && std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the CPU has AVX2, checked just above.
        unsafe { avx2::dots(rows, stride, queries, out) };
        return;
    }
    block_portable(rows, stride, queries, out)
}

/// The integer dot product of one row with one query of the same length.
pub fn i8_dot(row: &[i8], query: &[i8]) -> i32 {
    debug_assert_eq!(row.len(), query.len());
    #[cfg(target_arch = "x86_64")]
    if row.len().is_multiple_of(32)
        && !row.is_empty()
        && std::arch::is_x86_feature_detected!("avx2")
    {
        let mut out = [0i32; 1];
        // SAFETY: the CPU has AVX2, checked just above.
        unsafe { avx2::dots(row, row.len(), query, &mut out) };
        return out[0];
    }
    dot_i8_body(row, query)
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

    /// The smallest key a push can still add: minus infinity until `k` keys are held.
    #[inline]
    pub fn floor(&self) -> f32 {
        if self.full() {
            self.min().unwrap_or(f32::NEG_INFINITY)
        } else {
            f32::NEG_INFINITY
        }
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
    fn the_runtime_kernel_equals_the_portable_one() {
        // Extremes included: every product at +-127 * 127, sums near the i16 pair limit.
        let mut x = 0x2545_F491_4F6C_DD1Du64;
        let mut byte = || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            match x % 5 {
                0 => 127,
                1 => -127,
                _ => ((x >> 8) % 255) as i8 as i32 as i8,
            }
        };
        for (stride, nrows, nq) in [(32, 3, 1), (64, 70, 5), (1824, 9, 7), (96, 130, 4)] {
            let rows: Vec<i8> = (0..stride * nrows).map(|_| byte().max(-127)).collect();
            let queries: Vec<i8> = (0..stride * nq).map(|_| byte().max(-127)).collect();
            let mut fast = vec![0i32; nrows * nq];
            let mut portable = vec![0i32; nrows * nq];
            i8_dots(&rows, stride, &queries, &mut fast);
            block_portable(&rows, stride, &queries, &mut portable);
            assert_eq!(
                fast, portable,
                "stride {stride}, {nrows} rows, {nq} queries"
            );
            let plain = |r: usize, q: usize| -> i32 {
                (0..stride)
                    .map(|k| i32::from(rows[r * stride + k]) * i32::from(queries[q * stride + k]))
                    .sum()
            };
            assert_eq!(fast[(nrows - 1) * nq + nq - 1], plain(nrows - 1, nq - 1));
        }
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
