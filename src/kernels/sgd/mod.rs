//! Minibatch linear SGD: squared, logistic and hinge loss over a dense n × d dataset, in
//! an `f64` reference mode, an `f32` mode with a stated accumulation order, and bit-true
//! fixed point; the float modes may stream the features as k-bit codes (`quant`); E
//! engines (independent sweeps or data-parallel averaging) and block-wise training when
//! the dataset exceeds a device capacity.
//!
//! ```text
//!   SgdData (n×d f32 + labels) ─► engine e ─► epoch ─► minibatch ─► sample
//!        │ record image                 │        │        │ z = w·x + b (tree order)
//!        ▼                              │        │        └ g = ℓ'(z, y); G += g·x
//!   device memory ──(Cursor)──► ledger  │        └ w ← w − (η_t/B)·G − η_t·λ·w
//!                                       └ snapshots, loss per epoch, overflow counts
//! ```
//!
//! Invariants: every result depends only on the data and the parameters, never on the
//! thread count (engines run in parallel and are collected in index order; inside an
//! engine everything is sequential in a fixed order). A diverging run is an error naming
//! its epoch, never a model holding NaN.

mod engine;
pub mod fixed;
mod keys;
pub mod lfsr;
pub mod loss;
pub mod naive;
mod params;
mod pass;
mod plan;
pub mod quant;
pub mod real;
mod record;
pub mod tree;
mod wide;

pub use engine::{train, train_engine, train_on, train_validated};
pub use fixed::{FixedSpec, Overflow, Rounding};
pub use keys::{OneOrEach, QuantKeys, SgdConfig, SgdKernel};
pub use loss::Loss;
pub use params::{
    validate, EngineMode, Hyper, Model, ModelElem, Numeric, Order, OverflowCounts, SgdData,
    SgdEngineResult, SgdError, SgdIo, SgdParams, Step,
};
pub use quant::{Outside, Quant, Quantised};
pub use record::record_bytes;

/// Ledger phase of epoch `e`.
pub fn epoch_phase(e: u32) -> crate::ledger::Phase {
    crate::ledger::Phase::nth("epoch", e)
}
