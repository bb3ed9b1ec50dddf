//! The dot product w·x in a fixed order: L lanes (L a power of two), lane l summing the
//! products xᵢ·wᵢ with i ≡ l (mod L) in increasing i starting from +0, then an adder tree
//! summing neighbours pairwise, (a₀+a₁), (a₂+a₃), …, level by level down to one value.
//! L = 1 is the sequential sum. Hardware dot-product pipelines with the same L and tree
//! match bit for bit.
//!
//! ```text
//!   x0w0 x4w4 …   x1w1 x5w5 …   x2w2 …   x3w3 …      (L = 4)
//!     lane 0        lane 1       lane 2    lane 3
//!        └──── + ────┘             └── + ──┘
//!               └────────── + ─────────┘
//! ```

use super::real::Real;

/// The widest adder tree.
pub const MAX_LANES: u32 = 64;

/// w·x with `lanes` lanes (a power of two ≤ [`MAX_LANES`]); `FTZ` flushes every product
/// and sum (the caller flushes the inputs).
#[inline(always)]
pub fn dot<T: Real, const FTZ: bool>(x: &[f32], w: &[T], lanes: u32) -> T {
    match lanes {
        1 => dot_n::<T, FTZ, 1>(x, w),
        2 => dot_n::<T, FTZ, 2>(x, w),
        4 => dot_n::<T, FTZ, 4>(x, w),
        8 => dot_n::<T, FTZ, 8>(x, w),
        16 => dot_n::<T, FTZ, 16>(x, w),
        32 => dot_n::<T, FTZ, 32>(x, w),
        _ => dot_n::<T, FTZ, 64>(x, w),
    }
}

#[inline(always)]
fn fl<T: Real, const FTZ: bool>(v: T) -> T {
    if FTZ {
        v.flush()
    } else {
        v
    }
}

/// Rows of at least this many lane groups take the adder tree out of line (see [`tree`]);
/// shorter ones keep it inline, where a call would cost more than the loop it frees.
const APART_FROM: usize = 4;

#[inline(always)]
fn dot_n<T: Real, const FTZ: bool, const N: usize>(x: &[f32], w: &[T]) -> T {
    if x.len() >= APART_FROM * N {
        lanes::<T, FTZ, N, true>(x, w)
    } else {
        lanes::<T, FTZ, N, false>(x, w)
    }
}

#[inline(always)]
fn lanes<T: Real, const FTZ: bool, const N: usize, const APART: bool>(x: &[f32], w: &[T]) -> T {
    let mut acc = [T::ZERO; N];
    let xs = x.chunks_exact(N);
    let ws = w.chunks_exact(N);
    let (xr, wr) = (xs.remainder(), ws.remainder());
    for (xc, wc) in xs.zip(ws) {
        for l in 0..N {
            acc[l] = fl::<T, FTZ>(acc[l].add(fl::<T, FTZ>(T::from_f32(xc[l]).mul(wc[l]))));
        }
    }
    if !xr.is_empty() {
        // The remainder through a full-width step whose lanes past it keep their sums (a
        // select): indexing `acc` by a run-time length would keep it in memory.
        let (mut xp, mut wp) = ([T::ZERO; N], [T::ZERO; N]);
        for l in 0..xr.len() {
            xp[l] = T::from_f32(xr[l]);
            wp[l] = wr[l];
        }
        for l in 0..N {
            let s = fl::<T, FTZ>(acc[l].add(fl::<T, FTZ>(xp[l].mul(wp[l]))));
            acc[l] = if l < xr.len() { s } else { acc[l] };
        }
    }
    if APART {
        tree_apart::<T, FTZ, N>(acc)
    } else {
        tree::<T, FTZ, N>(acc)
    }
}

/// [`tree`] out of line: inlined, its pairing of neighbours leads the vectoriser to split
/// the lane accumulators across narrow registers with shuffles on every step of the lane
/// loop; apart, the loop keeps one wide register.
#[inline(never)]
fn tree_apart<T: Real, const FTZ: bool, const N: usize>(acc: [T; N]) -> T {
    tree::<T, FTZ, N>(acc)
}

/// The adder tree over the lanes: neighbours summed pairwise, level by level.
#[inline(always)]
fn tree<T: Real, const FTZ: bool, const N: usize>(mut acc: [T; N]) -> T {
    let mut width = N;
    while width > 1 {
        for i in 0..width / 2 {
            acc[i] = fl::<T, FTZ>(acc[2 * i].add(acc[2 * i + 1]));
        }
        width /= 2;
    }
    acc[0]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tree_order_is_pairwise_over_lanes() {
        // With L = 4 and x = 1..=6, w = 1: lanes hold (1+5), (2+6), 3, 4, the tree sums
        // (6+8) + (3+4) = 21.
        let x = [1.0f32, 2.0, 3.0, 4.0, 5.0, 6.0];
        let w = [1.0f32; 6];
        assert_eq!(dot::<f32, false>(&x, &w, 4), 21.0);
        // An order-sensitive case: 1e8 + 1 − 1e8 in f32. Sequentially ((0+1e8)+1)−1e8 = 0
        // (1 is lost); with L = 2 lanes (1e8 − 1e8) + 1 = 1.
        let x = [1e8f32, 1.0, -1e8];
        let w = [1.0f32; 3];
        assert_eq!(dot::<f32, false>(&x, &w, 1), 0.0);
        assert_eq!(dot::<f32, false>(&x, &w, 2), 1.0);
    }

    #[test]
    fn ftz_flushes_subnormal_products() {
        let x = [1e-30f32];
        let w = [1e-30f32];
        assert_eq!(dot::<f32, false>(&x, &w, 1), 0.0); // 1e-60 is below every subnormal
        let x = [1e-30f32];
        let w = [1e-10f32]; // 1e-40 is subnormal in f32
        assert!(dot::<f32, false>(&x, &w, 1) > 0.0);
        assert_eq!(dot::<f32, true>(&x, &w, 1), 0.0);
    }
}
