//! The hardware-shaped ("mirror") hash table: what an engine's on-chip memory holds after
//! a block's build, built one tuple at a time in build order, and probed the way the
//! engine probes it. It gives the golden result and counts on-chip words.
//!
//! ```text
//!   slot i at byte i × slot_bytes:   [header u32 | key | payload]   (little-endian)
//!   header: bit 0 valid, bits 1..=31 link = overflow slot index + 1 (0: none)
//!
//!   [bucket 0: slot 0 .. slot s-1][bucket 1] ... [bucket 2^k-1][overflow 0 .. N-1]
//! ```
//!
//! Linear probing: a full bucket sends the tuple to the next bucket (wrapping); a probe
//! reads buckets until one with a free slot. Overflow area: a full bucket sends the
//! tuple to the next free overflow slot, appended to the bucket's chain (head link in the
//! bucket's last slot; the builder keeps a tail register per bucket, so an insert reads
//! one bucket and writes at most two slots); a probe reads the bucket, then the chain.
//! Tuples of one key are met in build order either way (no deletions, free slots are a
//! bucket's suffix, chains append). Clearing valid bits between blocks is a reset, not
//! memory traffic.

use serde::Serialize;

use super::block::{BlockPlan, SlotFormat};
use super::error::JoinError;
use super::hash::{bucket_of, BucketPick, HashFn};
use super::params::JoinParams;
use crate::ledger::{words_touched, Traffic};

const VALID: u32 = 1;

#[derive(Debug, Clone, Copy, Default)]
struct Slot {
    header: u32,
    key: u64,
    payload: u64,
}

impl Slot {
    fn valid(&self) -> bool {
        self.header & VALID != 0
    }
    fn link(&self) -> u32 {
        self.header >> 1
    }
}

/// Build statistics of one block's table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BlockStats {
    /// Block index.
    pub block: u32,
    /// Tuples built.
    pub rows: u64,
    /// Bucket bits.
    pub bucket_bits: u32,
    /// Tuples per bucket slot (overflow area not counted).
    pub load_factor: f64,
    /// `occupancy[j]` = buckets holding exactly `j` tuples in their own slots.
    pub occupancy: Vec<u64>,
    /// The most table entries (buckets, then overflow slots) a probe reads.
    pub longest_probe: u32,
    /// Tuples not stored in their home bucket.
    pub overflowed: u64,
    /// On-chip bytes of the table (every slot).
    pub footprint_bytes: u64,
    /// Whether the table fits the capacity.
    pub fits: bool,
}

/// One block's on-chip table.
pub struct MirrorTable {
    slots: Vec<Slot>,
    tails: Vec<u32>,
    format: SlotFormat,
    hash: HashFn,
    pick: BucketPick,
    width: u32,
    key_bits: u32,
    bits: u32,
    per_bucket: usize,
    bucket_count: usize,
    overflow_slots: u32,
    next_overflow: u32,
    word_bytes: u64,
    overflowed: u64,
}

impl MirrorTable {
    /// An empty table of the plan's shape, with on-chip words of `word_bytes`.
    pub fn new(plan: &BlockPlan, p: &JoinParams, word_bytes: u64) -> MirrorTable {
        let buckets = 1usize << plan.bucket_bits;
        let per = plan.slots_per_bucket as usize;
        let n = buckets * per + plan.overflow_slots as usize;
        MirrorTable {
            slots: {
                let mut v = crate::kernels::hints::huge_vec(n);
                v.resize(n, Slot::default());
                v
            },
            tails: if plan.overflow_slots > 0 {
                vec![0; buckets]
            } else {
                Vec::new()
            },
            format: plan.slot,
            hash: p.hash,
            pick: p.pick,
            width: p.hash.width(p.key_type.bits()),
            key_bits: p.key_type.bits(),
            bits: plan.bucket_bits,
            per_bucket: per,
            bucket_count: buckets,
            overflow_slots: plan.overflow_slots,
            next_overflow: 0,
            word_bytes,
            overflowed: 0,
        }
    }

    #[inline]
    fn home(&self, key: u64) -> usize {
        bucket_of(
            self.hash.hash(key, self.key_bits),
            self.width,
            self.bits,
            self.pick,
        ) as usize
    }

    #[inline]
    fn words(&self, first_slot: usize, slots: usize) -> u64 {
        let sb = self.format.slot_bytes();
        words_touched(first_slot as u64 * sb, slots as u64 * sb, self.word_bytes)
    }

    /// Inserts one tuple of block `block`, counting on-chip reads and writes.
    pub fn insert(
        &mut self,
        key: u64,
        payload: u64,
        block: u32,
        read: &mut Traffic,
        write: &mut Traffic,
    ) -> Result<(), JoinError> {
        let per = self.per_bucket;
        let home = self.home(key);
        let filled = Slot {
            header: VALID,
            key,
            payload,
        };
        let sb = self.format.slot_bytes();
        let mut b = home;
        for _ in 0..self.bucket_count {
            read.words += self.words(b * per, per);
            read.bytes += per as u64 * sb;
            if let Some(j) = (0..per).find(|&j| !self.slots[b * per + j].valid()) {
                self.slots[b * per + j] = filled;
                self.count_write(b * per + j, sb, write);
                self.overflowed += u64::from(b != home);
                return Ok(());
            }
            if !self.tails.is_empty() {
                return self.insert_overflow(home, filled, block, write);
            }
            b = (b + 1) % self.bucket_count;
        }
        // Unreachable under a plan (a block never has more rows than bucket slots).
        Err(JoinError::Shape(format!(
            "block {block}: table full when inserting key {key}"
        )))
    }

    fn count_write(&self, slot: usize, bytes: u64, write: &mut Traffic) {
        let addr = slot as u64 * self.format.slot_bytes();
        write.words += words_touched(addr, bytes, self.word_bytes);
        write.bytes += bytes;
        write.rows += u64::from(bytes > super::block::SLOT_HEADER_BYTES);
    }

    fn insert_overflow(
        &mut self,
        home: usize,
        filled: Slot,
        block: u32,
        write: &mut Traffic,
    ) -> Result<(), JoinError> {
        if self.next_overflow == self.overflow_slots {
            return Err(JoinError::OverflowFull {
                block,
                key: filled.key,
                slots: self.overflow_slots,
            });
        }
        let base = self.bucket_count * self.per_bucket;
        let j = self.next_overflow;
        self.next_overflow += 1;
        let idx = base + j as usize;
        self.slots[idx] = filled;
        self.count_write(idx, self.format.slot_bytes(), write);
        // Link from the chain's tail: the bucket's last slot, or the last overflow slot.
        let tail = match self.tails[home] {
            0 => home * self.per_bucket + self.per_bucket - 1,
            t => base + t as usize - 1,
        };
        self.slots[tail].header |= (j + 1) << 1;
        self.count_write(tail, super::block::SLOT_HEADER_BYTES, write);
        self.tails[home] = j + 1;
        self.overflowed += 1;
        Ok(())
    }

    /// Hints the cache to fetch the home bucket of `key`, for a probe soon after.
    #[inline]
    pub fn prefetch(&self, key: u64) {
        let first = self.home(key) * self.per_bucket;
        crate::kernels::hints::prefetch(&self.slots, first);
        crate::kernels::hints::prefetch(&self.slots, first + self.per_bucket - 1);
    }

    /// Calls `hit(payload)` for every tuple with key `key`, in build order, and counts the
    /// on-chip words read into `read`.
    #[inline]
    pub fn probe(&self, key: u64, read: &mut Traffic, mut hit: impl FnMut(u64)) {
        let per = self.per_bucket;
        let mut b = self.home(key);
        for _ in 0..self.bucket_count {
            read.words += self.words(b * per, per);
            read.bytes += per as u64 * self.format.slot_bytes();
            let bucket = &self.slots[b * per..(b + 1) * per];
            let mut free = false;
            for s in bucket {
                if !s.valid() {
                    free = true;
                    break;
                }
                if s.key == key {
                    hit(s.payload);
                }
            }
            if !self.tails.is_empty() {
                let base = self.bucket_count * per;
                let mut link = bucket[per - 1].link();
                while link != 0 {
                    let s = &self.slots[base + link as usize - 1];
                    read.words += self.words(base + link as usize - 1, 1);
                    read.bytes += self.format.slot_bytes();
                    if s.key == key {
                        hit(s.payload);
                    }
                    link = s.link();
                }
                return;
            }
            if free {
                return;
            }
            b = (b + 1) % self.bucket_count;
        }
    }

    /// Entries a probe starting at bucket `b` reads.
    fn probe_len(&self, b: usize) -> u32 {
        let per = self.per_bucket;
        let full = |b: usize| self.slots[b * per..(b + 1) * per].iter().all(Slot::valid);
        if !self.tails.is_empty() {
            let mut n = 1;
            let mut link = self.slots[b * per + per - 1].link();
            while link != 0 {
                n += 1;
                link = self.slots[self.bucket_count * per + link as usize - 1].link();
            }
            return n;
        }
        let mut n = 1;
        let mut c = b;
        while full(c) && (n as usize) < self.bucket_count {
            n += 1;
            c = (c + 1) % self.bucket_count;
        }
        n
    }

    /// Statistics of the built table.
    pub fn stats(&self, block: u32, rows: u64, plan: &BlockPlan, capacity: u64) -> BlockStats {
        let per = self.per_bucket;
        let mut occupancy = vec![0u64; per + 1];
        let mut longest = 0;
        for b in 0..self.bucket_count {
            let used = self.slots[b * per..(b + 1) * per]
                .iter()
                .filter(|s| s.valid())
                .count();
            occupancy[used] += 1;
            longest = longest.max(self.probe_len(b));
        }
        BlockStats {
            block,
            rows,
            bucket_bits: self.bits,
            load_factor: rows as f64 / plan.bucket_slots() as f64,
            occupancy,
            longest_probe: longest,
            overflowed: self.overflowed,
            footprint_bytes: plan.footprint_bytes,
            fits: plan.footprint_bytes <= capacity,
        }
    }

    /// The on-chip memory image: every slot in slot order, in the documented format.
    pub fn image(&self) -> Vec<u8> {
        let f = self.format;
        let mut out = Vec::with_capacity(self.slots.len() * f.slot_bytes() as usize);
        for s in &self.slots {
            out.extend_from_slice(&s.header.to_le_bytes());
            out.extend_from_slice(&s.key.to_le_bytes()[..f.key_bytes as usize]);
            out.extend_from_slice(&s.payload.to_le_bytes()[..f.payload_bytes as usize]);
        }
        out
    }
}
