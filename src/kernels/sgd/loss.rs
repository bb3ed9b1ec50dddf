//! The three losses: value ℓ(z, y) and derivative ∂ℓ/∂z at the prediction z = w·x + b,
//! in `f64` (the loss per epoch is always reported in `f64`, and the float modes take
//! their derivative from [`Loss::dz`] generically).
//!
//! | loss | ℓ(z, y) | ∂ℓ/∂z |
//! |---|---|---|
//! | squared | (z − y)² / 2 | z − y |
//! | logistic, y ∈ {0,1} | ln(1 + eᶻ) − y·z | σ(z) − y |
//! | hinge, y ∈ {−1,+1} | max(0, 1 − y·z) | −y if y·z < 1, else 0 (0 at y·z = 1 exactly) |

use super::real::Real;

/// A loss.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Loss {
    /// Linear regression.
    Squared,
    /// Logistic regression, labels {0, 1}.
    Logistic,
    /// Linear SVM, labels {−1, +1}.
    Hinge,
}

impl Loss {
    /// The name used in jobs and messages.
    pub fn name(self) -> &'static str {
        match self {
            Loss::Squared => "squared",
            Loss::Logistic => "logistic",
            Loss::Hinge => "hinge",
        }
    }

    /// ℓ(z, y) in `f64`; the logistic form is the overflow-free
    /// max(z, 0) + ln(1 + e^−|z|) − y·z.
    #[inline(always)]
    pub fn value(self, z: f64, y: f64) -> f64 {
        match self {
            Loss::Squared => 0.5 * (z - y) * (z - y),
            Loss::Logistic => z.max(0.0) + libm::log1p(libm::exp(-z.abs())) - y * z,
            Loss::Hinge => (1.0 - y * z).max(0.0),
        }
    }

    /// For each prediction `zs[i]` of row `rows[i]`: adds ℓ(z, y) in `f64` to `loss`,
    /// then replaces z by [`Loss::dz`] against the row's label, and returns the new
    /// `loss`. The loss is chosen once for all the rows.
    #[inline(always)]
    pub fn dz_rows<T: Real>(self, zs: &mut [T], rows: &[usize], labels: &[f32], loss: f64) -> f64 {
        #[inline(always)]
        fn each<T: Real>(
            zs: &mut [T],
            rows: &[usize],
            labels: &[f32],
            mut loss: f64,
            loss_fn: Loss,
        ) -> f64 {
            // The losses of up to 16 rows first, then their sum in order: the running sum
            // is one chain of dependent adds through the whole pass, and kept apart from
            // the rows' work it waits on none of it.
            for (zc, rc) in zs.chunks_mut(16).zip(rows.chunks(16)) {
                let mut ls = [0f64; 16];
                for ((zi, &r), l) in zc.iter_mut().zip(rc).zip(&mut ls) {
                    let y = labels[r];
                    *l = loss_fn.value(zi.to_f64(), f64::from(y));
                    *zi = loss_fn.dz(*zi, T::from_f32(y));
                }
                loss = ls[..zc.len()].iter().fold(loss, |s, &l| s + l);
            }
            loss
        }
        // One loop per loss, each with its arithmetic inlined.
        match self {
            Loss::Squared => each(zs, rows, labels, loss, Loss::Squared),
            Loss::Logistic => each(zs, rows, labels, loss, Loss::Logistic),
            Loss::Hinge => each(zs, rows, labels, loss, Loss::Hinge),
        }
    }

    /// ∂ℓ/∂z in the arithmetic of `T`: σ(z) = 1 / (1 + e^−z) with `exp` from libm in `f64`,
    /// rounded once to `T`; the subtraction is done in `T`.
    #[inline(always)]
    pub fn dz<T: Real>(self, z: T, y: T) -> T {
        match self {
            Loss::Squared => z.sub(y),
            Loss::Logistic => T::from_f64(1.0 / (1.0 + libm::exp(-z.to_f64()))).sub(y),
            Loss::Hinge => {
                if y.mul(z).to_f64() < 1.0 {
                    T::from_f64(-y.to_f64())
                } else {
                    T::from_f64(0.0)
                }
            }
        }
    }
}
