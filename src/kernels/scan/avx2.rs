//! AVX2 leaf tests: vector compares whose lane results are gathered into bits by
//! `vpmovmskb` / `vmovmskps` / `vmovmskpd`, one 64-row mask word from 2 to 16 compares.
//! Only compiled for x86-64 and only called with an AVX2 `Isa`, which run-time detection
//! alone creates.
//!
//! AVX2 compares integers only for equality and signed `>`; every other predicate is
//! built from those (`x <= c` is `!(x > c)`), and unsigned lanes compare signed after
//! flipping their top bit on both sides, which maps unsigned order onto signed order
//! (common practice). Semantics are those of the portable loops: integer `between` is one
//! unsigned compare of `x - lo` against `hi - lo`; float compares are *ordered* (false on
//! NaN) except `!=`, which is *unordered* (true on NaN), as IEEE 754 prescribes.

#![cfg(target_arch = "x86_64")]

use std::arch::x86_64::*;

use super::mask::Words;
use super::stream::{
    visit_cmp, VectorLane, EQ, F_EQ, F_GE, F_GT, F_LE, F_LT, F_NE, GE, GT, LE, LT, NE,
};
use crate::kernels::predicate::{CmpOp, Test};

/// The AVX2 path, as a [`VectorLane`] marker.
pub struct Avx2;

/// All ones where `m` is zero and the reverse.
///
/// # Safety
/// The CPU must support AVX2.
#[inline(always)]
unsafe fn not(m: __m256i) -> __m256i {
    // SAFETY: the caller guarantees AVX2.
    unsafe { _mm256_xor_si256(m, _mm256_set1_epi32(-1)) }
}

/// `v <op> c` lane by lane from signed `>` and `==` (`IMM` an integer predicate).
///
/// # Safety
/// The CPU must support AVX2.
#[inline(always)]
unsafe fn int_cmp<const IMM: i32>(
    gt: impl Fn(__m256i, __m256i) -> __m256i,
    eq: impl Fn(__m256i, __m256i) -> __m256i,
    v: __m256i,
    c: __m256i,
) -> __m256i {
    // SAFETY: the caller guarantees AVX2.
    unsafe {
        match IMM {
            EQ => eq(v, c),
            NE => not(eq(v, c)),
            LT => gt(c, v),
            LE => not(gt(v, c)),
            GE => not(gt(c, v)),
            GT => gt(v, c),
            _ => unreachable!("integer compare predicate {IMM}"),
        }
    }
}

// Bits of `f` over the vector(s) at `p`, one bit per lane of `f`'s all-ones-or-zero result.
// Callers guarantee 32 (64 for 16-bit lanes) readable bytes at `p` and AVX2.

/// 8-bit lanes: 32 rows.
#[inline(always)]
unsafe fn bits8<T>(p: *const T, f: impl Fn(__m256i) -> __m256i) -> u64 {
    // SAFETY: see above.
    unsafe { u64::from(_mm256_movemask_epi8(f(_mm256_loadu_si256(p.cast()))) as u32) }
}

/// 16-bit lanes: 32 rows from two vectors, their results packed to bytes in row order.
#[inline(always)]
unsafe fn bits16<T>(p: *const T, f: impl Fn(__m256i) -> __m256i) -> u64 {
    // SAFETY: see above.
    unsafe {
        let a = f(_mm256_loadu_si256(p.cast()));
        let b = f(_mm256_loadu_si256(p.cast::<u8>().add(32).cast()));
        // `packs` interleaves the halves of a and b per 128-bit lane; the permute puts the
        // 64-bit groups back in row order.
        let bytes = _mm256_permute4x64_epi64::<0xd8>(_mm256_packs_epi16(a, b));
        u64::from(_mm256_movemask_epi8(bytes) as u32)
    }
}

/// 32-bit lanes: 8 rows.
#[inline(always)]
unsafe fn bits32<T>(p: *const T, f: impl Fn(__m256i) -> __m256i) -> u64 {
    // SAFETY: see above.
    unsafe {
        let m = f(_mm256_loadu_si256(p.cast()));
        u64::from(_mm256_movemask_ps(_mm256_castsi256_ps(m)) as u32)
    }
}

/// 64-bit lanes: 4 rows.
#[inline(always)]
unsafe fn bits64<T>(p: *const T, f: impl Fn(__m256i) -> __m256i) -> u64 {
    // SAFETY: see above.
    unsafe {
        let m = f(_mm256_loadu_si256(p.cast()));
        u64::from(_mm256_movemask_pd(_mm256_castsi256_pd(m)) as u32)
    }
}

macro_rules! int_lane {
    ($t:ty, $lanes:expr, $as:ty, $top:expr, $signed:expr, $set1:ident, $eq:ident, $gt:ident, $sub:ident, $bits:ident) => {
        impl VectorLane<Avx2> for $t {
            const LANES: usize = $lanes;
            #[inline(always)]
            unsafe fn cmp_mask<const IMM: i32>(p: *const Self, c: Self) -> u64 {
                // Unsigned lanes flip their top bit to compare signed.
                let flip: $as = if $signed { 0 } else { $top };
                // SAFETY: the caller guarantees the bytes at `p` and AVX2.
                unsafe {
                    let (flip, c) = ($set1(flip), $set1((c as $as) ^ flip));
                    $bits(p, |v| {
                        let v = _mm256_xor_si256(v, flip);
                        int_cmp::<IMM>(|a, b| $gt(a, b), |a, b| $eq(a, b), v, c)
                    })
                }
            }
            #[inline(always)]
            unsafe fn between_mask(p: *const Self, lo: Self, hi: Self) -> u64 {
                // `x - lo <= hi - lo`, unsigned, for signed and unsigned lanes alike.
                // SAFETY: as in `cmp_mask`.
                unsafe {
                    let top = $set1($top);
                    let low = $set1(lo as $as);
                    let span = $set1((hi.wrapping_sub(lo) as $as) ^ $top);
                    let m = $bits(p, |v| {
                        let d = _mm256_xor_si256($sub(v, low), top);
                        not($gt(d, span))
                    });
                    m * u64::from(lo <= hi)
                }
            }
            visit_cmp!(Avx2; EQ, LT, LE, NE, GE, GT);
        }
    };
}

/// The unsigned and the signed lane type of one width: the same compares, the unsigned
/// one flipping its top bit first.
macro_rules! int_lanes {
    ($u:ty, $i:ty, $lanes:expr, $set1:ident, $eq:ident, $gt:ident, $sub:ident, $bits:ident) => {
        int_lane!(
            $u,
            $lanes,
            $i,
            <$i>::MIN,
            false,
            $set1,
            $eq,
            $gt,
            $sub,
            $bits
        );
        int_lane!(
            $i,
            $lanes,
            $i,
            <$i>::MIN,
            true,
            $set1,
            $eq,
            $gt,
            $sub,
            $bits
        );
    };
}

int_lanes!(
    u8,
    i8,
    32,
    _mm256_set1_epi8,
    _mm256_cmpeq_epi8,
    _mm256_cmpgt_epi8,
    _mm256_sub_epi8,
    bits8
);
int_lanes!(
    u16,
    i16,
    32,
    _mm256_set1_epi16,
    _mm256_cmpeq_epi16,
    _mm256_cmpgt_epi16,
    _mm256_sub_epi16,
    bits16
);
int_lanes!(
    u32,
    i32,
    8,
    _mm256_set1_epi32,
    _mm256_cmpeq_epi32,
    _mm256_cmpgt_epi32,
    _mm256_sub_epi32,
    bits32
);
int_lanes!(
    u64,
    i64,
    4,
    _mm256_set1_epi64x,
    _mm256_cmpeq_epi64,
    _mm256_cmpgt_epi64,
    _mm256_sub_epi64,
    bits64
);

macro_rules! float_lane {
    ($t:ty, $lanes:expr, $set1:ident, $from:ident, $to:ident, $cmp:ident, $and:ident, $bits:ident) => {
        impl VectorLane<Avx2> for $t {
            const LANES: usize = $lanes;
            #[inline(always)]
            unsafe fn cmp_mask<const IMM: i32>(p: *const Self, c: Self) -> u64 {
                // SAFETY: the caller guarantees the bytes at `p` and AVX2.
                unsafe {
                    let c = $set1(c);
                    $bits(p, |v| $to($cmp::<IMM>($from(v), c)))
                }
            }
            #[inline(always)]
            unsafe fn between_mask(p: *const Self, lo: Self, hi: Self) -> u64 {
                // SAFETY: as in `cmp_mask`.
                unsafe {
                    let (lo, hi) = ($set1(lo), $set1(hi));
                    $bits(p, |v| {
                        let x = $from(v);
                        $to($and($cmp::<F_GE>(x, lo), $cmp::<F_LE>(x, hi)))
                    })
                }
            }
            visit_cmp!(Avx2; F_EQ, F_LT, F_LE, F_NE, F_GE, F_GT);
        }
    };
}

float_lane!(
    f32,
    8,
    _mm256_set1_ps,
    _mm256_castsi256_ps,
    _mm256_castps_si256,
    _mm256_cmp_ps,
    _mm256_and_ps,
    bits32
);
float_lane!(
    f64,
    4,
    _mm256_set1_pd,
    _mm256_castsi256_pd,
    _mm256_castpd_si256,
    _mm256_cmp_pd,
    _mm256_and_pd,
    bits64
);

/// Visits `test` on the whole 64-row words of `xs` (see `stream::visit`); returns the
/// rows done.
///
/// # Safety
/// The CPU must support every feature enabled below (an AVX2 `Isa` proves it).
#[target_feature(enable = "avx2,bmi1,bmi2,popcnt")]
pub unsafe fn leaf<T: VectorLane<Avx2>, S: Words>(xs: &[T], test: &Test, sink: &mut S) -> usize {
    // SAFETY: the caller guarantees the features.
    unsafe { super::stream::leaf::<Avx2, T, S>(xs, test, sink) }
}
