//! The oracle for the float modes: one engine, written as plainly as possible from the
//! README's update expressions — per sample a lane vector indexed by `i mod L`, a tree
//! reduction by halving a `Vec`, and per minibatch a gradient vector summed in sample
//! order. It shares with the fast path only the `Real` operations, the loss derivative
//! and the sample order.

use super::loss::Loss;
use super::params::{Hyper, Order, SgdData};
use super::pass::order;
use super::real::Real;

/// The model after every epoch of plain minibatch SGD in `T` (no blocks, one engine).
#[allow(clippy::too_many_arguments)]
pub fn naive_sgd<T: Real>(
    data: &SgdData,
    loss: Loss,
    batch: usize,
    h: Hyper,
    bias: bool,
    epochs: u32,
    ord: Order,
    lanes: usize,
    ftz: bool,
) -> Vec<Vec<T>> {
    let fl = |v: T| if ftz { v.flush() } else { v };
    let (n, d) = (data.rows(), data.dims());
    let mut w = vec![T::ZERO; d + usize::from(bias)];
    let mut t = 0u64;
    let mut out = Vec::new();
    for e in 0..epochs {
        let idx = order(0..n, ord, u64::from(e));
        for mb in idx.chunks(batch) {
            let mut g = vec![T::ZERO; w.len()];
            for &r in mb {
                let x: Vec<T> = (0..d)
                    .map(|j| fl(T::from_f32(data.features[[r, j]])))
                    .collect();
                let mut lane = vec![T::ZERO; lanes];
                for j in 0..d {
                    lane[j % lanes] = fl(lane[j % lanes].add(fl(x[j].mul(w[j]))));
                }
                while lane.len() > 1 {
                    lane = lane.chunks(2).map(|p| fl(p[0].add(p[1]))).collect();
                }
                let mut z = lane[0];
                if bias {
                    z = fl(z.add(w[d]));
                }
                let gz = fl(loss.dz(z, fl(T::from_f32(data.labels[r]))));
                for j in 0..d {
                    g[j] = fl(g[j].add(fl(gz.mul(x[j]))));
                }
                if bias {
                    g[d] = fl(g[d].add(gz));
                }
            }
            let eta = h.step.at(t);
            let s = fl(T::from_f64(eta / mb.len() as f64));
            let rr = fl(T::from_f64(eta * h.l2));
            for j in 0..d {
                w[j] = fl(w[j].sub(fl(fl(s.mul(g[j])).add(fl(rr.mul(w[j]))))));
            }
            if bias {
                w[d] = fl(w[d].sub(fl(s.mul(g[d]))));
            }
            t += 1;
        }
        out.push(w.clone());
    }
    out
}
