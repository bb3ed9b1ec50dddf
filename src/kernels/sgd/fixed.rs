//! Bit-true fixed point: signed Q formats (Qi.f holds v/2^f in 1 + i + f bits), the
//! rounding modes, overflow handling with counts, the sigmoid table, and the fixed-point
//! trainer. Values are held in `i64`, intermediate products and sums exactly in `i128`
//! (or in `i64` when the formats keep them below 2^62, see [`fits_i64`]); a value leaves
//! the wider type only through [`round_shift`] (dropping fraction bits) and [`fit`] (to a
//! width, saturating or wrapping).
//!
//! Per sample (data Q_d with fraction f_d, model Q_m/f_m, accumulator Q_a/f_a):
//! ```text
//!   z   = fit_a( … fit_a(fit_a(0 + rnd(x₀·w₀ → f_a)) + rnd(x₁·w₁ → f_a)) … + rnd(b → f_a))
//!   g   = squared: fit_a(z − y_a) · logistic: fit_a(σ̂(z) − y_a) · hinge: −y_a if y·z < 1 else 0
//!   Gⱼ  = fit_a(Gⱼ + rnd(g·xⱼ → f_a)),  G_b = fit_a(G_b + g)
//! ```
//! Per minibatch: s = ne(η_t/B'·2³²), r = ne(η_t·λ·2³²) (nearest-even from `f64`), and
//! `wⱼ = fit_m(wⱼ − rnd(s·Gⱼ + r·wⱼ → f_m))`, `b = fit_m(b − rnd(s·G_b → f_m))`, the sum
//! formed exactly at fraction max(f_a, f_m) + 32. y_a is the label moved to f_a with
//! `rnd`. Data and labels enter Q_d by nearest-even with saturation.

use super::lfsr::Lfsr;
use super::loss::Loss;
use super::params::{Hyper, Model, ModelElem, OverflowCounts, SgdData, SgdError, SgdParams};
use crate::table::QFormat;

/// Fraction bits of the per-update step constants s and r.
pub const STEP_FRAC: u32 = 32;

/// Sigmoid table range: z ∈ [−SIGMOID_RANGE, SIGMOID_RANGE).
pub const SIGMOID_RANGE: f64 = 8.0;

/// How fraction bits are dropped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Rounding {
    /// Toward −∞ (an arithmetic right shift).
    Truncate,
    /// To nearest, ties to even.
    NearestEven,
    /// Add k random bits from the LFSR below the kept bits, then truncate: rounds up
    /// with probability (dropped part)/2^k.
    Stochastic,
}

/// What a value outside its format becomes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Overflow {
    /// The nearest representable value.
    Saturate,
    /// Two's-complement wrap (the low bits kept).
    Wrap,
}

/// The fixed-point mode of a job.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FixedSpec {
    /// Data and label format.
    pub data: QFormat,
    /// Model format.
    pub model: QFormat,
    /// Dot-product and gradient accumulator format.
    pub acc: QFormat,
    /// Rounding mode.
    pub rounding: Rounding,
    /// Overflow mode.
    pub overflow: Overflow,
    /// LFSR start state (non-zero) for stochastic rounding.
    pub lfsr_seed: u32,
    /// The sigmoid table has 2^k entries.
    pub sigmoid_bits: u32,
}

/// Bits of a Q format with the sign.
pub fn width(q: QFormat) -> u32 {
    1 + q.int_bits + q.frac_bits
}

/// The smallest of 8, 16, 32, 64 bits holding `q`.
pub fn storage_bits(q: QFormat) -> u32 {
    [8, 16, 32, 64]
        .into_iter()
        .find(|&b| b >= width(q))
        .unwrap_or(64)
}

/// The integer type a sample's intermediate values are held in: `i128` always holds them
/// exactly; `i64` does for formats narrow enough ([`fits_i64`]), and is several times
/// faster. Both give the same results, since every value is exact in either.
pub trait Carrier:
    Copy
    + Ord
    + From<i64>
    + std::ops::Add<Output = Self>
    + std::ops::Sub<Output = Self>
    + std::ops::Mul<Output = Self>
    + std::ops::Neg<Output = Self>
    + std::ops::Shl<u32, Output = Self>
    + std::ops::Shr<u32, Output = Self>
    + std::ops::BitAnd<Output = Self>
{
    /// 1.
    const ONE: Self;
    /// The low 64 bits.
    fn low64(self) -> i64;
}

impl Carrier for i64 {
    const ONE: i64 = 1;
    #[inline(always)]
    fn low64(self) -> i64 {
        self
    }
}

impl Carrier for i128 {
    const ONE: i128 = 1;
    #[inline(always)]
    fn low64(self) -> i64 {
        self as i64
    }
}

/// v / 2^shift rounded by `mode` (a negative shift multiplies exactly). Stochastic
/// rounding adds the low `shift` bits of one LFSR draw (for shift > 32, the draw shifted
/// up to the top of the dropped bits).
#[inline(always)]
pub fn round_shift(v: i128, shift: i32, mode: Rounding, lfsr: &mut Lfsr) -> i128 {
    round_shift_in(v, shift, mode, lfsr)
}

/// [`round_shift`] in `I`, which must hold `v`, the result and `v` plus 2^shift.
#[inline(always)]
fn round_shift_in<I: Carrier>(v: I, shift: i32, mode: Rounding, lfsr: &mut Lfsr) -> I {
    if shift <= 0 {
        return v << (-shift) as u32;
    }
    let k = shift as u32;
    match mode {
        Rounding::Truncate => v >> k,
        Rounding::NearestEven => {
            let q = v >> k;
            let rem = v - (q << k);
            let half = I::ONE << (k - 1);
            // Without branches: whether a value rounds up follows the data, so a branch
            // here is mispredicted about every other time.
            let up = (rem > half) | ((rem == half) & (q & I::ONE == I::ONE));
            q + I::from(i64::from(up))
        }
        Rounding::Stochastic => {
            let r = I::from(i64::from(lfsr.draw()));
            let r = if k <= 32 {
                r & ((I::ONE << k) - I::ONE)
            } else {
                r << (k - 32)
            };
            (v + r) >> k
        }
    }
}

/// `v` in `bits` signed bits; an out-of-range value saturates or wraps and counts once.
#[inline(always)]
pub fn fit(v: i128, bits: u32, mode: Overflow, count: &mut u64) -> i64 {
    fit_in(v, bits, mode, count)
}

/// [`fit`] in `I`, which must hold 2^bits.
#[inline(always)]
fn fit_in<I: Carrier>(v: I, bits: u32, mode: Overflow, count: &mut u64) -> i64 {
    let hi = (I::ONE << (bits - 1)) - I::ONE;
    let lo = -hi - I::ONE;
    if lo <= v && v <= hi {
        return v.low64();
    }
    *count += 1;
    match mode {
        Overflow::Saturate => v.clamp(lo, hi).low64(),
        Overflow::Wrap => {
            let m = v & ((I::ONE << bits) - I::ONE);
            (if m > hi { m - (I::ONE << bits) } else { m }).low64()
        }
    }
}

/// Whether every intermediate value of a sample ([`FixedTrainer`]'s products, shifted
/// terms, sums and their stochastic-rounding offsets) stays below 2^62 in magnitude, so
/// `i64` holds it: each term's bits, plus those a negative shift adds, at most 61, and the
/// accumulator at most 62 bits wide (its wrap forms 2^bits).
pub fn fits_i64(s: &FixedSpec) -> bool {
    let (wd, wm, wa) = (
        width(s.data) as i32,
        width(s.model) as i32,
        width(s.acc) as i32,
    );
    let (fd, fm, fa) = (
        s.data.frac_bits as i32,
        s.model.frac_bits as i32,
        s.acc.frac_bits as i32,
    );
    let grown = |bits: i32, shift: i32| bits + (-shift).max(0);
    wa <= 62
        && grown(wd + wm - 2, fd + fm - fa) <= 61
        && grown(wm - 1, fm - fa) <= 61
        && grown(wd - 1, fd - fa) <= 61
        && wa + wd - 2 <= 61
}

/// num / den (den > 0) rounded to nearest, ties to even.
pub fn div_nearest_even(num: i128, den: i128) -> i128 {
    let q = num.div_euclid(den);
    let rem = num - q * den;
    q + i128::from(2 * rem > den || (2 * rem == den && q & 1 == 1))
}

/// A real to `frac` fraction bits by nearest-even, then fitted to `bits` (saturating).
#[inline]
pub fn from_real(v: f64, frac: u32, bits: u32, count: &mut u64) -> i64 {
    let scaled = round_ties_even(v * pow2(frac as i32));
    // The common case stays in i64: an integral value below 2^62 converts in one
    // instruction, and a width below 63 bits fits there with room for its bounds.
    if bits < 63 && scaled.abs() < 4_611_686_018_427_387_904.0 {
        return fit_in(scaled as i64, bits, Overflow::Saturate, count);
    }
    // Integral values below 2^63 convert through i64 in one instruction; the rest (and
    // NaN, as 0) take the saturating i128 conversion. Both give the same integer.
    let int = if scaled.abs() < 9_223_372_036_854_775_808.0 {
        i128::from(scaled as i64)
    } else {
        scaled as i128
    };
    fit(int, bits, Overflow::Saturate, count)
}

/// 2^e exactly, for −1022 ≤ e ≤ 1023: a power of two is its biased exponent alone
/// (IEEE 754 binary64 layout).
#[inline]
pub fn pow2(e: i32) -> f64 {
    f64::from_bits(((1023 + e) as u64) << 52)
}

/// `x` rounded to an integer, ties to even (the sign of a zero result aside): below 2^52 in
/// magnitude, adding and then subtracting 2^52 rounds once, in the default
/// round-to-nearest-even mode, at the units place; larger values are already integers.
/// Common practice; it spares the library call the x86-64 baseline makes for `rint`.
#[inline]
fn round_ties_even(x: f64) -> f64 {
    const TWO_52: f64 = 4_503_599_627_370_496.0;
    if x.abs() < TWO_52 {
        let c = TWO_52.copysign(x);
        (x + c) - c
    } else {
        x
    }
}

/// The sigmoid table in the accumulator format: entry i = ne(σ(cᵢ)·2^f_a) with cᵢ the
/// centre −8 + (i + ½)·16/2^k of bin i, σ from libm's `exp` in `f64`.
pub fn sigmoid_lut(spec: &FixedSpec) -> Vec<i64> {
    let n = 1u32 << spec.sigmoid_bits;
    let w = 2.0 * SIGMOID_RANGE / f64::from(n);
    let mut c = 0;
    (0..n)
        .map(|i| {
            let x = -SIGMOID_RANGE + (f64::from(i) + 0.5) * w;
            from_real(
                1.0 / (1.0 + libm::exp(-x)),
                spec.acc.frac_bits,
                width(spec.acc),
                &mut c,
            )
        })
        .collect()
}

/// σ̂(z) for z in the accumulator format: 0 below −8, 1 at or above 8, else the table
/// entry of bin ⌊(z + 8)·2^k/16⌋.
#[inline]
pub fn sigmoid(z: i64, lut: &[i64], spec: &FixedSpec) -> i64 {
    let fa = spec.acc.frac_bits as i32;
    let lo = -(8i128 << fa);
    let z = i128::from(z);
    if z < lo {
        return 0;
    }
    let shift = fa + 4 - spec.sigmoid_bits as i32;
    let i = if shift >= 0 {
        (z - lo) >> shift
    } else {
        (z - lo) << -shift
    };
    if i >= lut.len() as i128 {
        return 1i64 << fa;
    }
    lut[i as usize]
}

impl FixedSpec {
    /// Checks the formats, the labels' representability and the step constants' range.
    pub fn validate(&self, params: &SgdParams, hypers: &[Hyper]) -> Result<(), SgdError> {
        for (what, q) in [
            ("data", self.data),
            ("model", self.model),
            ("accumulator", self.acc),
        ] {
            if width(q) > 64 {
                return Err(SgdError::QFormat {
                    what,
                    q,
                    bits: width(q),
                });
            }
        }
        if params.loss != Loss::Squared && self.data.int_bits == 0 {
            return Err(SgdError::Param(format!(
                "data format {} cannot hold the label 1 of the {} loss",
                self.data,
                params.loss.name()
            )));
        }
        if self.acc.frac_bits.abs_diff(self.model.frac_bits) > 24 {
            return Err(SgdError::Param(
                "accumulator and model fraction bits may differ by at most 24".into(),
            ));
        }
        if !(1..=16).contains(&self.sigmoid_bits) {
            return Err(SgdError::Param(format!(
                "sigmoid table bits {} must be within 1..=16",
                self.sigmoid_bits
            )));
        }
        if self.rounding == Rounding::Stochastic && self.lfsr_seed == 0 {
            return Err(SgdError::Param("the LFSR seed must be non-zero".into()));
        }
        if hypers
            .iter()
            .any(|h| h.step.eta >= 256.0 || h.step.eta * h.l2 >= 256.0)
        {
            return Err(SgdError::Param(
                "fixed point needs η and η·λ below 256".into(),
            ));
        }
        Ok(())
    }

    /// The model's element type.
    pub fn model_elem(&self) -> ModelElem {
        ModelElem::Fixed {
            bits: storage_bits(self.model),
            q: self.model,
        }
    }
}

/// The fixed-point trainer of one engine.
pub struct FixedTrainer {
    spec: FixedSpec,
    pub(super) loss: Loss,
    d: usize,
    bias: bool,
    /// n × (d + 1) values in Q_d: features then label.
    x: Vec<i64>,
    lut: Vec<i64>,
    w: Vec<i64>,
    g: Vec<i64>,
    lfsr: Lfsr,
    /// Overflow events so far.
    pub overflow: OverflowCounts,
    /// Whether samples run in `i64` ([`fits_i64`]) rather than `i128`.
    narrow: bool,
}

impl FixedTrainer {
    /// Converts the data to Q_d and starts from a zero model.
    pub fn new(data: &SgdData, spec: FixedSpec, loss: Loss, bias: bool) -> FixedTrainer {
        let d = data.dims();
        let (fd, bd) = (spec.data.frac_bits, width(spec.data));
        let mut overflow = OverflowCounts::default();
        let mut x = Vec::with_capacity(data.rows() * (d + 1));
        for (row, &y) in data.features.rows().into_iter().zip(data.labels.iter()) {
            x.extend(
                row.iter()
                    .map(|&v| from_real(f64::from(v), fd, bd, &mut overflow.data)),
            );
            x.push(from_real(f64::from(y), fd, bd, &mut overflow.data));
        }
        let m = d + usize::from(bias);
        FixedTrainer {
            spec,
            loss,
            d,
            bias,
            x,
            lut: sigmoid_lut(&spec),
            w: vec![0; m],
            g: vec![0; m],
            lfsr: Lfsr(spec.lfsr_seed.max(1)),
            overflow,
            narrow: fits_i64(&spec),
        }
    }

    /// Starts fetching sample `r`'s values into the cache.
    #[inline]
    pub fn prefetch(&self, r: usize) {
        let n = self.d + 1;
        crate::kernels::hints::prefetch_all(&self.x[r * n..(r + 1) * n]);
    }

    /// Adds sample `r`'s gradient; returns z as a real.
    #[inline]
    pub fn sample(&mut self, r: usize) -> f64 {
        if self.narrow {
            self.sample_modes::<i64>(r)
        } else {
            self.sample_modes::<i128>(r)
        }
    }

    /// [`FixedTrainer::sample`] in `I`, with the rounding and overflow rules as constants
    /// of each call, so the inner loops are compiled once per pair of rules (no choice per
    /// value).
    #[inline(always)]
    fn sample_modes<I: Carrier>(&mut self, r: usize) -> f64 {
        use {Overflow::*, Rounding::*};
        match (self.spec.rounding, self.spec.overflow) {
            (Truncate, Saturate) => self.sample_in::<I>(r, Truncate, Saturate),
            (Truncate, Wrap) => self.sample_in::<I>(r, Truncate, Wrap),
            (NearestEven, Saturate) => self.sample_in::<I>(r, NearestEven, Saturate),
            (NearestEven, Wrap) => self.sample_in::<I>(r, NearestEven, Wrap),
            (Stochastic, Saturate) => self.sample_in::<I>(r, Stochastic, Saturate),
            (Stochastic, Wrap) => self.sample_in::<I>(r, Stochastic, Wrap),
        }
    }

    /// [`FixedTrainer::sample`] with intermediates in `I`, rounding `rm` and overflow `ov`
    /// (the job's, passed as constants by [`FixedTrainer::sample_modes`]).
    #[inline(always)]
    fn sample_in<I: Carrier>(&mut self, r: usize, rm: Rounding, ov: Overflow) -> f64 {
        let s = self.spec;
        let (fd, fm, fa) = (
            s.data.frac_bits as i32,
            s.model.frac_bits as i32,
            s.acc.frac_bits as i32,
        );
        let ba = width(s.acc);
        let row = &self.x[r * (self.d + 1)..(r + 1) * (self.d + 1)];
        let (x, y) = (&row[..self.d], row[self.d]);
        let mut acc: i64 = 0;
        for (&xj, &wj) in x.iter().zip(&self.w) {
            let p = round_shift_in(I::from(xj) * I::from(wj), fd + fm - fa, rm, &mut self.lfsr);
            acc = fit_in(I::from(acc) + p, ba, ov, &mut self.overflow.dot);
        }
        if self.bias {
            let b = round_shift_in(I::from(self.w[self.d]), fm - fa, rm, &mut self.lfsr);
            acc = fit_in(I::from(acc) + b, ba, ov, &mut self.overflow.dot);
        }
        let z = acc;
        let ya = round_shift_in(I::from(y), fd - fa, rm, &mut self.lfsr);
        let g = match self.loss {
            Loss::Squared => fit_in(I::from(z) - ya, ba, ov, &mut self.overflow.grad),
            Loss::Logistic => fit_in(
                I::from(sigmoid(z, &self.lut, &s)) - ya,
                ba,
                ov,
                &mut self.overflow.grad,
            ),
            Loss::Hinge => {
                let one = I::ONE << fa as u32;
                let margin = if y > 0 { I::from(z) } else { -I::from(z) };
                if margin < one {
                    fit_in(-ya, ba, ov, &mut self.overflow.grad)
                } else {
                    0
                }
            }
        };
        for (gj, &xj) in self.g.iter_mut().zip(x) {
            let p = round_shift_in(I::from(g) * I::from(xj), fd, rm, &mut self.lfsr);
            *gj = fit_in(I::from(*gj) + p, ba, ov, &mut self.overflow.grad);
        }
        if self.bias {
            self.g[self.d] = fit_in(
                I::from(self.g[self.d]) + I::from(g),
                ba,
                ov,
                &mut self.overflow.grad,
            );
        }
        z as f64 / pow2(fa)
    }

    /// The rates of an update with step `eta` and L2 strength `l2` after a minibatch of
    /// `batch` samples: η/B′ and η·λ in Q(·).STEP_FRAC.
    pub fn rates(eta: f64, l2: f64, batch: usize) -> (i128, i128) {
        let mut none = 0;
        (
            i128::from(from_real(eta / batch as f64, STEP_FRAC, 64, &mut none)),
            i128::from(from_real(eta * l2, STEP_FRAC, 64, &mut none)),
        )
    }

    /// Applies and clears the gradient of a minibatch with the [`FixedTrainer::rates`]
    /// `(sc, rc)`.
    pub fn update(&mut self, (sc, rc): (i128, i128)) {
        let s = self.spec;
        let (fm, fa) = (s.model.frac_bits, s.acc.frac_bits);
        let top = fm.max(fa) + STEP_FRAC;
        let bm = width(s.model);
        for j in 0..self.w.len() {
            let r = if j < self.d { rc } else { 0 };
            let t1 = (sc * i128::from(self.g[j])) << (top - fa - STEP_FRAC);
            let t2 = (r * i128::from(self.w[j])) << (top - fm - STEP_FRAC);
            let delta = round_shift(t1 + t2, (top - fm) as i32, s.rounding, &mut self.lfsr);
            self.w[j] = fit(
                i128::from(self.w[j]) - delta,
                bm,
                s.overflow,
                &mut self.overflow.model,
            );
            self.g[j] = 0;
        }
    }

    /// The model.
    pub fn model(&self) -> Model {
        Model::Fixed(self.w.clone(), self.spec.model_elem())
    }

    /// Replaces the model.
    pub fn set_model(&mut self, m: &Model) {
        if let Model::Fixed(v, _) = m {
            self.w = v.clone();
        }
    }
}

/// The mean of fixed-point models: exact sums, divided by E with nearest-even.
pub fn average(models: &[Model]) -> Model {
    let ws: Vec<&Vec<i64>> = models
        .iter()
        .map(|m| match m {
            Model::Fixed(v, _) => v,
            _ => unreachable!("a model of another element type"),
        })
        .collect();
    let e = ws.len() as i128;
    let out = (0..ws[0].len())
        .map(|j| div_nearest_even(ws.iter().map(|w| i128::from(w[j])).sum(), e) as i64)
        .collect();
    Model::Fixed(out, models[0].elem())
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn pow2_is_libm_exp2_at_every_normal_exponent() {
        for e in -1022..=1023 {
            assert_eq!(
                pow2(e).to_bits(),
                libm::exp2(f64::from(e)).to_bits(),
                "2^{e}"
            );
        }
    }

    #[test]
    fn ties_round_to_even() {
        // IEEE 754 roundTiesToEven at the units place: 0.5 → 0, 1.5 → 2, 2.5 → 2.
        for (x, want) in [
            (0.5, 0.0),
            (1.5, 2.0),
            (2.5, 2.0),
            (-2.5, -2.0),
            (-3.5, -4.0),
        ] {
            assert_eq!(round_ties_even(x), want, "{x}");
        }
        assert_eq!(
            round_ties_even(2f64.powi(60) + 4096.0),
            2f64.powi(60) + 4096.0
        );
    }

    proptest! {
        /// Samples in `i64` give what they give in `i128`, bit for bit, with every
        /// rounding, overflow rule and loss, on formats narrow enough for `i64` (narrow
        /// accumulators, so that overflows happen too).
        #[test]
        fn i64_samples_equal_i128_samples(
            (id, fd) in (1u32..8).prop_flat_map(|i| (Just(i), 0u32..10)),
            (im, fm) in (1u32..12).prop_flat_map(|i| (Just(i), 0u32..24)),
            (ia, fa) in (1u32..12).prop_flat_map(|i| (Just(i), 0u32..24)),
            mode in 0usize..3, wrap: bool, loss in 0usize..3, seed in 1u32..1000,
            values in prop::collection::vec(-3.0f32..3.0, 6 * 24),
        ) {
            let q = |int_bits, frac_bits| QFormat { int_bits, frac_bits };
            let spec = FixedSpec {
                data: q(id, fd),
                model: q(im, fm),
                acc: q(ia, fa),
                rounding: [Rounding::Truncate, Rounding::NearestEven, Rounding::Stochastic][mode],
                overflow: if wrap { Overflow::Wrap } else { Overflow::Saturate },
                lfsr_seed: seed,
                sigmoid_bits: 6,
            };
            prop_assume!(fits_i64(&spec));
            let loss = [Loss::Squared, Loss::Logistic, Loss::Hinge][loss];
            let x = ndarray::Array2::from_shape_vec((24, 5), values[..120].to_vec()).unwrap();
            let y = ndarray::Array1::from_iter(values[120..].iter().map(|v| v.signum()));
            let data = SgdData { features: x, labels: y };
            let mut narrow = FixedTrainer::new(&data, spec, loss, true);
            let mut wide = FixedTrainer::new(&data, spec, loss, true);
            prop_assert!(narrow.narrow);
            wide.narrow = false;
            for r in 0..24 {
                prop_assert_eq!(narrow.sample(r).to_bits(), wide.sample(r).to_bits(), "sample {}", r);
                if r % 4 == 3 {
                    narrow.update(FixedTrainer::rates(0.5, 0.01, 4));
                    wide.update(FixedTrainer::rates(0.5, 0.01, 4));
                }
            }
            prop_assert_eq!(&narrow.w, &wide.w);
            prop_assert_eq!(narrow.overflow, wide.overflow);
            prop_assert_eq!(narrow.lfsr, wide.lfsr);
        }

        #[test]
        fn rounding_and_conversion_match_the_standard_library(
            m in -1e6f64..1e6, e in -40i32..80, frac in 0u32..40,
            bits in prop::sample::select(vec![8u32, 16, 48, 62, 63, 64]),
        ) {
            let x = m * 2f64.powi(e);
            prop_assert_eq!(round_ties_even(x), x.round_ties_even());
            let mut a = 0;
            let want = {
                let mut c = 0;
                let scaled = (x * libm::exp2(f64::from(frac))).round_ties_even();
                (fit(scaled as i128, bits, Overflow::Saturate, &mut c), c)
            };
            prop_assert_eq!((from_real(x, frac, bits, &mut a), a), want);
        }
    }
}
