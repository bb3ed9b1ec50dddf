//! The join's errors: each a one-line message naming what is wrong.

use crate::table::ElemType;

/// Why a join cannot run.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum JoinError {
    /// A named column is not in its table.
    #[error("{side} table `{table}` has no column `{column}`")]
    MissingColumn {
        /// `build` or `probe`.
        side: &'static str,
        /// Table name.
        table: String,
        /// Column name.
        column: String,
    },
    /// A key or payload column has a type the join does not take.
    #[error("{side} column `{column}` is {ty}; join keys and payloads are u8, u16, u32 or u64")]
    BadType {
        /// `build` or `probe`.
        side: &'static str,
        /// Column name.
        column: String,
        /// Its type.
        ty: ElemType,
    },
    /// The two key columns (or a column and the job) disagree on type.
    #[error(
        "key types differ: build `{build_column}` is {build}, probe `{probe_column}` is {probe}"
    )]
    KeyTypes {
        /// Build key column.
        build_column: String,
        /// Its type.
        build: ElemType,
        /// Probe key column.
        probe_column: String,
        /// Its type.
        probe: ElemType,
    },
    /// A column's type differs from the one the parameters were planned with.
    #[error("{side} column `{column}` is {found} but the join was planned for {planned}")]
    PlannedType {
        /// `build` or `probe`.
        side: &'static str,
        /// Column name.
        column: String,
        /// Type in the table.
        found: ElemType,
        /// Type in the parameters.
        planned: ElemType,
    },
    /// Not even the smallest table fits on chip.
    #[error("on-chip capacity of {capacity} bytes is too small for {needed} bytes (one bucket of {slots} slots of {slot_bytes} bytes plus the overflow area)")]
    CapacityTooSmall {
        /// Capacity asked for.
        capacity: u64,
        /// Smallest footprint.
        needed: u64,
        /// Slots per bucket.
        slots: u32,
        /// Bytes per slot.
        slot_bytes: u64,
    },
    /// A fixed bucket count makes a table larger than the capacity.
    #[error("2^{bits} buckets need {needed} bytes on chip but the capacity is {capacity} bytes")]
    BucketsTooMany {
        /// Bucket bits.
        bits: u32,
        /// Table footprint.
        needed: u64,
        /// Capacity.
        capacity: u64,
    },
    /// A bucket count that is not a power of two (or more than the hash can index).
    #[error("bucket count {0} is not a power of two between 1 and 2^31")]
    BucketCount(u64),
    /// Table-shape parameters out of range.
    #[error("{0}")]
    Shape(String),
    /// The overflow area ran out of slots.
    #[error("block {block}: overflow area of {slots} slots is full when inserting key {key}")]
    OverflowFull {
        /// Block index.
        block: u32,
        /// Key being inserted.
        key: u64,
        /// Overflow area size.
        slots: u32,
    },
    /// An address not on a word boundary.
    #[error("{what} base address {addr} is not a multiple of the {word_bytes}-byte word")]
    Unaligned {
        /// Which region.
        what: &'static str,
        /// The address.
        addr: u64,
        /// Word size.
        word_bytes: u64,
    },
}

/// Bucket bits of a bucket count, which must be a power of two.
pub fn bucket_bits_from_count(count: u64) -> Result<u32, JoinError> {
    if count == 0 || !count.is_power_of_two() || count > 1 << 31 {
        return Err(JoinError::BucketCount(count));
    }
    Ok(count.trailing_zeros())
}
