//! AVX-512 leaf tests: compares straight into mask registers (`vpcmp*` / `vcmpp*`), one
//! 64-row mask word from 1 to 8 vector compares. Only compiled for x86-64 and only called
//! after run-time detection of AVX-512 F and BW.
//!
//! Predicate semantics are those of the portable loops: integer `between` is one unsigned
//! compare of `x - lo` against `hi - lo`; float compares are *ordered* (false on NaN)
//! except `!=`, which is *unordered* (true on NaN), as IEEE 754 prescribes.

#![cfg(target_arch = "x86_64")]

use std::arch::x86_64::*;

use super::mask::Lane;
use crate::kernels::predicate::{CmpOp, Test};

// Integer compare predicates (_MM_CMPINT_*) and float ones (_CMP_*_OQ / _CMP_NEQ_UQ).
const EQ: i32 = 0;
const LT: i32 = 1;
const LE: i32 = 2;
const NE: i32 = 4;
const GE: i32 = 5;
const GT: i32 = 6;
const F_EQ: i32 = 0x00;
const F_NE: i32 = 0x04;
const F_LT: i32 = 0x11;
const F_LE: i32 = 0x12;
const F_GE: i32 = 0x1d;
const F_GT: i32 = 0x1e;

/// A type with an AVX-512 mask compare.
pub trait Avx512Lane: Lane {
    /// Lanes per 512-bit vector.
    const LANES: usize;
    /// Mask of `x <op> c` over `LANES` values at `p` (`IMM` an integer or float predicate).
    ///
    /// # Safety
    /// `p` must point to `LANES` readable values and the CPU must support AVX-512 F+BW.
    unsafe fn cmp_mask<const IMM: i32>(p: *const Self, c: Self) -> u64;
    /// Mask of `lo <= x <= hi`.
    ///
    /// # Safety
    /// As for [`Avx512Lane::cmp_mask`].
    unsafe fn between_mask(p: *const Self, lo: Self, hi: Self) -> u64;
    /// Fills whole 64-row words of `out` with `x <op> c`; returns the rows done.
    ///
    /// # Safety
    /// As for [`Avx512Lane::cmp_mask`].
    unsafe fn fill_cmp(xs: &[Self], out: &mut [u64], op: CmpOp, c: Self) -> usize;
}

macro_rules! int_lane {
    ($t:ty, $lanes:expr, $set1:ident, $as:ty, $cmp:ident, $cmpu:ident, $sub:ident) => {
        impl Avx512Lane for $t {
            const LANES: usize = $lanes;
            #[inline(always)]
            unsafe fn cmp_mask<const IMM: i32>(p: *const Self, c: Self) -> u64 {
                let v = _mm512_loadu_si512(p as *const _);
                u64::from($cmp::<IMM>(v, $set1(c as $as)))
            }
            #[inline(always)]
            unsafe fn between_mask(p: *const Self, lo: Self, hi: Self) -> u64 {
                let v = _mm512_loadu_si512(p as *const _);
                let d = $sub(v, $set1(lo as $as));
                let span = $set1(hi.wrapping_sub(lo) as $as);
                u64::from($cmpu::<LE>(d, span)) * u64::from(lo <= hi)
            }
            #[inline(always)]
            unsafe fn fill_cmp(xs: &[Self], out: &mut [u64], op: CmpOp, c: Self) -> usize {
                // The predicate is an immediate of the instruction: dispatch once per call.
                match op {
                    CmpOp::Eq => fill(xs, out, |p| Self::cmp_mask::<EQ>(p, c)),
                    CmpOp::Lt => fill(xs, out, |p| Self::cmp_mask::<LT>(p, c)),
                    CmpOp::Le => fill(xs, out, |p| Self::cmp_mask::<LE>(p, c)),
                    CmpOp::Ne => fill(xs, out, |p| Self::cmp_mask::<NE>(p, c)),
                    CmpOp::Ge => fill(xs, out, |p| Self::cmp_mask::<GE>(p, c)),
                    CmpOp::Gt => fill(xs, out, |p| Self::cmp_mask::<GT>(p, c)),
                }
            }
        }
    };
}

int_lane!(
    u8,
    64,
    _mm512_set1_epi8,
    i8,
    _mm512_cmp_epu8_mask,
    _mm512_cmp_epu8_mask,
    _mm512_sub_epi8
);
int_lane!(
    u16,
    32,
    _mm512_set1_epi16,
    i16,
    _mm512_cmp_epu16_mask,
    _mm512_cmp_epu16_mask,
    _mm512_sub_epi16
);
int_lane!(
    u32,
    16,
    _mm512_set1_epi32,
    i32,
    _mm512_cmp_epu32_mask,
    _mm512_cmp_epu32_mask,
    _mm512_sub_epi32
);
int_lane!(
    u64,
    8,
    _mm512_set1_epi64,
    i64,
    _mm512_cmp_epu64_mask,
    _mm512_cmp_epu64_mask,
    _mm512_sub_epi64
);
int_lane!(
    i8,
    64,
    _mm512_set1_epi8,
    i8,
    _mm512_cmp_epi8_mask,
    _mm512_cmp_epu8_mask,
    _mm512_sub_epi8
);
int_lane!(
    i16,
    32,
    _mm512_set1_epi16,
    i16,
    _mm512_cmp_epi16_mask,
    _mm512_cmp_epu16_mask,
    _mm512_sub_epi16
);
int_lane!(
    i32,
    16,
    _mm512_set1_epi32,
    i32,
    _mm512_cmp_epi32_mask,
    _mm512_cmp_epu32_mask,
    _mm512_sub_epi32
);
int_lane!(
    i64,
    8,
    _mm512_set1_epi64,
    i64,
    _mm512_cmp_epi64_mask,
    _mm512_cmp_epu64_mask,
    _mm512_sub_epi64
);

macro_rules! float_lane {
    ($t:ty, $lanes:expr, $set1:ident, $load:ident, $cmp:ident) => {
        impl Avx512Lane for $t {
            const LANES: usize = $lanes;
            #[inline(always)]
            unsafe fn cmp_mask<const IMM: i32>(p: *const Self, c: Self) -> u64 {
                u64::from($cmp::<IMM>($load(p), $set1(c)))
            }
            #[inline(always)]
            unsafe fn between_mask(p: *const Self, lo: Self, hi: Self) -> u64 {
                let v = $load(p);
                u64::from($cmp::<F_GE>(v, $set1(lo)) & $cmp::<F_LE>(v, $set1(hi)))
            }
            #[inline(always)]
            unsafe fn fill_cmp(xs: &[Self], out: &mut [u64], op: CmpOp, c: Self) -> usize {
                match op {
                    CmpOp::Eq => fill(xs, out, |p| Self::cmp_mask::<F_EQ>(p, c)),
                    CmpOp::Lt => fill(xs, out, |p| Self::cmp_mask::<F_LT>(p, c)),
                    CmpOp::Le => fill(xs, out, |p| Self::cmp_mask::<F_LE>(p, c)),
                    CmpOp::Ne => fill(xs, out, |p| Self::cmp_mask::<F_NE>(p, c)),
                    CmpOp::Ge => fill(xs, out, |p| Self::cmp_mask::<F_GE>(p, c)),
                    CmpOp::Gt => fill(xs, out, |p| Self::cmp_mask::<F_GT>(p, c)),
                }
            }
        }
    };
}

float_lane!(f32, 16, _mm512_set1_ps, _mm512_loadu_ps, _mm512_cmp_ps_mask);
float_lane!(f64, 8, _mm512_set1_pd, _mm512_loadu_pd, _mm512_cmp_pd_mask);

/// One 64-row mask word from `64 / LANES` vector compares.
#[inline(always)]
unsafe fn word<T: Avx512Lane>(p: *const T, f: &impl Fn(*const T) -> u64) -> u64 {
    let mut w = 0u64;
    let mut k = 0;
    while k < 64 {
        w |= f(p.add(k)) << k;
        k += T::LANES;
    }
    w
}

/// Fills whole 64-row words of `out` from `xs` with `f`; returns the rows handled (a
/// multiple of 64; the caller finishes the tail with the portable loop).
#[inline(always)]
unsafe fn fill<T: Avx512Lane>(xs: &[T], out: &mut [u64], f: impl Fn(*const T) -> u64) -> usize {
    let blocks = xs.len() / 64;
    let p = xs.as_ptr();
    for (b, m) in out.iter_mut().enumerate().take(blocks) {
        *m = word(p.add(b * 64), &f);
    }
    blocks * 64
}

/// Evaluates `test` on the whole 64-row blocks of `xs`; returns the rows done.
///
/// # Safety
/// The CPU must support AVX-512 F and BW.
#[target_feature(enable = "avx512f,avx512bw,avx512vl,bmi1,bmi2,popcnt")]
pub unsafe fn leaf<T: Avx512Lane>(xs: &[T], test: &Test, out: &mut [u64]) -> usize {
    match test {
        Test::Cmp(op, s) => T::fill_cmp(xs, out, *op, T::from_scalar(s)),
        Test::Between(lo, hi) => {
            let (lo, hi) = (T::from_scalar(lo), T::from_scalar(hi));
            fill(xs, out, |p| T::between_mask(p, lo, hi))
        }
        Test::In(list) => {
            let blocks = xs.len() / 64;
            out[..blocks].iter_mut().for_each(|m| *m = 0);
            let p = xs.as_ptr();
            for s in list {
                let c = T::from_scalar(s);
                // Equality is predicate 0 for both integer and float compares.
                for (b, m) in out.iter_mut().enumerate().take(blocks) {
                    *m |= word(p.add(b * 64), &|q| T::cmp_mask::<EQ>(q, c));
                }
            }
            blocks * 64
        }
    }
}
