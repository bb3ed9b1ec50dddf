//! The streaming walk both vector leaf paths (AVX-512, AVX2) share: 64-row mask words
//! built from a few vector compares each, over several interleaved runs with software
//! prefetch, handed to a sink as they are made, so matches are used while the next data
//! is in flight.
//!
//! Invariant: within a bucket the words ascend, and buckets `0..=STREAMS` in order cover
//! the words in order, so a sink that keeps one output per bucket can join them in row
//! order.

#![cfg(target_arch = "x86_64")]

use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};

use super::mask::{Lane, Words};
use crate::kernels::predicate::{CmpOp, Test};

// Compare predicates, as immediates. Integer ones are AVX-512's `_MM_CMPINT_*`, which
// the AVX2 path decodes itself; float ones are the `_CMP_*_OQ` / `_CMP_NEQ_UQ` of both
// paths' float compares. Equality is 0 in both sets.
/// `=` (integer, and float ordered).
pub const EQ: i32 = 0;
/// `<` (integer).
pub const LT: i32 = 1;
/// `<=` (integer).
pub const LE: i32 = 2;
/// `!=` (integer).
pub const NE: i32 = 4;
/// `>=` (integer).
pub const GE: i32 = 5;
/// `>` (integer).
pub const GT: i32 = 6;
/// `=`, ordered (float).
pub const F_EQ: i32 = 0x00;
/// `!=`, unordered: true on NaN (float).
pub const F_NE: i32 = 0x04;
/// `<`, ordered (float).
pub const F_LT: i32 = 0x11;
/// `<=`, ordered (float).
pub const F_LE: i32 = 0x12;
/// `>=`, ordered (float).
pub const F_GE: i32 = 0x1d;
/// `>`, ordered (float).
pub const F_GT: i32 = 0x1e;

/// A lane type's vector compares on one instruction set (`I`, a marker type).
pub trait VectorLane<I>: Lane {
    /// Rows one mask call covers (it divides 64).
    const LANES: usize;
    /// The bits of `x <op> c` over `LANES` values at `p` (`IMM` the path's predicate).
    ///
    /// # Safety
    /// `p` must point to `LANES` readable values and the CPU must support the path's
    /// instruction set.
    unsafe fn cmp_mask<const IMM: i32>(p: *const Self, c: Self) -> u64;
    /// The bits of `lo <= x <= hi`.
    ///
    /// # Safety
    /// As for [`VectorLane::cmp_mask`].
    unsafe fn between_mask(p: *const Self, lo: Self, hi: Self) -> u64;
    /// Visits whole 64-row words of `xs` under `x <op> c` (see [`visit`]); returns the
    /// rows done.
    ///
    /// # Safety
    /// As for [`VectorLane::cmp_mask`].
    unsafe fn visit_cmp<S: Words>(xs: &[Self], op: CmpOp, c: Self, sink: &mut S) -> usize;
}

/// The `visit_cmp` method of a [`VectorLane`] impl for path `$isa`, given its compare
/// predicates of `= < <= != >= >`: each is an immediate of the compare, so dispatch
/// happens once per call.
macro_rules! visit_cmp {
    ($isa:ty; $eq:ident, $lt:ident, $le:ident, $ne:ident, $ge:ident, $gt:ident) => {
        #[inline(always)]
        unsafe fn visit_cmp<S: Words>(xs: &[Self], op: CmpOp, c: Self, sink: &mut S) -> usize {
            use $crate::kernels::scan::stream::{visit, VectorLane};
            let lanes = <Self as VectorLane<$isa>>::LANES;
            // SAFETY (every arm): `visit` hands each closure a pointer to a whole
            // vector of `xs`, and the caller guarantees the CPU features.
            unsafe {
                match op {
                    CmpOp::Eq => visit(
                        xs,
                        lanes,
                        |p| <Self as VectorLane<$isa>>::cmp_mask::<$eq>(p, c),
                        sink,
                    ),
                    CmpOp::Lt => visit(
                        xs,
                        lanes,
                        |p| <Self as VectorLane<$isa>>::cmp_mask::<$lt>(p, c),
                        sink,
                    ),
                    CmpOp::Le => visit(
                        xs,
                        lanes,
                        |p| <Self as VectorLane<$isa>>::cmp_mask::<$le>(p, c),
                        sink,
                    ),
                    CmpOp::Ne => visit(
                        xs,
                        lanes,
                        |p| <Self as VectorLane<$isa>>::cmp_mask::<$ne>(p, c),
                        sink,
                    ),
                    CmpOp::Ge => visit(
                        xs,
                        lanes,
                        |p| <Self as VectorLane<$isa>>::cmp_mask::<$ge>(p, c),
                        sink,
                    ),
                    CmpOp::Gt => visit(
                        xs,
                        lanes,
                        |p| <Self as VectorLane<$isa>>::cmp_mask::<$gt>(p, c),
                        sink,
                    ),
                }
            }
        }
    };
}
pub(super) use visit_cmp;

/// Visits `test` on the whole 64-row words of `xs` with path `I`'s compares (see
/// [`visit`]); returns the rows done. Each path calls it from a function that enables its
/// instruction set, so the compares inline there.
///
/// # Safety
/// The CPU must support path `I`'s instruction set.
#[inline(always)]
pub unsafe fn leaf<I, T: VectorLane<I>, S: Words>(xs: &[T], test: &Test, sink: &mut S) -> usize {
    let lanes = <T as VectorLane<I>>::LANES;
    // SAFETY (whole body): the caller guarantees the features; `visit` gives the mask
    // closures only pointers to whole vectors of `xs`.
    unsafe {
        match test {
            Test::Cmp(op, s) => T::visit_cmp(xs, *op, T::from_scalar(s), sink),
            Test::Between(lo, hi) => {
                let (lo, hi) = (T::from_scalar(lo), T::from_scalar(hi));
                visit(xs, lanes, |p| T::between_mask(p, lo, hi), sink)
            }
            Test::In(list) => {
                let list: Vec<T> = list.iter().map(T::from_scalar).collect();
                let any = |p| list.iter().fold(0, |m, &c| m | T::cmp_mask::<EQ>(p, c));
                visit(xs, lanes, any, sink)
            }
        }
    }
}

/// Interleaved runs a visit walks at once: a core then keeps several sequential memory
/// streams in flight, which is what reaches the bandwidth a plain read loop measures
/// (one stream reached about two thirds of it on the host measured).
pub const STREAMS: usize = 4;
/// How far ahead of each run to prefetch, in bytes: a few cache lines, so lines arrive as
/// a run crosses 4 KiB pages, where hardware prefetchers stop.
const PREFETCH_BYTES: usize = 2048;

/// One 64-row mask word from `64 / lanes` calls of `f`, each giving the bits of `lanes`
/// rows (`lanes` divides 64; a constant at every call, so the loop unrolls).
///
/// # Safety
/// `p` must point to 64 readable values; `f` must be sound on each run of `lanes` of them.
#[inline(always)]
unsafe fn word<T>(p: *const T, lanes: usize, f: &impl Fn(*const T) -> u64) -> u64 {
    let mut w = 0u64;
    let mut k = 0;
    while k < 64 {
        // SAFETY: `k < 64`, so `p + k` stays within the 64 values the caller vouches for.
        w |= f(unsafe { p.add(k) }) << k;
        k += lanes;
    }
    w
}

/// Calls `sink(bucket, i, mask)` for every whole 64-row word i of `xs` under `f` (the
/// bits of `lanes` rows from a pointer, see [`word`]); returns the rows done (a multiple
/// of 64; the caller finishes the tail). The words are cut into [`STREAMS`] equal runs
/// walked in step (buckets `0..STREAMS`), then the remainder (bucket `STREAMS`).
///
/// # Safety
/// `f` must be sound on a pointer to any run of `lanes` values of `xs` that starts at a
/// multiple of `lanes` (it is only given those).
#[inline(always)]
pub unsafe fn visit<T, S: Words>(
    xs: &[T],
    lanes: usize,
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
            while line < word_bytes {
                // SAFETY: a prefetch never faults, whatever the address (SSE is part of
                // the x86-64 baseline).
                unsafe { _mm_prefetch::<_MM_HINT_T0>(ahead.wrapping_add(line) as *const i8) };
                line += 64;
            }
            // SAFETY: `at` starts 64 rows inside `xs`; `f` is sound on them (caller).
            sink.word(k, i, unsafe { word(at, lanes, &f) });
        }
    }
    for i in q * STREAMS..blocks {
        // SAFETY: as above, `i < blocks`.
        sink.word(STREAMS, i, unsafe { word(p.add(i * 64), lanes, &f) });
    }
    blocks * 64
}
