//! Capacity blocking: the slot format, the table footprint, and the cut of the build
//! table into the fewest blocks whose tables fit on chip.
//!
//! ```text
//!   build rows  [ block 0 | block 1 | ... | block B-1 ]   rows_per_block each (last shorter)
//!   on chip     [ 2^k buckets × slots | overflow area ]   footprint ≤ capacity
//! ```
//!
//! Invariant: every block has at most `rows_per_block` rows, `rows_per_block` never
//! exceeds the table's bucket slots, and the footprint counts every slot.

use serde::Serialize;

use super::error::JoinError;
use super::params::{Buckets, JoinParams, Overflow};
use crate::table::ElemType;

/// Bytes of a slot's header word: bit 0 valid, bits 1..=31 the overflow link.
pub const SLOT_HEADER_BYTES: u64 = 4;

/// The largest bucket bits a plan uses.
pub const MAX_BUCKET_BITS: u32 = 31;

/// The byte layout of one table slot, little-endian:
/// `[header u32][key: key bytes][payload: payload bytes]`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct SlotFormat {
    /// Bytes of the key (4 or 8).
    pub key_bytes: u64,
    /// Bytes of the payload (4 or 8).
    pub payload_bytes: u64,
}

impl SlotFormat {
    /// The format for the given key and payload types.
    pub fn new(key: ElemType, payload: ElemType) -> SlotFormat {
        SlotFormat {
            key_bytes: u64::from(key.bits() / 8),
            payload_bytes: u64::from(payload.bits() / 8),
        }
    }

    /// Bytes of one slot.
    pub fn slot_bytes(&self) -> u64 {
        SLOT_HEADER_BYTES + self.key_bytes + self.payload_bytes
    }
}

/// How the build table is cut into blocks.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BlockPlan {
    /// Slot layout.
    pub slot: SlotFormat,
    /// Bucket bits k (2^k buckets).
    pub bucket_bits: u32,
    /// Slots per bucket.
    pub slots_per_bucket: u32,
    /// Overflow-area slots (0 under linear probing).
    pub overflow_slots: u32,
    /// On-chip bytes of one block's table, every slot counted.
    pub footprint_bytes: u64,
    /// Most build rows in one block.
    pub rows_per_block: u64,
    /// Build row range of each block.
    pub blocks: Vec<std::ops::Range<u64>>,
}

impl BlockPlan {
    /// Slots in the buckets (not counting the overflow area).
    pub fn bucket_slots(&self) -> u64 {
        (1u64 << self.bucket_bits) * u64::from(self.slots_per_bucket)
    }
}

fn footprint(bits: u32, p: &JoinParams, overflow: u32, slot_bytes: u64) -> u64 {
    ((1u64 << bits) * u64::from(p.slots_per_bucket) + u64::from(overflow)) * slot_bytes
}

fn check_type(ty: ElemType, what: &str) -> Result<(), JoinError> {
    match ty {
        ElemType::U32 | ElemType::U64 => Ok(()),
        t => Err(JoinError::Shape(format!(
            "{what} type {t}: the join computes with u32 or u64 (narrower columns are widened to u32)"
        ))),
    }
}

/// Cuts `build_rows` rows into the fewest blocks whose tables fit `capacity_bytes`.
pub fn plan_blocks(build_rows: u64, p: &JoinParams) -> Result<BlockPlan, JoinError> {
    check_type(p.key_type, "key")?;
    check_type(p.build_payload_type, "build payload")?;
    if p.slots_per_bucket == 0 {
        return Err(JoinError::Shape(
            "slots per bucket must be at least 1".into(),
        ));
    }
    let slot = SlotFormat::new(p.key_type, p.build_payload_type);
    let sb = slot.slot_bytes();
    let overflow = match p.overflow {
        Overflow::Linear => 0,
        Overflow::Area(n) if n >= 1 << 31 => {
            return Err(JoinError::Shape(format!(
                "overflow area of {n} slots: the 31-bit link addresses fewer"
            )))
        }
        Overflow::Area(n) => n,
    };
    let width = p.hash.width(p.key_type.bits());
    let max_bits = MAX_BUCKET_BITS.min(width);
    let min_fp = footprint(0, p, overflow, sb);
    if min_fp > p.capacity_bytes {
        return Err(JoinError::CapacityTooSmall {
            capacity: p.capacity_bytes,
            needed: min_fp,
            slots: p.slots_per_bucket,
            slot_bytes: sb,
        });
    }
    let spb = u64::from(p.slots_per_bucket);
    let (bits, rows_per_block) = match p.buckets {
        Buckets::Bits(k) => {
            if k > max_bits {
                return Err(JoinError::Shape(format!(
                    "2^{k} buckets: the {width}-bit hash indexes at most 2^{max_bits}"
                )));
            }
            let fp = footprint(k, p, overflow, sb);
            if fp > p.capacity_bytes {
                return Err(JoinError::BucketsTooMany {
                    bits: k,
                    needed: fp,
                    capacity: p.capacity_bytes,
                });
            }
            (k, (1u64 << k) * spb)
        }
        Buckets::LoadFactor(f) => {
            if f.is_nan() || f <= 0.0 || f > 1.0 {
                return Err(JoinError::Shape(format!(
                    "load factor {f} must be in (0, 1]"
                )));
            }
            let held = |k: u32| (((1u64 << k) * spb) as f64 * f).floor().max(1.0) as u64;
            let fits = |k: u32| footprint(k, p, overflow, sb) <= p.capacity_bytes;
            // The smallest table that holds everything in one block, else the largest
            // that fits (the fewest blocks).
            let mut k = 0;
            while k < max_bits && fits(k + 1) && held(k) < build_rows {
                k += 1;
            }
            (k, held(k))
        }
    };
    let nblocks = build_rows.div_ceil(rows_per_block);
    // Even blocks: the same count, none longer than it must be.
    let per = if nblocks == 0 {
        rows_per_block
    } else {
        build_rows.div_ceil(nblocks)
    };
    let blocks = (0..nblocks)
        .map(|b| b * per..((b + 1) * per).min(build_rows))
        .collect();
    Ok(BlockPlan {
        slot,
        bucket_bits: bits,
        slots_per_bucket: p.slots_per_bucket,
        overflow_slots: overflow,
        footprint_bytes: footprint(bits, p, overflow, sb),
        rows_per_block: per,
        blocks,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params(cap: u64) -> JoinParams {
        let mut p = JoinParams::new(ElemType::U64, ElemType::U64);
        p.capacity_bytes = cap;
        p
    }

    #[test]
    fn one_block_when_it_fits() {
        let plan = plan_blocks(1000, &params(1 << 20)).unwrap();
        assert_eq!(plan.blocks, vec![0..1000]);
        // 1000 rows at load 0.5 with 4 slots: 2^9 buckets hold 1024 (2^8 hold 512).
        assert_eq!(plan.bucket_bits, 9);
        assert_eq!(plan.footprint_bytes, 512 * 4 * 20);
        assert!(plan.footprint_bytes <= 1 << 20);
    }

    #[test]
    fn fewest_blocks_when_it_does_not() {
        // 20-byte slots, 4 per bucket: 2^7 buckets = 10240 bytes fit 16 KiB, hold 256 rows.
        let plan = plan_blocks(1000, &params(16 << 10)).unwrap();
        assert_eq!(plan.bucket_bits, 7);
        assert_eq!(plan.blocks.len(), 4);
        assert_eq!(plan.rows_per_block, 250);
        assert_eq!(plan.blocks[3], 750..1000);
    }

    #[test]
    fn too_small_and_bad_shapes() {
        assert!(matches!(
            plan_blocks(10, &params(79)),
            Err(JoinError::CapacityTooSmall { needed: 80, .. })
        ));
        let mut p = params(1 << 10);
        p.buckets = Buckets::Bits(10);
        assert!(matches!(
            plan_blocks(10, &p),
            Err(JoinError::BucketsTooMany { .. })
        ));
        assert_eq!(plan_blocks(0, &params(1 << 10)).unwrap().blocks.len(), 0);
        assert!(super::super::error::bucket_bits_from_count(12).is_err());
        assert_eq!(super::super::error::bucket_bits_from_count(16), Ok(4));
    }
}
