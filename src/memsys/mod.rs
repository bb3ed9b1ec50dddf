//! The memory-system model: device descriptions and presets, the bottleneck model over a
//! ledger, placement what-ifs, sweeps, and a device's own counters read as a ledger.
//!
//! ```text
//!   ledger.json ─► ledger_file ─► Ledger ─► placement::remap? ─► model::evaluate ─► Plan
//!   device.toml / preset ─► device::Device ─────────────────────────┘
//!   counters.csv ─► measured ─► Ledger ─► beside golden and Plan
//!   [(series, engines, Ledger)] ─► sweep ─► CSV rows + Chart
//! ```
//!
//! It reads ledgers only and never imports a kernel, so it serves every kernel and a
//! device's own counters alike. Every figure is a first-order bandwidth bound, not a timing
//! sign-off.

pub mod device;
pub mod ledger_file;
pub mod measured;
pub mod model;
pub mod placement;
pub mod presets;
pub mod sweep;

pub use device::Device;
pub use model::{evaluate, Plan, Resource, BOUND_NOTE};
