//! AVX-512 leaf tests: compares straight into mask registers (`vpcmp*` / `vcmpp*`), one
//! 64-row mask word from 1 to 8 vector compares. Only compiled for x86-64 and only called
//! with an AVX-512 `Isa`, which run-time detection alone creates.
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
    /// Visits whole 64-row words of `xs` under `x <op> c` (see [`visit`]); returns the
    /// rows done.
    ///
    /// # Safety
    /// As for [`Avx512Lane::cmp_mask`].
    unsafe fn visit_cmp<S: FnMut(usize, usize, u64)>(
        xs: &[Self],
        op: CmpOp,
        c: Self,
        sink: &mut S,
    ) -> usize;
}

/// The `visit_cmp` method for the given compare predicates of `= < <= != >= >`: each
/// predicate is an immediate of the compare instruction, so dispatch happens once per call.
macro_rules! visit_cmp {
    ($eq:ident, $lt:ident, $le:ident, $ne:ident, $ge:ident, $gt:ident) => {
        #[inline(always)]
        unsafe fn visit_cmp<S: FnMut(usize, usize, u64)>(
            xs: &[Self],
            op: CmpOp,
            c: Self,
            sink: &mut S,
        ) -> usize {
            // SAFETY (every arm): `visit` hands each closure a pointer to a whole
            // vector of `xs`, and the caller guarantees the CPU features.
            unsafe {
                match op {
                    CmpOp::Eq => visit(xs, |p| Self::cmp_mask::<$eq>(p, c), sink),
                    CmpOp::Lt => visit(xs, |p| Self::cmp_mask::<$lt>(p, c), sink),
                    CmpOp::Le => visit(xs, |p| Self::cmp_mask::<$le>(p, c), sink),
                    CmpOp::Ne => visit(xs, |p| Self::cmp_mask::<$ne>(p, c), sink),
                    CmpOp::Ge => visit(xs, |p| Self::cmp_mask::<$ge>(p, c), sink),
                    CmpOp::Gt => visit(xs, |p| Self::cmp_mask::<$gt>(p, c), sink),
                }
            }
        }
    };
}

macro_rules! int_lane {
    ($t:ty, $lanes:expr, $set1:ident, $as:ty, $cmp:ident, $cmpu:ident, $sub:ident) => {
        impl Avx512Lane for $t {
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
            visit_cmp!(EQ, LT, LE, NE, GE, GT);
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
            visit_cmp!(F_EQ, F_LT, F_LE, F_NE, F_GE, F_GT);
        }
    };
}

float_lane!(f32, 16, _mm512_set1_ps, _mm512_loadu_ps, _mm512_cmp_ps_mask);
float_lane!(f64, 8, _mm512_set1_pd, _mm512_loadu_pd, _mm512_cmp_pd_mask);

/// One 64-row mask word from `64 / LANES` vector compares.
///
/// # Safety
/// `p` must point to 64 readable values; `f` must be sound on each vector of them.
#[inline(always)]
unsafe fn word<T: Avx512Lane>(p: *const T, f: &impl Fn(*const T) -> u64) -> u64 {
    let mut w = 0u64;
    let mut k = 0;
    while k < 64 {
        // SAFETY: `k < 64`, so `p + k` stays within the 64 values the caller vouches for.
        w |= f(unsafe { p.add(k) }) << k;
        k += T::LANES;
    }
    w
}

/// Interleaved runs a visit walks at once: a core then keeps several sequential memory
/// streams in flight, which is what reaches the bandwidth a plain read loop measures
/// (one stream reached about two thirds of it on the host measured).
pub const STREAMS: usize = 4;
/// How far ahead of each run to prefetch, in bytes: a few cache lines, so lines arrive as
/// a run crosses 4 KiB pages, where hardware prefetchers stop.
const PREFETCH_BYTES: usize = 2048;

/// Calls `sink(bucket, i, mask)` for every whole 64-row word i of `xs` under `f`; returns
/// the rows done (a multiple of 64; the caller finishes the tail). The words are cut into
/// [`STREAMS`] equal runs walked in step (buckets `0..STREAMS`), then the remainder
/// (bucket `STREAMS`); within a bucket words ascend, and the buckets in order cover the
/// words in order, so a sink that keeps one output per bucket can join them in row order.
///
/// # Safety
/// `f` must be sound on a pointer to any whole vector of `xs` (it is only given those).
#[inline(always)]
unsafe fn visit<T: Avx512Lane, S: FnMut(usize, usize, u64)>(
    xs: &[T],
    f: impl Fn(*const T) -> u64,
    sink: &mut S,
) -> usize {
    let blocks = xs.len() / 64;
    let p = xs.as_ptr();
    let word_bytes = 64 * std::mem::size_of::<T>();
    let q = blocks / STREAMS;
    for b in 0..q {
        for k in 0..STREAMS {
            let i = k * q + b;
            // SAFETY: `i < blocks`, so rows `64i..64i+64` are inside `xs`.
            let at = unsafe { p.add(i * 64) };
            let ahead = (at as *const u8).wrapping_add(PREFETCH_BYTES);
            let mut line = 0;
            while PREFETCH_BYTES > 0 && line < word_bytes {
                // SAFETY: a prefetch never faults, whatever the address (SSE is part of
                // the x86-64 baseline).
                unsafe { _mm_prefetch::<_MM_HINT_T0>(ahead.wrapping_add(line) as *const i8) };
                line += 64;
            }
            // SAFETY: `at` starts 64 rows inside `xs`; `f` is sound on them (caller).
            sink(k, i, unsafe { word(at, &f) });
        }
    }
    for i in q * STREAMS..blocks {
        // SAFETY: as above, `i < blocks`.
        sink(STREAMS, i, unsafe { word(p.add(i * 64), &f) });
    }
    blocks * 64
}

/// Visits `test` on the whole 64-row words of `xs` (see [`visit`]); returns the rows done.
///
/// # Safety
/// The CPU must support every feature enabled below (an AVX-512 `Isa` proves it).
#[target_feature(enable = "avx512f,avx512bw,avx512vl,bmi1,bmi2,popcnt")]
pub unsafe fn leaf<T: Avx512Lane, S: FnMut(usize, usize, u64)>(
    xs: &[T],
    test: &Test,
    sink: &mut S,
) -> usize {
    // SAFETY (whole body): the caller guarantees the features; `visit` gives the mask
    // closures only pointers to whole vectors of `xs`.
    unsafe {
        match test {
            Test::Cmp(op, s) => T::visit_cmp(xs, *op, T::from_scalar(s), sink),
            Test::Between(lo, hi) => {
                let (lo, hi) = (T::from_scalar(lo), T::from_scalar(hi));
                visit(xs, |p| T::between_mask(p, lo, hi), sink)
            }
            Test::In(list) => {
                let list: Vec<T> = list.iter().map(T::from_scalar).collect();
                // Equality is predicate 0 for both integer and float compares.
                visit(
                    xs,
                    |p| list.iter().fold(0, |m, &c| m | T::cmp_mask::<EQ>(p, c)),
                    sink,
                )
            }
        }
    }
}
