//! weir: golden memory images, byte ledgers and a fast CPU baseline for data-analytics
//! accelerator kernels (predicate scan, hash join, linear SGD).
//!
//! The library does the work; the `weir` binary is a thin layer over it. See DEVELOPERS.md
//! for the rooms of the house and the data path between them.

#![deny(unsafe_op_in_unsafe_fn)]

pub mod alloc;
pub mod bench;
pub mod check;
pub mod error;
pub mod fuzzing;
pub mod gen;
pub mod image;
pub mod job;
pub mod kernels;
pub mod layout;
pub mod ledger;
pub mod manifest;
pub mod memmap;
pub mod memsys;
pub mod npy;
pub mod plot;
pub mod report;
pub mod table;
pub mod tables;

pub use error::{Error, ErrorKind, Result};

/// Every program that links weir allocates through [`alloc::Placed`].
#[global_allocator]
static ALLOCATOR: alloc::Placed = alloc::Placed;
