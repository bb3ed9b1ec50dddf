//! What a join job asks for: hash, table shape, capacity, variant and output fields, and
//! where the engine's data lives. Plain data, filled in by whoever reads the job.

use serde::Serialize;

use super::hash::{BucketPick, HashFn};
use crate::table::ElemType;

/// How many buckets the on-chip table has.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum Buckets {
    /// Exactly `2^k` buckets; a block holds at most `2^k × slots` tuples.
    Bits(u32),
    /// The fewest buckets (a power of two) that keep each block's load factor (tuples
    /// per bucket slot) at or below this value, and that fit the capacity.
    LoadFactor(f64),
}

/// Where a tuple goes when its home bucket is full.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Overflow {
    /// Linear probing: the next bucket (wrapping), then the next.
    Linear,
    /// A separate area of this many slots after the buckets, chained by links.
    Area(u32),
}

/// One field of an inner-join output record.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum OutField {
    /// The probe row's id (`probe_row_start` + row within the partition), `u64`.
    ProbeRowId,
    /// The join key (the probe key column's type).
    Key,
    /// The probe row's payload.
    ProbePayload,
    /// The build row's payload.
    BuildPayload,
}

impl OutField {
    /// The field's name in record layouts.
    pub fn name(self) -> &'static str {
        match self {
            OutField::ProbeRowId => "probe_row",
            OutField::Key => "key",
            OutField::ProbePayload => "probe_payload",
            OutField::BuildPayload => "build_payload",
        }
    }
}

/// What the join produces.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub enum Variant {
    /// One record per matching (probe row, build row) pair: the listed fields, packed
    /// little-endian in list order.
    Inner(Vec<OutField>),
    /// One `u64` probe row id per probe row with at least one partner.
    Semi,
    /// A single `u64` record: the number of matching pairs.
    Count,
}

/// Join parameters shared by every engine.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct JoinParams {
    /// Hash function.
    pub hash: HashFn,
    /// Bucket count rule.
    pub buckets: Buckets,
    /// Which hash bits index the bucket.
    pub pick: BucketPick,
    /// Slots per bucket (≥ 1).
    pub slots_per_bucket: u32,
    /// Overflow rule.
    pub overflow: Overflow,
    /// On-chip bytes per engine available to the table.
    pub capacity_bytes: u64,
    /// Output variant.
    pub variant: Variant,
    /// One engine reads each build block and broadcasts it to all engines' tables
    /// (`true`), or every engine reads its own replica (`false`).
    pub broadcast_build: bool,
    /// The probe partition comes over the host link before the join (a `load` phase).
    pub probe_from_host: bool,
    /// The output goes back over the host link after the join (a `copyback` phase).
    pub copyback: bool,
    /// Build (S) key column name.
    pub build_key: String,
    /// Build payload column name.
    pub build_payload: String,
    /// Probe (L) key column name.
    pub probe_key: String,
    /// Probe payload column name.
    pub probe_payload: String,
    /// Key type (`u32` or `u64`), the same on both sides.
    pub key_type: ElemType,
    /// Build payload type (`u32` or `u64`).
    pub build_payload_type: ElemType,
}

impl JoinParams {
    /// Defaults for a build table with the given key and payload types: Fibonacci hash,
    /// top bits, 4 slots per bucket, load factor 0.5, linear probing, 4 MiB on chip,
    /// inner join emitting (probe row id, build payload), one replica per engine.
    pub fn new(key_type: ElemType, build_payload_type: ElemType) -> JoinParams {
        JoinParams {
            hash: HashFn::Fibonacci,
            buckets: Buckets::LoadFactor(0.5),
            pick: BucketPick::Top,
            slots_per_bucket: 4,
            overflow: Overflow::Linear,
            capacity_bytes: 4 << 20,
            variant: Variant::Inner(vec![OutField::ProbeRowId, OutField::BuildPayload]),
            broadcast_build: false,
            probe_from_host: false,
            copyback: false,
            build_key: "key".into(),
            build_payload: "payload".into(),
            probe_key: "key".into(),
            probe_payload: "payload".into(),
            key_type,
            build_payload_type,
        }
    }

    /// Does the probe side read its payload column?
    pub fn reads_probe_payload(&self) -> bool {
        matches!(&self.variant, Variant::Inner(f) if f.contains(&OutField::ProbePayload))
    }
}

/// Where one engine's data lives, for the ledger. Every base is a byte address on its
/// channel and must be a multiple of `word_bytes`.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct JoinIo {
    /// Engine index.
    pub engine: u32,
    /// Bytes per memory word (device and on-chip), a power of two.
    pub word_bytes: u64,
    /// Channel of the build image this engine reads (its replica, or the shared one).
    pub build_channel: u32,
    /// Base of the whole build key column image.
    pub build_key_base: u64,
    /// Base of the whole build payload column image.
    pub build_payload_base: u64,
    /// Channel of this engine's probe partition.
    pub probe_channel: u32,
    /// Base of the partition's probe key column image.
    pub probe_key_base: u64,
    /// Base of the partition's probe payload column image.
    pub probe_payload_base: u64,
    /// Channel of this engine's output region.
    pub out_channel: u32,
    /// Base of this engine's output region.
    pub out_base: u64,
    /// Keep each block's on-chip table image in the result.
    pub images: bool,
}

impl JoinIo {
    /// An engine whose regions all start at address 0 of channel 0 with 512-bit words,
    /// for host benchmarks where no device layout exists.
    pub fn host() -> JoinIo {
        JoinIo {
            engine: 0,
            word_bytes: 64,
            build_channel: 0,
            build_key_base: 0,
            build_payload_base: 0,
            probe_channel: 0,
            probe_key_base: 0,
            probe_payload_base: 0,
            out_channel: 0,
            out_base: 0,
            images: false,
        }
    }
}
