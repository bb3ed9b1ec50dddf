//! Predicate evaluation into bit masks: 64 rows → one `u64` (row i in bit i).
//!
//! Each leaf test runs as one tight, branch-free loop over a column chunk: explicit vector
//! compares on AVX-512 and AVX2 (`avx512`, `avx2`, both walked by `stream`), a loop the
//! compiler vectorises elsewhere; leaves combine with word-wide `and`/`or`/`not`. The
//! widest path the CPU supports is chosen at run time, so users never need
//! `target-cpu=native`.

use crate::kernels::predicate::{Bound, CmpOp, Scalar, Test};
use crate::table::Table;

#[cfg(target_arch = "x86_64")]
use super::{avx2, avx512, stream::VectorLane};
pub use crate::kernels::isa::Isa;
use crate::kernels::isa::Level;

/// A Rust element type the mask loops can compare, with the conversion of a bound scalar.
pub trait Lane: Copy + PartialOrd + Send + Sync {
    /// The scalar as this type (the binder guarantees it is in range).
    fn from_scalar(s: &Scalar) -> Self;
    /// `lo <= x <= hi` as one comparison where the type allows it.
    fn between(x: Self, lo: Self, hi: Self) -> bool;
}

macro_rules! lane_uint {
    ($($t:ty),*) => {$(
        impl Lane for $t {
            #[inline(always)]
            fn from_scalar(s: &Scalar) -> Self {
                match *s { Scalar::U(v) => v as $t, Scalar::I(v) => v as $t, Scalar::F(v) => v as $t }
            }
            #[inline(always)]
            fn between(x: Self, lo: Self, hi: Self) -> bool {
                // One unsigned compare: x - lo wraps above hi - lo when x < lo (common practice).
                lo <= hi && x.wrapping_sub(lo) <= hi.wrapping_sub(lo)
            }
        }
    )*};
}
macro_rules! lane_sint {
    ($($t:ty => $u:ty),*) => {$(
        impl Lane for $t {
            #[inline(always)]
            fn from_scalar(s: &Scalar) -> Self {
                match *s { Scalar::U(v) => v as $t, Scalar::I(v) => v as $t, Scalar::F(v) => v as $t }
            }
            #[inline(always)]
            fn between(x: Self, lo: Self, hi: Self) -> bool {
                lo <= hi && (x.wrapping_sub(lo) as $u) <= (hi.wrapping_sub(lo) as $u)
            }
        }
    )*};
}
macro_rules! lane_float {
    ($($t:ty),*) => {$(
        impl Lane for $t {
            #[inline(always)]
            fn from_scalar(s: &Scalar) -> Self {
                match *s { Scalar::U(v) => v as $t, Scalar::I(v) => v as $t, Scalar::F(v) => v as $t }
            }
            #[inline(always)]
            fn between(x: Self, lo: Self, hi: Self) -> bool {
                // IEEE 754: NaN fails both comparisons, so it never matches.
                (x >= lo) & (x <= hi)
            }
        }
    )*};
}
lane_uint!(u8, u16, u32, u64);
lane_sint!(i8 => u8, i16 => u16, i32 => u32, i64 => u64);
lane_float!(f32, f64);

/// Packs 64 flags (one per byte, 0 or 1) into a mask word: each group of 8 bytes is
/// gathered into one byte by a multiply (common practice for bit-packing bytes).
#[inline(always)]
fn pack64(flags: &[u8; 64]) -> u64 {
    let mut w = 0u64;
    for k in 0..8 {
        let v = u64::from_le_bytes(flags[k * 8..k * 8 + 8].try_into().expect("8 bytes"));
        w |= (v.wrapping_mul(0x0102_0408_1020_4080) >> 56) << (8 * k);
    }
    w
}

/// Fills `out[k]` with the mask of rows `64k..64k+64` of `xs` under `f`; bits past the
/// end of `xs` are zero. Flags go through a byte array first: that form vectorises into
/// compares on every instruction set, where shifting each flag into place does not.
#[inline(always)]
fn fill<T: Copy, F: Fn(T) -> bool>(xs: &[T], out: &mut [u64], f: F) {
    let (blocks, tail) = xs.as_chunks::<64>();
    let mut flags = [0u8; 64];
    for (m, b) in out.iter_mut().zip(blocks) {
        for (fl, &x) in flags.iter_mut().zip(b) {
            *fl = u8::from(f(x));
        }
        *m = pack64(&flags);
    }
    if !tail.is_empty() {
        flags = [0u8; 64];
        for (fl, &x) in flags.iter_mut().zip(tail) {
            *fl = u8::from(f(x));
        }
        out[blocks.len()] = pack64(&flags);
    }
}

/// One leaf test over a typed slice, written once and instantiated per instruction set.
#[inline(always)]
fn leaf_body<T: Lane>(xs: &[T], test: &Test, out: &mut [u64]) {
    match test {
        Test::Cmp(op, s) => {
            let c = T::from_scalar(s);
            match op {
                CmpOp::Lt => fill(xs, out, |x| x < c),
                CmpOp::Le => fill(xs, out, |x| x <= c),
                CmpOp::Eq => fill(xs, out, |x| x == c),
                CmpOp::Ne => fill(xs, out, |x| x != c),
                CmpOp::Ge => fill(xs, out, |x| x >= c),
                CmpOp::Gt => fill(xs, out, |x| x > c),
            }
        }
        Test::Between(lo, hi) => {
            let (lo, hi) = (T::from_scalar(lo), T::from_scalar(hi));
            fill(xs, out, |x| T::between(x, lo, hi))
        }
        Test::In(list) => {
            out.iter_mut().for_each(|m| *m = 0);
            let mut tmp = vec![0u64; out.len()];
            for s in list {
                let c = T::from_scalar(s);
                fill(xs, &mut tmp, |x| x == c);
                out.iter_mut().zip(&tmp).for_each(|(m, t)| *m |= t);
            }
        }
    }
}

fn leaf_portable<T: Lane>(xs: &[T], test: &Test, out: &mut [u64]) {
    leaf_body(xs, test, out)
}

/// Where a visit hands its mask words: `word(bucket, i, mask)`. A closure is one; the
/// scan's hot sinks are types whose method is `#[inline(always)]`, so the vector walk
/// inlines them: a sink left out of line clobbers the vector registers on every word and
/// runs without the path's instruction set (`count_ones` without `popcnt`).
pub trait Words {
    /// Takes mask word `i` (bucket `bucket`).
    fn word(&mut self, bucket: usize, i: usize, m: u64);
}

impl<F: FnMut(usize, usize, u64)> Words for F {
    #[inline(always)]
    fn word(&mut self, bucket: usize, i: usize, m: u64) {
        self(bucket, i, m)
    }
}

/// A lane type with every instruction-set path available on this target.
#[cfg(target_arch = "x86_64")]
pub trait Simd: VectorLane<avx512::Avx512> + VectorLane<avx2::Avx2> {}
#[cfg(target_arch = "x86_64")]
impl<T: VectorLane<avx512::Avx512> + VectorLane<avx2::Avx2>> Simd for T {}
/// A lane type with every instruction-set path available on this target.
#[cfg(not(target_arch = "x86_64"))]
pub trait Simd: Lane {}
#[cfg(not(target_arch = "x86_64"))]
impl<T: Lane> Simd for T {}

/// Buckets [`visit`] reports words in: the interleaved runs of the vector walk and its
/// remainder, or a single bucket elsewhere.
#[cfg(target_arch = "x86_64")]
pub const BUCKETS: usize = super::stream::STREAMS + 1;
/// Buckets [`visit`] reports words in.
#[cfg(not(target_arch = "x86_64"))]
pub const BUCKETS: usize = 1;

/// The portable mask of the last, partial word of `xs` (rows from `done`, fewer than 64).
fn tail_word<T: Lane>(xs: &[T], done: usize, test: &Test) -> u64 {
    let mut m = [0u64];
    leaf_portable(&xs[done..], test, &mut m);
    m[0]
}

/// Calls `sink(bucket, i, mask)` for every 64-row word of `xs` under `test` (buckets
/// joined in order cover the words in order).
fn leaf_visit<T: Simd, S: Words>(isa: Isa, xs: &[T], test: &Test, sink: &mut S) {
    #[cfg(target_arch = "x86_64")]
    if isa.level() != Level::Portable {
        let done = if isa.level() == Level::Avx512 {
            // SAFETY: an AVX-512 `Isa` exists only after run-time detection of every
            // feature `avx512::leaf` enables (see `kernels::isa`).
            unsafe { avx512::leaf(xs, test, sink) }
        } else {
            // SAFETY: an AVX2 `Isa` exists only after run-time detection of every feature
            // `avx2::leaf` enables (see `kernels::isa`).
            unsafe { avx2::leaf(xs, test, sink) }
        };
        if done < xs.len() {
            sink.word(BUCKETS - 1, done / 64, tail_word(xs, done, test));
        }
        return;
    }
    let mut masks = vec![0u64; xs.len().div_ceil(64)];
    leaf(isa, xs, test, &mut masks);
    for (i, &m) in masks.iter().enumerate() {
        sink.word(0, i, m);
    }
}

fn leaf<T: Simd>(isa: Isa, xs: &[T], test: &Test, out: &mut [u64]) {
    match isa.level() {
        Level::Portable => leaf_portable(xs, test, out),
        #[cfg(target_arch = "x86_64")]
        _ => leaf_visit(isa, xs, test, &mut |_, i, m| out[i] = m),
    }
}

/// Calls `sink(bucket, i, mask)` for every 64-row word i of rows `rows` under `pred`;
/// within a bucket words ascend, and buckets `0..BUCKETS` in order cover the words in
/// order. A single comparison on a vector path (AVX-512, AVX2) streams from memory
/// straight to the sink, so matches are used while the data is in flight; other
/// predicates, and the portable path, are evaluated into `masks` first and reported in
/// order.
pub fn visit<S: Words>(
    isa: Isa,
    pred: &Bound,
    table: &Table,
    rows: std::ops::Range<usize>,
    masks: &mut Vec<u64>,
    scratch: &mut Scratch,
    sink: &mut S,
) {
    #[cfg(target_arch = "x86_64")]
    if let Bound::Leaf { col, test } = pred {
        if isa.level() != Level::Portable {
            let r = rows;
            return crate::with_column_data!(&table.columns[*col].data, v => leaf_visit(isa, &v[r], test, sink));
        }
    }
    masks.resize(rows.len().div_ceil(64), 0);
    let n = rows.len().div_ceil(64);
    eval(isa, pred, table, rows, &mut masks[..n], scratch);
    for (i, &m) in masks[..n].iter().enumerate() {
        sink.word(0, i, m);
    }
}

/// Reusable mask buffers for one worker (one per nesting depth of the predicate).
#[derive(Default)]
pub struct Scratch {
    bufs: Vec<Vec<u64>>,
}

/// Evaluates `pred` over rows `rows` of `table`, writing one mask word per 64 rows into
/// `out` (bits past the range are zero). `rows.start` must be a multiple of 64.
pub fn eval(
    isa: Isa,
    pred: &Bound,
    table: &Table,
    rows: std::ops::Range<usize>,
    out: &mut [u64],
    scratch: &mut Scratch,
) {
    eval_at(isa, pred, table, rows, out, scratch, 0)
}

fn eval_at(
    isa: Isa,
    pred: &Bound,
    table: &Table,
    rows: std::ops::Range<usize>,
    out: &mut [u64],
    scratch: &mut Scratch,
    depth: usize,
) {
    match pred {
        Bound::Leaf { col, test } => {
            let r = rows.clone();
            crate::with_column_data!(&table.columns[*col].data, v => leaf(isa, &v[r], test, out))
        }
        Bound::Not(inner) => {
            eval_at(isa, inner, table, rows.clone(), out, scratch, depth);
            out.iter_mut().for_each(|m| *m = !*m);
            clear_tail(out, rows.len());
        }
        Bound::And(a, b) | Bound::Or(a, b) => {
            eval_at(isa, a, table, rows.clone(), out, scratch, depth);
            if scratch.bufs.len() <= depth {
                scratch.bufs.resize_with(depth + 1, Vec::new);
            }
            let mut tmp = std::mem::take(&mut scratch.bufs[depth]);
            tmp.resize(out.len(), 0);
            eval_at(isa, b, table, rows, &mut tmp, scratch, depth + 1);
            if matches!(pred, Bound::And(..)) {
                out.iter_mut().zip(&tmp).for_each(|(m, t)| *m &= t);
            } else {
                out.iter_mut().zip(&tmp).for_each(|(m, t)| *m |= t);
            }
            scratch.bufs[depth] = tmp;
        }
    }
}

/// Zeroes the bits of `masks` at and after row `len`.
fn clear_tail(masks: &mut [u64], len: usize) {
    let full = len / 64;
    if full < masks.len() {
        let rem = len % 64;
        masks[full] &= if rem == 0 { 0 } else { (1u64 << rem) - 1 };
        masks[full + 1..].iter_mut().for_each(|m| *m = 0);
    }
}

/// Calls `f(i)` for every set bit i of `masks` (row 64k+j is bit j of word k), in
/// ascending order, walking set bits with trailing-zero counts: the work is one test per
/// word plus one step per match, and nothing branches on rows that do not match.
#[inline(always)]
pub fn for_each_match(masks: &[u64], mut f: impl FnMut(u64)) {
    for (k, &m0) in masks.iter().enumerate() {
        let mut m = m0;
        let b = 64 * k as u64;
        while m != 0 {
            f(b + u64::from(m.trailing_zeros()));
            m &= m - 1;
        }
    }
}
