//! AVX-512 leaf tests: compares straight into mask registers (`vpcmp*` / `vcmpp*`), one
//! 64-row mask word from 1 to 8 vector compares. Only compiled for x86-64 and only called
//! with an AVX-512 `Isa`, which run-time detection alone creates.
//!
//! Predicate semantics are those of the portable loops: integer `between` is one unsigned
//! compare of `x - lo` against `hi - lo`; float compares are *ordered* (false on NaN)
//! except `!=`, which is *unordered* (true on NaN), as IEEE 754 prescribes.

#![cfg(target_arch = "x86_64")]

use std::arch::x86_64::*;

use super::mask::Words;
use super::stream::{
    visit_cmp, VectorLane, EQ, F_EQ, F_GE, F_GT, F_LE, F_LT, F_NE, GE, GT, LE, LT, NE,
};
use crate::kernels::predicate::{CmpOp, Test};

/// The AVX-512 path, as a [`VectorLane`] marker.
pub struct Avx512;

macro_rules! int_lane {
    ($t:ty, $lanes:expr, $set1:ident, $as:ty, $cmp:ident, $cmpu:ident, $sub:ident) => {
        impl VectorLane<Avx512> for $t {
            const LANES: usize = $lanes;
            #[inline(always)]
            unsafe fn cmp_mask<const IMM: i32>(p: *const Self, c: Self) -> u64 {
                // SAFETY: the caller guarantees 64 readable bytes at `p` (unaligned loads
                // are allowed) and AVX-512 F+BW.
                unsafe {
                    let v = _mm512_loadu_si512(p as *const _);
                    u64::from($cmp::<IMM>(v, $set1(c as $as)))
                }
            }
            #[inline(always)]
            unsafe fn between_mask(p: *const Self, lo: Self, hi: Self) -> u64 {
                // SAFETY: as in `cmp_mask`.
                unsafe {
                    let v = _mm512_loadu_si512(p as *const _);
                    let d = $sub(v, $set1(lo as $as));
                    let span = $set1(hi.wrapping_sub(lo) as $as);
                    u64::from($cmpu::<LE>(d, span)) * u64::from(lo <= hi)
                }
            }
            visit_cmp!(Avx512; EQ, LT, LE, NE, GE, GT);
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
        impl VectorLane<Avx512> for $t {
            const LANES: usize = $lanes;
            #[inline(always)]
            unsafe fn cmp_mask<const IMM: i32>(p: *const Self, c: Self) -> u64 {
                // SAFETY: the caller guarantees 64 readable bytes at `p` and AVX-512 F.
                unsafe { u64::from($cmp::<IMM>($load(p), $set1(c))) }
            }
            #[inline(always)]
            unsafe fn between_mask(p: *const Self, lo: Self, hi: Self) -> u64 {
                // SAFETY: as in `cmp_mask`.
                unsafe {
                    let v = $load(p);
                    u64::from($cmp::<F_GE>(v, $set1(lo)) & $cmp::<F_LE>(v, $set1(hi)))
                }
            }
            visit_cmp!(Avx512; F_EQ, F_LT, F_LE, F_NE, F_GE, F_GT);
        }
    };
}

float_lane!(f32, 16, _mm512_set1_ps, _mm512_loadu_ps, _mm512_cmp_ps_mask);
float_lane!(f64, 8, _mm512_set1_pd, _mm512_loadu_pd, _mm512_cmp_pd_mask);

/// Visits `test` on the whole 64-row words of `xs` (see [`visit`]); returns the rows done.
///
/// # Safety
/// The CPU must support every feature enabled below (an AVX-512 `Isa` proves it).
#[target_feature(enable = "avx512f,avx512bw,avx512vl,bmi1,bmi2,popcnt")]
pub unsafe fn leaf<T: VectorLane<Avx512>, S: Words>(xs: &[T], test: &Test, sink: &mut S) -> usize {
    // SAFETY: the caller guarantees the features.
    unsafe { super::stream::leaf::<Avx512, T, S>(xs, test, sink) }
}
