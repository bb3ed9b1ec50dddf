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

/// The longest rows whose predictions [`Wide::dots16`] takes in fours (and a last pair).
/// Pairs gained 4–6 % at 64–256 values a row, where one row's chain of lane sums is short
/// of filling the core, and lost 5–10 % at 1024 (measured on the bench, with and without
/// software prefetching); fours on AVX2 matched or beat pairs at 256 (42 % of read against
/// 39–41 %, alternating builds).
const PAIRED_MAX: usize = 512;

/// An instruction set's form of the 16-lane dot product and of the gradient sum.
pub(super) trait Wide: Copy {
    /// w·x with 16 lanes and no flush, as [`tree::dot`] computes it.
    fn dot16(self, x: &[f32], w: &[f32]) -> f32;

    /// [`Wide::dot16`], hinting the cache to fetch row `next` meanwhile; a form may spread
    /// the hints over its steps, one line a step, which long rows need (hinted at once,
    /// 32 lines or more hold more misses than the core tracks and stall it).
    #[inline(always)]
    fn dot16_fetching(self, x: &[f32], w: &[f32], next: Option<&[f32]>) -> f32 {
        if let Some(n) = next {
            crate::kernels::hints::prefetch_all(n);
        }
        self.dot16(x, w)
    }

    /// [`Wide::dot16`] of two rows with the same `w`; a form may run the two dependency
    /// chains side by side in one loop, which rows of a few hundred values need to keep
    /// the core busy.
    #[inline(always)]
    fn dot16_pair(self, xa: &[f32], xb: &[f32], w: &[f32]) -> (f32, f32) {
        (self.dot16(xa, w), self.dot16(xb, w))
    }

    /// [`Wide::dot16`] of four rows with the same `w`; a form may step the four together,
    /// sharing each load of `w` and the work of the four trees.
    #[inline(always)]
    fn dot16_quad(self, x: [&[f32]; 4], w: &[f32]) -> [f32; 4] {
        let (a, b) = self.dot16_pair(x[0], x[1], w);
        let (c, d) = self.dot16_pair(x[2], x[3], w);
        [a, b, c, d]
    }

    /// `z[i] = ` [`Wide::dot16`] of row `rows[i]` of `x` (rows of `d` values) and the
    /// model's first `d` weights, plus its bias `model[d]` if it has one, prefetching row
    /// `ahead[i]` while row `rows[i]` is read. The bias is added here, one value at a
    /// time: a vector pass over `z` afterwards would wait for each of the one-value stores
    /// it spans.
    #[inline(always)]
    fn dots16(
        self,
        x: &[f32],
        d: usize,
        model: &[f32],
        (rows, ahead): (&[usize], &[usize]),
        z: &mut [f32],
    ) {
        let (w, b) = (&model[..d], model.get(d).copied());
        let row = |r: usize| &x[r * d..(r + 1) * d];
        let fetch = |i: usize| {
            if let Some(&next) = ahead.get(i) {
                crate::kernels::hints::prefetch_all(row(next));
            }
        };
        let bias = |dot: f32| b.map_or(dot, |b| dot + b);
        // Rows in fours, then a pair, then one at a time.
        let (quads, paired) = if d <= PAIRED_MAX {
            (rows.len() / 4 * 4, rows.len() / 2 * 2)
        } else {
            (0, 0)
        };
        for (i, (r, zq)) in rows[..quads]
            .chunks_exact(4)
            .zip(z.chunks_exact_mut(4))
            .enumerate()
        {
            (0..4).for_each(|k| fetch(4 * i + k));
            let zs = self.dot16_quad([row(r[0]), row(r[1]), row(r[2]), row(r[3])], w);
            for (zk, dot) in zq.iter_mut().zip(zs) {
                *zk = bias(dot);
            }
        }
        if paired > quads {
            let (r, i) = (&rows[quads..paired], quads);
            fetch(i);
            fetch(i + 1);
            let (za, zb) = self.dot16_pair(row(r[0]), row(r[1]), w);
            (z[i], z[i + 1]) = (bias(za), bias(zb));
        }
        for (i, (&r, zi)) in rows.iter().zip(z.iter_mut()).enumerate().skip(paired) {
            *zi = bias(self.dot16_fetching(row(r), w, ahead.get(i).map(|&n| row(n))));
        }
    }

    /// `g[j] = g[j] + s[i]·x[r_i·d + j]` for every j < d, over the rows `r_i` of `rows` in
    /// order: one rounded product and one rounded sum per term, no flush.
    fn add_scaled(self, g: &mut [f32], x: &[f32], d: usize, rows: &[usize], s: &[f32]);
}

/// [`Wide::add_scaled`] in plain Rust for the columns `cols`, row after row.
#[inline(always)]
fn add_scaled_rows(
    g: &mut [f32],
    x: &[f32],
    d: usize,
    cols: std::ops::Range<usize>,
    rows: &[usize],
    s: &[f32],
) {
    for (&r, &si) in rows.iter().zip(s) {
        let row = &x[r * d..(r + 1) * d];
        for (gj, &xj) in g[cols.clone()].iter_mut().zip(&row[cols.clone()]) {
            *gj += si * xj;
        }
    }
}

/// Panics unless every row of `rows` lies within `x` (rows of `d` values): the explicit
/// forms read rows through raw pointers.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
fn check_rows(x: &[f32], d: usize, rows: &[usize]) {
    assert!(
        rows.iter().all(|&r| (r + 1) * d <= x.len()),
        "rows within x"
    );
}

/// Adds the terms of columns `c .. c + 4·W` (W lanes a register) into `gp`, the four
/// registers held across all the rows: `load`, `store`, `set1`, `add` and `mul` are one
/// instruction set's. Expands inside the caller's `unsafe` block, which vouches for the
/// pointers.
#[cfg(target_arch = "x86_64")]
macro_rules! four_register_block {
    ($gp:expr, $xp:expr, $d:expr, $c:expr, $rows:expr, $s:expr, $w:expr,
     $load:ident, $store:ident, $set1:ident, $add:ident, $mul:ident) => {{
        // No closure here: a closure would not share the caller's instruction set.
        let mut a = [
            $load($gp.add($c)),
            $load($gp.add($c + $w)),
            $load($gp.add($c + 2 * $w)),
            $load($gp.add($c + 3 * $w)),
        ];
        for (&r, &si) in $rows.iter().zip($s) {
            let (b, p) = ($set1(si), $xp.add(r * $d + $c));
            for (k, ak) in a.iter_mut().enumerate() {
                *ak = $add(*ak, $mul(b, $load(p.add($w * k))));
            }
        }
        for (k, ak) in a.iter().enumerate() {
            $store($gp.add($c + $w * k), *ak);
        }
    }};
}

/// The scalar form: [`tree::dot`] itself, vectorised by the compiler where it can.
#[derive(Clone, Copy)]
pub(super) struct Portable;

impl Wide for Portable {
    #[inline(always)]
    fn dot16(self, x: &[f32], w: &[f32]) -> f32 {
        tree::dot::<f32, false>(x, w, 16)
    }

    #[inline(always)]
    fn add_scaled(self, g: &mut [f32], x: &[f32], d: usize, rows: &[usize], s: &[f32]) {
        add_scaled_rows(g, x, d, 0..d, rows, s)
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

/// The 16-lane adder tree of one 512-bit register: each step adds a lane's right-hand
/// neighbour at the step's distance, the left operand first, as the scalar tree does.
///
/// # Safety
/// The CPU must have AVX-512 F (callers hold an [`Avx512`] token).
#[cfg(target_arch = "x86_64")]
#[inline(always)]
unsafe fn tree16(acc: std::arch::x86_64::__m512) -> f32 {
    use std::arch::x86_64::*;
    // SAFETY: AVX-512 F, by this function's contract.
    unsafe {
        let a = _mm512_add_ps(acc, _mm512_permute_ps::<0b10_11_00_01>(acc));
        let a = _mm512_add_ps(a, _mm512_permute_ps::<0b01_00_11_10>(a));
        let a = _mm512_add_ps(a, _mm512_shuffle_f32x4::<0b10_11_00_01>(a, a));
        let a = _mm512_add_ps(a, _mm512_shuffle_f32x4::<0b01_00_11_10>(a, a));
        _mm512_cvtss_f32(a)
    }
}

/// The products of lanes `i .. i + 16` of `x` and `w`, masked to `n` values.
///
/// # Safety
/// AVX-512 F, and `x` and `w` readable for `n` values.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
unsafe fn products16(
    x: *const f32,
    w: *const f32,
    i: usize,
    n: usize,
) -> std::arch::x86_64::__m512 {
    use std::arch::x86_64::*;
    // SAFETY: AVX-512 F and `n` readable values, by this function's contract; a full
    // step reads below `n`, a partial one is masked to `n`.
    unsafe {
        if i + 16 <= n {
            _mm512_mul_ps(_mm512_loadu_ps(x.add(i)), _mm512_loadu_ps(w.add(i)))
        } else {
            let m: __mmask16 = ((1u32 << (n - i)) - 1) as u16;
            _mm512_mul_ps(
                _mm512_maskz_loadu_ps(m, x.add(i)),
                _mm512_maskz_loadu_ps(m, w.add(i)),
            )
        }
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
            for i in (0..n).step_by(16) {
                acc = _mm512_add_ps(acc, products16(xp, wp, i, n));
            }
            tree16(acc)
        }
    }

    /// One line of `next` hinted a step (16 values, one 64-byte line).
    #[inline(always)]
    fn dot16_fetching(self, x: &[f32], w: &[f32], next: Option<&[f32]>) -> f32 {
        use std::arch::x86_64::*;
        let Some(nx) = next else {
            return self.dot16(x, w);
        };
        let n = x.len().min(w.len());
        // SAFETY: as `dot16`; a prefetch only hints the cache and never faults, whatever
        // the address (the hints past a shorter `next` are harmless).
        unsafe {
            let (xp, wp, np) = (x.as_ptr(), w.as_ptr(), nx.as_ptr());
            let mut acc = _mm512_setzero_ps();
            for i in (0..n).step_by(16) {
                _mm_prefetch::<_MM_HINT_T0>(np.wrapping_add(i).cast());
                acc = _mm512_add_ps(acc, products16(xp, wp, i, n));
            }
            tree16(acc)
        }
    }

    /// The two rows' lane sums in two registers, stepped together.
    #[inline(always)]
    fn dot16_pair(self, xa: &[f32], xb: &[f32], w: &[f32]) -> (f32, f32) {
        use std::arch::x86_64::*;
        let n = xa.len().min(xb.len()).min(w.len());
        if xa.len() != xb.len() {
            return (self.dot16(xa, w), self.dot16(xb, w));
        }
        // SAFETY: as `dot16`, for `xa[..n]`, `xb[..n]` and `w[..n]`; with rows of equal
        // length, `n` covers each row as `dot16` would.
        unsafe {
            let (ap, bp, wp) = (xa.as_ptr(), xb.as_ptr(), w.as_ptr());
            let (mut a, mut b) = (_mm512_setzero_ps(), _mm512_setzero_ps());
            for i in (0..n).step_by(16) {
                a = _mm512_add_ps(a, products16(ap, wp, i, n));
                b = _mm512_add_ps(b, products16(bp, wp, i, n));
            }
            (tree16(a), tree16(b))
        }
    }

    /// Column blocks of 64 held in four registers across all the rows, so a term's sum
    /// waits on the register, not on a store and reload of `g`.
    #[inline(always)]
    fn add_scaled(self, g: &mut [f32], x: &[f32], d: usize, rows: &[usize], s: &[f32]) {
        use std::arch::x86_64::*;
        let g = &mut g[..d];
        check_rows(x, d, rows);
        // SAFETY: the token proves AVX-512 F (module doc); with every row checked above,
        // each load reads within `x[r·d..(r+1)·d]` and each load and store of `g` within
        // `g[..d]` (full blocks below `d`, the last one masked to `d`).
        unsafe {
            let (xp, gp) = (x.as_ptr(), g.as_mut_ptr());
            let mut c = 0;
            while c + 64 <= d {
                four_register_block!(
                    gp,
                    xp,
                    d,
                    c,
                    rows,
                    s,
                    16,
                    _mm512_loadu_ps,
                    _mm512_storeu_ps,
                    _mm512_set1_ps,
                    _mm512_add_ps,
                    _mm512_mul_ps
                );
                c += 64;
            }
            while c < d {
                let m: __mmask16 = if d - c >= 16 {
                    !0
                } else {
                    ((1u32 << (d - c)) - 1) as u16
                };
                let mut a = _mm512_maskz_loadu_ps(m, gp.add(c));
                for (&r, &si) in rows.iter().zip(s) {
                    let p = _mm512_maskz_loadu_ps(m, xp.add(r * d + c));
                    a = _mm512_add_ps(a, _mm512_mul_ps(_mm512_set1_ps(si), p));
                }
                _mm512_mask_storeu_ps(gp.add(c), m, a);
                c += 16;
            }
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

/// The lane sums of `R` rows of `n` values with `w`, row by row as (lanes 0–7, lanes
/// 8–15): each step of 16 columns adds its products, the last step's masked to `n`. One
/// load of `w` serves all `R` rows.
///
/// # Safety
/// AVX2, and every row and `w` readable for `n` values.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
unsafe fn lane_sums_avx2<const R: usize>(
    rows: [*const f32; R],
    w: *const f32,
    n: usize,
) -> [(std::arch::x86_64::__m256, std::arch::x86_64::__m256); R] {
    use std::arch::x86_64::*;
    // SAFETY: AVX2 and `n` readable values, by this function's contract: full steps read
    // below `n`, the last one is masked to `n` by a window of `LANE_MASK`.
    unsafe {
        let mut acc = [(_mm256_setzero_ps(), _mm256_setzero_ps()); R];
        let mut i = 0;
        while i + 16 <= n {
            let (wl, wh) = (_mm256_loadu_ps(w.add(i)), _mm256_loadu_ps(w.add(i + 8)));
            for (a, &x) in acc.iter_mut().zip(&rows) {
                let pl = _mm256_mul_ps(_mm256_loadu_ps(x.add(i)), wl);
                let ph = _mm256_mul_ps(_mm256_loadu_ps(x.add(i + 8)), wh);
                *a = (_mm256_add_ps(a.0, pl), _mm256_add_ps(a.1, ph));
            }
            i += 16;
        }
        if i < n {
            let mp = LANE_MASK.as_ptr().add(16 - (n - i));
            let (ml, mh) = (
                _mm256_loadu_si256(mp.cast()),
                _mm256_loadu_si256(mp.add(8).cast()),
            );
            let (wl, wh) = (
                _mm256_maskload_ps(w.add(i), ml),
                _mm256_maskload_ps(w.add(i + 8), mh),
            );
            for (a, &x) in acc.iter_mut().zip(&rows) {
                let pl = _mm256_mul_ps(_mm256_maskload_ps(x.add(i), ml), wl);
                let ph = _mm256_mul_ps(_mm256_maskload_ps(x.add(i + 8), mh), wh);
                *a = (_mm256_add_ps(a.0, pl), _mm256_add_ps(a.1, ph));
            }
        }
        acc
    }
}

/// Lane pairs summed: `[a0+a1, a2+a3, b0+b1, b2+b3]` in each 128-bit half, as one
/// horizontal add, from two shuffles and one vertical add.
///
/// # Safety
/// AVX.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
unsafe fn pair_sums(
    a: std::arch::x86_64::__m256,
    b: std::arch::x86_64::__m256,
) -> std::arch::x86_64::__m256 {
    use std::arch::x86_64::*;
    // SAFETY: AVX, by this function's contract.
    unsafe {
        _mm256_add_ps(
            _mm256_shuffle_ps::<0b10_00_10_00>(a, b),
            _mm256_shuffle_ps::<0b11_01_11_01>(a, b),
        )
    }
}

/// The 16-lane trees of four rows' lane sums side by side. Each sum adds the same two
/// terms as the one-row tree (addition commutes exactly), level by level:
///
/// ```text
///   pairs of (lo_r, hi_r)        r:  [0+1, 2+3, 8+9, 10+11 | 4+5, 6+7, 12+13, 14+15]
///   pairs of (r, r+1)          r,r+1: [0–3, 8–11, …(r+1)   | 4–7, 12–15, …(r+1)]
///   low half + high half       [0–7, 8–15] for rows 0, 1 | rows 2, 3
///   pairs                      [0–15] for rows 0, 1 | rows 2, 3
/// ```
///
/// # Safety
/// AVX.
#[cfg(target_arch = "x86_64")]
#[inline(always)]
unsafe fn trees4(s: [(std::arch::x86_64::__m256, std::arch::x86_64::__m256); 4]) -> [f32; 4] {
    use std::arch::x86_64::*;
    // SAFETY: AVX, by this function's contract.
    unsafe {
        // No closure or `map` here: they would not share the caller's instruction set.
        let q = [
            pair_sums(s[0].0, s[0].1),
            pair_sums(s[1].0, s[1].1),
            pair_sums(s[2].0, s[2].1),
            pair_sums(s[3].0, s[3].1),
        ];
        let (r01, r23) = (pair_sums(q[0], q[1]), pair_sums(q[2], q[3]));
        let halves = _mm256_add_ps(
            _mm256_permute2f128_ps::<0x20>(r01, r23),
            _mm256_permute2f128_ps::<0x31>(r01, r23),
        );
        // Lanes 0, 1, 4, 5 now hold rows 0, 1, 2, 3.
        let t = pair_sums(halves, halves);
        let mut out = [0f32; 4];
        _mm_storeu_ps(
            out.as_mut_ptr(),
            _mm_castpd_ps(_mm_unpacklo_pd(
                _mm_castps_pd(_mm256_castps256_ps128(t)),
                _mm_castps_pd(_mm256_extractf128_ps::<1>(t)),
            )),
        );
        out
    }
}

#[cfg(target_arch = "x86_64")]
impl Wide for Avx2 {
    #[inline(always)]
    fn dot16(self, x: &[f32], w: &[f32]) -> f32 {
        use std::arch::x86_64::*;
        let n = x.len().min(w.len());
        // SAFETY: the token proves AVX2 (module doc); `x` and `w` hold at least `n` values.
        unsafe {
            let [(lo, hi)] = lane_sums_avx2([x.as_ptr()], w.as_ptr(), n);
            let half = |v: __m256| {
                let v = _mm256_add_ps(v, _mm256_permute_ps::<0b10_11_00_01>(v));
                let v = _mm256_add_ps(v, _mm256_permute_ps::<0b01_00_11_10>(v));
                let v = _mm256_add_ps(v, _mm256_permute2f128_ps::<1>(v, v));
                _mm256_cvtss_f32(v)
            };
            half(lo) + half(hi)
        }
    }

    /// The four rows stepped together, each load of `w` serving all four, and their trees
    /// taken side by side ([`trees4`]).
    #[inline(always)]
    fn dot16_quad(self, x: [&[f32]; 4], w: &[f32]) -> [f32; 4] {
        let n = w.len().min(x[0].len());
        if x.iter().any(|r| r.len() != x[0].len()) {
            return x.map(|r| self.dot16(r, w));
        }
        // SAFETY: the token proves AVX2 (module doc); the four rows are of equal length,
        // so each holds at least `n` values, as `w` does.
        unsafe { trees4(lane_sums_avx2(x.map(<[f32]>::as_ptr), w.as_ptr(), n)) }
    }

    /// Column blocks of 32 in four registers across all the rows (as the AVX-512 form);
    /// the last partial block is left to the plain loop.
    #[inline(always)]
    fn add_scaled(self, g: &mut [f32], x: &[f32], d: usize, rows: &[usize], s: &[f32]) {
        use std::arch::x86_64::*;
        let g = &mut g[..d];
        check_rows(x, d, rows);
        let full = d / 32 * 32;
        // SAFETY: the token proves AVX2 (module doc); with every row checked above, each
        // load reads within `x[r·d..r·d+full]` and each load and store of `g` within
        // `g[..full]`.
        unsafe {
            let (xp, gp) = (x.as_ptr(), g.as_mut_ptr());
            for c in (0..full).step_by(32) {
                four_register_block!(
                    gp,
                    xp,
                    d,
                    c,
                    rows,
                    s,
                    8,
                    _mm256_loadu_ps,
                    _mm256_storeu_ps,
                    _mm256_set1_ps,
                    _mm256_add_ps,
                    _mm256_mul_ps
                );
            }
        }
        add_scaled_rows(g, x, d, full..d, rows, s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// A form as a plain function of (x, w).
    type Form = Box<dyn Fn(&[f32], &[f32]) -> f32>;

    /// `$make(f)` for every form `f` this CPU has, concatenated: a macro, as the forms
    /// are distinct types.
    macro_rules! every_form {
        (|$f:ident| $make:expr) => {{
            #[cfg_attr(not(target_arch = "x86_64"), allow(unused_mut))]
            let mut v = {
                let $f = Portable;
                $make
            };
            #[cfg(target_arch = "x86_64")]
            {
                let isa = Isa::detect();
                if let Some($f) = Avx512::new(isa) {
                    v.extend($make);
                }
                if let Some($f) = Avx2::new(isa) {
                    v.extend($make);
                }
            }
            v
        }};
    }

    /// Every form this CPU has, each alone and while hinting a row ahead (here the row
    /// itself).
    fn forms() -> Vec<Form> {
        every_form!(|f| vec![
            Box::new(move |x: &[f32], w: &[f32]| f.dot16(x, w)) as Form,
            Box::new(move |x: &[f32], w: &[f32]| f.dot16_fetching(x, w, Some(x))),
        ])
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

    /// Every form's dot products of four rows as a plain function: its pairs (rows 0, 1
    /// and 2, 3) and its quad.
    type GroupForm = Box<dyn Fn([&[f32]; 4], &[f32]) -> [f32; 4]>;

    /// Every pair and quad form this CPU has.
    fn group_forms() -> Vec<GroupForm> {
        every_form!(|f| vec![
            Box::new(move |x: [&[f32]; 4], w: &[f32]| {
                let ((a, b), (c, d)) = (f.dot16_pair(x[0], x[1], w), f.dot16_pair(x[2], x[3], w));
                [a, b, c, d]
            }) as GroupForm,
            Box::new(move |x: [&[f32]; 4], w: &[f32]| f.dot16_quad(x, w)),
        ])
    }

    proptest! {
        /// Every form's pairs and quads of dot products equal the scalar tree of each row
        /// bit for bit, at every row length around the lane count.
        #[test]
        fn groups_equal_the_scalar_tree(
            xs in prop::collection::vec(-1e6f32..1e6, 0..320),
            w in prop::collection::vec(-1e3f32..1e3, 80),
            exp in prop::collection::vec(-20i32..20, 80),
        ) {
            let n = xs.len() / 4;
            let x: [&[f32]; 4] = std::array::from_fn(|k| &xs[k * n..(k + 1) * n]);
            let w: Vec<f32> = w.iter().zip(&exp).map(|(v, &e)| v * 2f32.powi(e)).collect();
            let want = x.map(|r| tree::dot::<f32, false>(r, &w[..n], 16).to_bits());
            for f in group_forms() {
                prop_assert_eq!(f(x, &w[..n]).map(f32::to_bits), want);
            }
        }
    }

    /// Every form's gradient sum as a plain function.
    type SumForm = Box<dyn Fn(&mut [f32], &[f32], usize, &[usize], &[f32])>;

    /// Every gradient-sum form this CPU has.
    fn sum_forms() -> Vec<SumForm> {
        every_form!(|f| vec![Box::new(
            move |g: &mut [f32], x: &[f32], d: usize, r: &[usize], s: &[f32]| {
                f.add_scaled(g, x, d, r, s)
            }
        ) as SumForm])
    }

    proptest! {
        /// Every form's gradient sum equals the one-term-at-a-time loop bit for bit, for
        /// row lengths on both sides of every register block, rows in any order (repeats
        /// too) and terms of many binades.
        #[test]
        fn sum_forms_equal_term_by_term(
            d in 0usize..140,
            picks in prop::collection::vec(0usize..7, 0..20),
            scale in prop::collection::vec(-30i32..30, 20),
            seed in any::<u64>(),
        ) {
            let mut s = crate::gen::rng::Stream::new(seed, "test", "sum", 0);
            let x: Vec<f32> = (0..7 * d).map(|_| s.normal() as f32 * 2f32.powi(s.int_in(-20, 20) as i32)).collect();
            let g0: Vec<f32> = (0..d).map(|_| s.normal() as f32).collect();
            let sc: Vec<f32> = picks.iter().zip(&scale).map(|(_, &e)| s.normal() as f32 * 2f32.powi(e)).collect();
            let mut want = g0.clone();
            for (&r, &si) in picks.iter().zip(&sc) {
                for (w, &xj) in want.iter_mut().zip(&x[r * d..(r + 1) * d]) {
                    *w += si * xj;
                }
            }
            for f in sum_forms() {
                let mut g = g0.clone();
                f(&mut g, &x, d, &picks, &sc);
                let bits = |v: &[f32]| v.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
                prop_assert_eq!(bits(&g), bits(&want));
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
