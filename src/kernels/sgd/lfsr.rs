//! The random bits of stochastic rounding: a 32-bit Galois LFSR with the maximal-length
//! polynomial x³² + x²² + x² + x + 1 (toggle mask `0x8020_0003`, shifting right), which
//! cycles through all 2³² − 1 non-zero states.
//!
//! One step: `out = s & 1; s >>= 1; if out { s ^= MASK }`. A draw is 32 steps, the output
//! bits placed from bit 0 upward into a `u32`: hardware unrolls the 32 steps into one
//! clock. Each engine starts from the job's (non-zero) seed.

/// Galois toggle mask of x³² + x²² + x² + x + 1 (bit k − 1 set for each term xᵏ, k ≥ 1).
pub const MASK: u32 = 0x8020_0003;

/// The generator state.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Lfsr(pub u32);

impl Lfsr {
    /// One step, returning the output bit.
    #[inline]
    pub fn step(&mut self) -> u32 {
        let out = self.0 & 1;
        self.0 >>= 1;
        if out == 1 {
            self.0 ^= MASK;
        }
        out
    }

    /// 32 steps' output bits, the first in bit 0.
    #[inline]
    pub fn draw(&mut self) -> u32 {
        (0..32).fold(0, |acc, k| acc | (self.step() << k))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Product of polynomials over GF(2) modulo the degree-32 polynomial `p` (with x³²).
    fn mulmod(a: u64, b: u64, p: u64) -> u64 {
        let (mut a, mut b, mut r) = (a, b, 0u64);
        while b != 0 {
            if b & 1 == 1 {
                r ^= a;
            }
            b >>= 1;
            a <<= 1;
            if a >> 32 & 1 == 1 {
                a ^= p;
            }
        }
        r
    }

    fn powmod(e: u64, p: u64) -> u64 {
        let (mut base, mut e, mut r) = (2u64, e, 1u64);
        while e != 0 {
            if e & 1 == 1 {
                r = mulmod(r, base, p);
            }
            base = mulmod(base, base, p);
            e >>= 1;
        }
        r
    }

    #[test]
    fn polynomial_is_primitive() {
        // A degree-32 polynomial is primitive when x^(2^32−1) = 1 and x^((2^32−1)/q) ≠ 1 for
        // every prime q dividing 2^32 − 1 = 3·5·17·257·65537 (the Fermat primes F0..F4;
        // standard number theory, e.g. Lidl & Niederreiter, "Finite Fields", Thm 3.16).
        let p = (1u64 << 32) | (1 << 22) | (1 << 2) | (1 << 1) | 1;
        let order = (1u64 << 32) - 1;
        assert_eq!(powmod(order, p), 1);
        for q in [3u64, 5, 17, 257, 65537] {
            assert_ne!(powmod(order / q, p), 1, "q = {q}");
        }
        // The Galois mask is the same polynomial without x^32.
        assert_eq!(u64::from(MASK), (p & 0xFFFF_FFFF) >> 1 | (1 << 31));
    }

    #[test]
    fn galois_step_follows_the_recurrence() {
        let mut l = Lfsr(1);
        assert_eq!(l.step(), 1);
        assert_eq!(l.0, MASK);
        let mut l = Lfsr(2);
        assert_eq!(l.step(), 0);
        assert_eq!(l.0, 1);
        let mut l = Lfsr(0xACE1);
        let first = l.draw();
        assert_ne!(first, l.draw());
    }
}
