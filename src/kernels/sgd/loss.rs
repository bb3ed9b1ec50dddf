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

    /// `acc + ℓ(z₀, y₀) + ℓ(z₁, y₁) + …`, one `f64` sum per term in order. The loss is
    /// chosen once for all the terms, and the sum is a call of its own, so the running sum
    /// stays in a register (inlined into a large pass it was kept in memory, a store and a
    /// reload on every term's dependency chain).
    #[inline(never)]
    pub fn add_values(self, acc: f64, z: &[f64], y: impl Iterator<Item = f64>) -> f64 {
        fn fold(
            acc: f64,
            z: &[f64],
            y: impl Iterator<Item = f64>,
            f: impl Fn(f64, f64) -> f64,
        ) -> f64 {
            z.iter().zip(y).fold(acc, |a, (&z, y)| a + f(z, y))
        }
        match self {
            Loss::Squared => fold(acc, z, y, |z, y| Loss::Squared.value(z, y)),
            Loss::Logistic => fold(acc, z, y, |z, y| Loss::Logistic.value(z, y)),
            Loss::Hinge => fold(acc, z, y, |z, y| Loss::Hinge.value(z, y)),
        }
    }

    /// ∂ℓ/∂z in the arithmetic of `T`: σ(z) = 1 / (1 + e^−z) with `exp` from libm in `f64`,
    /// rounded once to `T`; the subtraction is done in `T`.
    #[inline]
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
