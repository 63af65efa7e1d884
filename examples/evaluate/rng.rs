//! A tiny seeded generator (xorshift64*, Vigna 2016), shared by the evaluations.

pub struct Rng(u64);

impl Rng {
    pub fn new(parts: &[u64]) -> Rng {
        // SplitMix64 finaliser over the parts, so nearby seeds give unrelated streams.
        let mut z = 0x9E37_79B9_7F4A_7C15u64;
        for &p in parts {
            z ^= p.wrapping_add(0x9E37_79B9_7F4A_7C15).wrapping_add(z << 6);
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^= z >> 31;
        }
        Rng(z.max(1))
    }
    pub fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
    pub fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.uniform()
    }
    /// Standard normal (Box-Muller).
    pub fn gauss(&mut self) -> f64 {
        let u1 = self.uniform().max(1e-300);
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
    pub fn sign(&mut self) -> f64 {
        if self.uniform() < 0.5 { -1.0 } else { 1.0 }
    }
    pub fn pick(&mut self, n: usize) -> usize {
        ((self.uniform() * n as f64) as usize).min(n.saturating_sub(1))
    }
}
