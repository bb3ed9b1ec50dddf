//! The 16-lane `f32` dot product in explicit vector registers: one 512-bit register (or
//! two 256-bit ones) holds the 16 lane sums, and the adder tree is four in-register
//! shuffle-and-add steps. It performs exactly the IEEE operations of [`tree::dot`] with
//! L = 16 and no flush, in the same order, so every form gives the same bits.
//!
//! ```text
//!   lanes  a0 a1 a2 a3 | a4 … a7 | a8 … a11 | a12 … a15      (one 512-bit register)
//!   step 1 a0+a1 (pairs swapped within 64 bits)      step 3  …+… (128-bit halves swapped)
//!   step 2 (a0+a1)+(a2+a3) (64-bit halves swapped)   step 4  lanes 0–7 + lanes 8–15 → lane 0
//! ```
//!
//! Lanes past the end of a row add the product of two masked-off zeros, +0. A lane sum
//! starts from +0 and, rounding to nearest, a sum is −0 only when both terms are, so a
//! lane sum is never −0 and adding +0 leaves it unchanged: the same as the scalar form,
//! whose remainder lanes keep their sums.
//!
//! A form exists only with its instruction set's [`Isa`] token (see `kernels::isa`), so
//! safe code cannot run one on a CPU without it.

use super::tree;
use crate::kernels::isa::{Isa, Level};

/// An instruction set's form of the 16-lane dot product.
pub(super) trait Wide: Copy {
    /// w·x with 16 lanes and no flush, as [`tree::dot`] computes it.
    fn dot16(self, x: &[f32], w: &[f32]) -> f32;
}

/// The scalar form: [`tree::dot`] itself, vectorised by the compiler where it can.
#[derive(Clone, Copy)]
pub(super) struct Portable;

impl Wide for Portable {
    #[inline(always)]
    fn dot16(self, x: &[f32], w: &[f32]) -> f32 {
        tree::dot::<f32, false>(x, w, 16)
    }
}

/// The AVX-512 form, made only from an AVX-512 token.
#[cfg(target_arch = "x86_64")]
#[derive(Clone, Copy)]
pub(super) struct Avx512(());

/// The AVX2 form, made only from a token of AVX2 or wider.
#[cfg(target_arch = "x86_64")]
#[derive(Clone, Copy)]
pub(super) struct Avx2(());

#[cfg(target_arch = "x86_64")]
impl Avx512 {
    /// The form, if `isa` is AVX-512.
    pub(super) fn new(isa: Isa) -> Option<Avx512> {
        (isa.level() == Level::Avx512).then_some(Avx512(()))
    }
}

#[cfg(target_arch = "x86_64")]
impl Avx2 {
    /// The form, if `isa` includes AVX2.
    pub(super) fn new(isa: Isa) -> Option<Avx2> {
        matches!(isa.level(), Level::Avx512 | Level::Avx2).then_some(Avx2(()))
    }
}

#[cfg(target_arch = "x86_64")]
impl Wide for Avx512 {
    #[inline(always)]
    fn dot16(self, x: &[f32], w: &[f32]) -> f32 {
        use std::arch::x86_64::*;
        let n = x.len().min(w.len());
        // SAFETY: the token proves AVX-512 F (module doc); every load reads within
        // `x[..n]` and `w[..n]` (full steps below `n`, the last one masked to `n`).
        unsafe {
            let (xp, wp) = (x.as_ptr(), w.as_ptr());
            let mut acc = _mm512_setzero_ps();
            let mut i = 0;
            while i + 16 <= n {
                let p = _mm512_mul_ps(_mm512_loadu_ps(xp.add(i)), _mm512_loadu_ps(wp.add(i)));
                acc = _mm512_add_ps(acc, p);
                i += 16;
            }
            if i < n {
                let m: __mmask16 = ((1u32 << (n - i)) - 1) as u16;
                let p = _mm512_mul_ps(
                    _mm512_maskz_loadu_ps(m, xp.add(i)),
                    _mm512_maskz_loadu_ps(m, wp.add(i)),
                );
                acc = _mm512_add_ps(acc, p);
            }
            // Each step adds a lane's right-hand neighbour at the step's distance, the
            // left operand first, as the scalar tree does.
            let a = _mm512_add_ps(acc, _mm512_permute_ps::<0b10_11_00_01>(acc));
            let a = _mm512_add_ps(a, _mm512_permute_ps::<0b01_00_11_10>(a));
            let a = _mm512_add_ps(a, _mm512_shuffle_f32x4::<0b10_11_00_01>(a, a));
            let a = _mm512_add_ps(a, _mm512_shuffle_f32x4::<0b01_00_11_10>(a, a));
            _mm512_cvtss_f32(a)
        }
    }
}

/// `-1` (all bits set) for the first 16 entries: a window from 16 − k gives the masks of
/// the first k of 16 lanes.
#[cfg(target_arch = "x86_64")]
static LANE_MASK: [i32; 32] = {
    let mut m = [0i32; 32];
    let mut i = 0;
    while i < 16 {
        m[i] = -1;
        i += 1;
    }
    m
};

#[cfg(target_arch = "x86_64")]
impl Wide for Avx2 {
    #[inline(always)]
    fn dot16(self, x: &[f32], w: &[f32]) -> f32 {
        use std::arch::x86_64::*;
        let n = x.len().min(w.len());
        // SAFETY: the token proves AVX2 (module doc); every load reads within `x[..n]`
        // and `w[..n]` (full steps below `n`, masked loads for the rest) or `LANE_MASK`.
        unsafe {
            let (xp, wp) = (x.as_ptr(), w.as_ptr());
            let (mut lo, mut hi) = (_mm256_setzero_ps(), _mm256_setzero_ps());
            let mut i = 0;
            while i + 16 <= n {
                let pl = _mm256_mul_ps(_mm256_loadu_ps(xp.add(i)), _mm256_loadu_ps(wp.add(i)));
                let ph = _mm256_mul_ps(
                    _mm256_loadu_ps(xp.add(i + 8)),
                    _mm256_loadu_ps(wp.add(i + 8)),
                );
                lo = _mm256_add_ps(lo, pl);
                hi = _mm256_add_ps(hi, ph);
                i += 16;
            }
            if i < n {
                let mp = LANE_MASK.as_ptr().add(16 - (n - i));
                let (ml, mh) = (
                    _mm256_loadu_si256(mp.cast()),
                    _mm256_loadu_si256(mp.add(8).cast()),
                );
                let pl = _mm256_mul_ps(
                    _mm256_maskload_ps(xp.add(i), ml),
                    _mm256_maskload_ps(wp.add(i), ml),
                );
                let ph = _mm256_mul_ps(
                    _mm256_maskload_ps(xp.add(i + 8), mh),
                    _mm256_maskload_ps(wp.add(i + 8), mh),
                );
                lo = _mm256_add_ps(lo, pl);
                hi = _mm256_add_ps(hi, ph);
            }
            let half = |v: __m256| {
                let v = _mm256_add_ps(v, _mm256_permute_ps::<0b10_11_00_01>(v));
                let v = _mm256_add_ps(v, _mm256_permute_ps::<0b01_00_11_10>(v));
                let v = _mm256_add_ps(v, _mm256_permute2f128_ps::<1>(v, v));
                _mm256_cvtss_f32(v)
            };
            half(lo) + half(hi)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// A form as a plain function of (x, w).
    type Form = Box<dyn Fn(&[f32], &[f32]) -> f32>;

    /// Every form this CPU has.
    fn forms() -> Vec<Form> {
        let isa = Isa::detect();
        let mut v: Vec<Form> = vec![Box::new(|x, w| Portable.dot16(x, w))];
        #[cfg(target_arch = "x86_64")]
        {
            if let Some(f) = Avx512::new(isa) {
                v.push(Box::new(move |x, w| f.dot16(x, w)));
            }
            if let Some(f) = Avx2::new(isa) {
                v.push(Box::new(move |x, w| f.dot16(x, w)));
            }
        }
        v
    }

    proptest! {
        /// Every form equals the scalar tree bit for bit, at every row length around the
        /// lane count, with values spanning many binades (so the order matters).
        #[test]
        fn forms_equal_the_scalar_tree(
            x in prop::collection::vec(-1e6f32..1e6, 0..80),
            w in prop::collection::vec(-1e3f32..1e3, 80),
            exp in prop::collection::vec(-20i32..20, 80),
        ) {
            let w: Vec<f32> = w.iter().zip(&exp).map(|(v, &e)| v * 2f32.powi(e)).collect();
            let want = tree::dot::<f32, false>(&x, &w[..x.len()], 16);
            for f in forms() {
                prop_assert_eq!(f(&x, &w[..x.len()]).to_bits(), want.to_bits());
            }
        }
    }

    #[test]
    fn negative_zero_products_sum_like_the_scalar_tree() {
        // −0 products: (+0) + (−0) = +0 in every lane (IEEE 754 §6.3, round to nearest).
        let x = [-0.0f32; 5];
        let w = [1.0f32; 5];
        for f in forms() {
            assert_eq!(f(&x, &w).to_bits(), 0.0f32.to_bits());
        }
    }
}
