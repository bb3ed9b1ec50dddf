//! Portable random streams and the value transforms built on them.
//!
//! Every block of [`BLOCK_ROWS`] rows of every column draws from its own ChaCha8 stream,
//! keyed by SHA-256 of (seed, table, column, block). Raw 64-bit words come from ChaCha, whose
//! output is fixed by its specification; every transform to a value is written here and uses
//! `libm` for transcendental functions, so the same seed gives the same bytes on any
//! platform, toolchain, thread count or partition count.

use rand_chacha::rand_core::{RngCore, SeedableRng};
use rand_chacha::ChaCha8Rng;
use sha2::{Digest, Sha256};

/// Rows per independently seeded block.
pub const BLOCK_ROWS: u64 = 4096;

/// One block's random stream.
pub struct Stream(ChaCha8Rng);

impl Stream {
    /// The stream of block `block` of column `column` of table `table` under `seed`.
    pub fn new(seed: u64, table: &str, column: &str, block: u64) -> Stream {
        let mut h = Sha256::new();
        h.update(b"weir-gen-v1\0");
        h.update(seed.to_le_bytes());
        h.update(table.as_bytes());
        h.update([0]);
        h.update(column.as_bytes());
        h.update([0]);
        h.update(block.to_le_bytes());
        Stream(ChaCha8Rng::from_seed(h.finalize().into()))
    }

    /// A raw 64-bit word.
    #[inline]
    pub fn next_u64(&mut self) -> u64 {
        self.0.next_u64()
    }

    /// Uniform in [0, 1) with 53 random bits.
    #[inline]
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Uniform integer in `lo..=hi` by the multiply-high mapping (bias below span/2^64).
    #[inline]
    pub fn int_in(&mut self, lo: i128, hi: i128) -> i128 {
        let span = (hi - lo + 1) as u128;
        let r = u128::from(self.next_u64());
        if span > u128::from(u64::MAX) {
            return lo + r as i128;
        }
        lo + ((r * span) >> 64) as i128
    }

    /// True with probability `p`.
    #[inline]
    pub fn chance(&mut self, p: f64) -> bool {
        self.unit() < p
    }

    /// Standard normal by the Box–Muller transform (one of the pair is used).
    pub fn normal(&mut self) -> f64 {
        let u1 = 1.0 - self.unit(); // in (0, 1], so the logarithm is finite
        let u2 = self.unit();
        libm::sqrt(-2.0 * libm::log(u1)) * libm::cos(2.0 * std::f64::consts::PI * u2)
    }

    /// Weibull(shape k, scale λ) by inversion: λ (−ln(1−u))^(1/k).
    pub fn weibull(&mut self, shape: f64, scale: f64) -> f64 {
        let u = self.unit();
        scale * libm::pow(-libm::log(1.0 - u), 1.0 / shape)
    }
}

/// A Zipf distribution over ranks `0..n`: rank k has weight 1/(k+1)^θ. Sampled by binary
/// search in the cumulative weights (computed with `libm::pow`, so portable).
#[derive(Debug, Clone)]
pub struct Zipf {
    cdf: Vec<f64>,
}

impl Zipf {
    /// The distribution over `n` ranks (n ≥ 1) with exponent `theta` ≥ 0.
    pub fn new(n: u64, theta: f64) -> Zipf {
        let mut acc = 0.0;
        let mut cdf: Vec<f64> = (0..n)
            .map(|k| {
                acc += 1.0 / libm::pow((k + 1) as f64, theta);
                acc
            })
            .collect();
        let total = acc;
        cdf.iter_mut().for_each(|c| *c /= total);
        Zipf { cdf }
    }

    /// Number of ranks.
    pub fn ranks(&self) -> u64 {
        self.cdf.len() as u64
    }

    /// A rank in `0..n`.
    pub fn sample(&self, s: &mut Stream) -> u64 {
        let u = s.unit();
        (self.cdf.partition_point(|&c| c <= u) as u64).min(self.cdf.len() as u64 - 1)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streams_are_keyed() {
        let a = Stream::new(1, "t", "v", 0).next_u64();
        assert_eq!(a, Stream::new(1, "t", "v", 0).next_u64());
        assert_ne!(a, Stream::new(2, "t", "v", 0).next_u64());
        assert_ne!(a, Stream::new(1, "t", "w", 0).next_u64());
        assert_ne!(a, Stream::new(1, "t", "v", 1).next_u64());
    }

    #[test]
    fn int_in_stays_in_range() {
        let mut s = Stream::new(3, "t", "v", 0);
        for _ in 0..10_000 {
            let v = s.int_in(-3, 5);
            assert!((-3..=5).contains(&v));
        }
        let v = s.int_in(0, u64::MAX as i128);
        assert!((0..=u64::MAX as i128).contains(&v));
    }

    #[test]
    fn zipf_rank_zero_is_most_frequent() {
        // With θ = 1 over 10 ranks, P(rank 0) = 1/H(10) ≈ 0.3414 (harmonic number H(10) =
        // 2.928968; textbook value recalled from memory).
        let z = Zipf::new(10, 1.0);
        let mut s = Stream::new(9, "t", "z", 0);
        let n = 100_000;
        let zeros = (0..n).filter(|_| z.sample(&mut s) == 0).count();
        let p = zeros as f64 / n as f64;
        assert!((p - 1.0 / 2.928968).abs() < 0.01, "{p}");
    }
}
