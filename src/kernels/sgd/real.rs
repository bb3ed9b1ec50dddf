//! The float modes (`f32`, `f64`): a trait over the two element types and the float
//! trainer. Every operation is one IEEE operation rounded to nearest-even (no fused
//! multiply-add); with flush-to-zero, inputs and every result that is subnormal become a
//! zero of the same sign.
//!
//! Per minibatch (B' samples, the last one of a pass may be short), in `T`:
//! `z = dot(w, x) + b`, `g = ℓ'(z, y)`, `Gⱼ = Gⱼ + g·xⱼ` and `G_b = G_b + g` over the samples in order
//! from +0; then `s = T(η_t / B')`, `r = T(η_t·λ)` (computed in `f64`, rounded once) and
//! `wⱼ = wⱼ − (s·Gⱼ + r·wⱼ)`, `b = b − s·G_b`.

use super::loss::Loss;
use super::params::{Model, SgdData};
use super::tree;
use super::wide::Wide;

/// `f32` or `f64`.
pub trait Real: Copy + Send + Sync + PartialOrd + 'static {
    /// +0.
    const ZERO: Self;
    /// Rounded from `f64`.
    fn from_f64(v: f64) -> Self;
    /// Exact widening (or identity) from `f32`.
    fn from_f32(v: f32) -> Self;
    /// Exact widening to `f64`.
    fn to_f64(self) -> f64;
    /// self + o.
    fn add(self, o: Self) -> Self;
    /// self − o.
    fn sub(self, o: Self) -> Self;
    /// self · o.
    fn mul(self, o: Self) -> Self;
    /// self / o.
    fn div(self, o: Self) -> Self;
    /// A subnormal becomes a zero of its sign.
    fn flush(self) -> Self;
    /// Wraps weights as a model.
    fn model(w: Vec<Self>) -> Model;
    /// Unwraps a model of this type.
    fn weights(m: &Model) -> Vec<Self>;
    /// The values as `f32`s, if this is `f32`.
    fn as_f32s(v: &[Self]) -> Option<&[f32]>;
    /// The values as mutable `f32`s, if this is `f32`.
    fn as_f32s_mut(v: &mut [Self]) -> Option<&mut [f32]>;
}

macro_rules! impl_real {
    ($t:ty, $variant:ident, $as_f32s:expr, $as_f32s_mut:expr) => {
        impl Real for $t {
            const ZERO: Self = 0.0;
            #[inline(always)]
            fn from_f64(v: f64) -> Self {
                v as $t
            }
            #[inline(always)]
            fn from_f32(v: f32) -> Self {
                v as $t
            }
            #[inline(always)]
            fn to_f64(self) -> f64 {
                self as f64
            }
            #[inline(always)]
            fn add(self, o: Self) -> Self {
                self + o
            }
            #[inline(always)]
            fn sub(self, o: Self) -> Self {
                self - o
            }
            #[inline(always)]
            fn mul(self, o: Self) -> Self {
                self * o
            }
            #[inline(always)]
            fn div(self, o: Self) -> Self {
                self / o
            }
            #[inline(always)]
            fn flush(self) -> Self {
                if self != 0.0 && self.abs() < <$t>::MIN_POSITIVE {
                    <$t>::from_bits(self.to_bits() & !(!0 >> 1))
                } else {
                    self
                }
            }
            fn model(w: Vec<Self>) -> Model {
                Model::$variant(w)
            }
            fn weights(m: &Model) -> Vec<Self> {
                match m {
                    Model::$variant(v) => v.clone(),
                    _ => unreachable!("a model of another element type"),
                }
            }
            #[inline(always)]
            fn as_f32s(v: &[Self]) -> Option<&[f32]> {
                $as_f32s(v)
            }
            #[inline(always)]
            fn as_f32s_mut(v: &mut [Self]) -> Option<&mut [f32]> {
                $as_f32s_mut(v)
            }
        }
    };
}
impl_real!(f32, F32, Some, Some);
impl_real!(f64, F64, |_| None, |_| None);

/// Bytes of the rows of one run of samples (see [`FloatTrainer::batch`]): well inside a
/// 32–48 KiB first-level data cache, beside the model and the gradient.
const RUN_BYTES: usize = 16 << 10;

/// The float trainer of one engine: the model `w` (d weights, then the bias), the
/// gradient accumulators `g`, and the arithmetic's options.
pub struct FloatTrainer<'a, T: Real, const FTZ: bool> {
    data: &'a SgdData,
    loss: Loss,
    lanes: u32,
    bias: bool,
    w: Vec<T>,
    g: Vec<T>,
    /// The current minibatch's predictions.
    zs: Vec<T>,
}

impl<'a, T: Real, const FTZ: bool> FloatTrainer<'a, T, FTZ> {
    /// A zero model.
    pub fn new(data: &'a SgdData, loss: Loss, lanes: u32, bias: bool) -> Self {
        let m = data.dims() + usize::from(bias);
        FloatTrainer {
            data,
            loss,
            lanes,
            bias,
            w: vec![T::ZERO; m],
            g: vec![T::ZERO; m],
            zs: Vec::new(),
        }
    }

    #[inline(always)]
    fn fl(v: T) -> T {
        if FTZ {
            v.flush()
        } else {
            v
        }
    }

    /// Adds the gradients of the samples `mb`, in order, and returns `loss` plus their
    /// losses ℓ(z, y) in `f64`, summed in order. The samples go in runs that fit the
    /// first-level cache: a run's predictions first, all of them (the model is fixed within
    /// a minibatch, so their dependency chains — products, lane sums, tree — are
    /// independent and overlap in the core), then its gradient sums in sample order,
    /// re-reading rows the predictions just brought in.
    #[inline(always)]
    pub(super) fn batch<V: Wide>(
        &mut self,
        v: V,
        mb: &[usize],
        ahead: &[usize],
        labels: &[f32],
        mut loss: f64,
    ) -> f64 {
        let run = (RUN_BYTES / (4 * self.data.dims()).max(1)).max(1);
        for (k, mb) in mb.chunks(run).enumerate() {
            let ahead = ahead.get(k * run..).unwrap_or(&[]);
            loss = self.run(v, mb, ahead, labels, loss);
        }
        loss
    }

    /// [`FloatTrainer::batch`] for one run.
    #[inline(always)]
    fn run<V: Wide>(
        &mut self,
        v: V,
        mb: &[usize],
        ahead: &[usize],
        labels: &[f32],
        mut loss: f64,
    ) -> f64 {
        let d = self.data.dims();
        let all = self.data.features.as_slice().expect("row-major features");
        let mut zs = std::mem::take(&mut self.zs);
        zs.resize(mb.len(), T::ZERO);
        match (T::as_f32s(&self.w), T::as_f32s_mut(&mut zs)) {
            (Some(model), Some(zf)) if !FTZ && self.lanes == 16 => {
                v.dots16(all, d, model, (mb, ahead), zf)
            }
            _ => {
                let (w, wb) = self.w.split_at(d);
                // Long rows are left to the hardware here: hinted whole, their lines would
                // stall the core (see `pass::stream`), and this loop has no steps to spread
                // the hints over.
                let ahead = if 4 * d < super::pass::PREFETCH_BYTES as usize {
                    ahead
                } else {
                    &[]
                };
                for (i, (&r, zi)) in mb.iter().zip(zs.iter_mut()).enumerate() {
                    if let Some(&next) = ahead.get(i) {
                        crate::kernels::hints::prefetch_all(&all[next * d..(next + 1) * d]);
                    }
                    let dot = tree::dot::<T, FTZ>(&all[r * d..(r + 1) * d], w, self.lanes);
                    *zi = wb.first().map_or(dot, |&b| Self::fl(dot.add(b)));
                }
            }
        }
        if FTZ || T::as_f32s(&zs).is_none() {
            for (&r, &zi) in mb.iter().zip(&zs) {
                let x = &all[r * d..(r + 1) * d];
                let y = Self::fl(T::from_f32(labels[r]));
                let gz = Self::fl(self.loss.dz(zi, y));
                for (gj, &xj) in self.g[..d].iter_mut().zip(x) {
                    *gj = Self::fl(gj.add(Self::fl(gz.mul(Self::fl(T::from_f32(xj))))));
                }
                if self.bias {
                    self.g[d] = Self::fl(self.g[d].add(gz));
                }
                loss += self.loss.value(zi.to_f64(), f64::from(labels[r]));
            }
        } else {
            // f32 without flush: the derivatives first, then the gradient sums column block
            // by column block (the same operations in the same order per coordinate).
            let (g, gb) = self.g.split_at_mut(d);
            loss = self.loss.dz_rows(&mut zs, mb, labels, loss);
            // The bias's gradient: the derivatives summed in order, after them (summed
            // beside them, the sum was a second chain through every row).
            if let Some(gb) = gb.first_mut() {
                *gb = zs.iter().fold(*gb, |a, &z| a.add(z));
            }
            let (g, s) = (T::as_f32s_mut(g), T::as_f32s(&zs));
            v.add_scaled(g.expect("f32"), all, d, mb, s.expect("f32"));
        }
        self.zs = zs;
        loss
    }

    /// The rates `(s, r)` of an update with step `eta` and L2 strength `l2` after a
    /// minibatch of `batch` samples.
    #[inline(always)]
    pub fn rates(&self, eta: f64, l2: f64, batch: usize) -> (T, T) {
        (
            Self::fl(T::from_f64(eta / batch as f64)),
            Self::fl(T::from_f64(eta * l2)),
        )
    }

    /// Applies and clears the gradient of a minibatch with the [`FloatTrainer::rates`]
    /// `(s, r)`.
    #[inline(always)]
    pub fn update(&mut self, (s, r): (T, T)) {
        let d = self.data.dims();
        for (wj, gj) in self.w[..d].iter_mut().zip(self.g[..d].iter_mut()) {
            *wj = Self::fl(wj.sub(Self::fl(Self::fl(s.mul(*gj)).add(Self::fl(r.mul(*wj))))));
            *gj = T::ZERO;
        }
        if self.bias {
            self.w[d] = Self::fl(self.w[d].sub(Self::fl(s.mul(self.g[d]))));
            self.g[d] = T::ZERO;
        }
    }

    /// The model.
    pub fn model(&self) -> Model {
        T::model(self.w.clone())
    }

    /// Replaces the model.
    pub fn set_model(&mut self, m: &Model) {
        self.w = T::weights(m);
    }

    /// Whether every weight is finite.
    pub fn finite(&self) -> bool {
        self.w.iter().all(|v| v.to_f64().is_finite())
    }
}

/// The mean of `models` in `T`: each coordinate summed in engine order from +0, then
/// divided by `T(E)` in one IEEE division.
pub fn average<T: Real>(models: &[Model]) -> Model {
    let ws: Vec<Vec<T>> = models.iter().map(T::weights).collect();
    let e = T::from_f64(ws.len() as f64);
    let out = (0..ws[0].len())
        .map(|j| {
            let s = ws.iter().fold(T::ZERO, |a, w| a.add(w[j]));
            s.div(e)
        })
        .collect();
    T::model(out)
}
