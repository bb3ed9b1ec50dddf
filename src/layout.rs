//! Layout and placement: how a table is split into partitions (one per engine), which
//! channel each partition lives on, and where every input and output region starts.
//!
//! Invariants:
//! - Partitions are contiguous row ranges in order; each starts on a memory-word boundary
//!   of every image cut from it (its row count before it is a multiple of the *granule*).
//! - Regions on a channel are word-aligned, lie inside the channel, and never overlap.

use std::ops::Range;

use crate::error::{Error, Result};
use crate::table::ElemType;

/// How partitions are assigned to channels.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Placement {
    /// Partition p on channel p mod C.
    Spread,
    /// Every partition on channel 0, back to back.
    Packed,
    /// Partition p on the channel at position p of the list.
    Explicit(Vec<u32>),
}

impl Placement {
    /// Parses `spread`, `packed` or a comma-separated channel list such as `0,0,1,1`.
    pub fn parse(s: &str) -> Result<Placement> {
        match s {
            "spread" => Ok(Placement::Spread),
            "packed" => Ok(Placement::Packed),
            list => list
                .split(',')
                .map(|c| {
                    c.trim().parse::<u32>().map_err(|_| {
                        Error::input(format!(
                            "placement `{s}`: expected spread, packed or a list of channel numbers"
                        ))
                    })
                })
                .collect::<Result<Vec<_>>>()
                .map(Placement::Explicit),
        }
    }

    /// The channel of every partition.
    pub fn channels(&self, partitions: u32, channels: u32) -> Result<Vec<u32>> {
        let v: Vec<u32> = match self {
            Placement::Spread => (0..partitions).map(|p| p % channels).collect(),
            Placement::Packed => vec![0; partitions as usize],
            Placement::Explicit(list) => {
                if list.len() != partitions as usize {
                    return Err(Error::input(format!(
                        "placement lists {} channels for {partitions} partitions",
                        list.len()
                    )));
                }
                list.clone()
            }
        };
        if let Some((p, c)) = v.iter().enumerate().find(|(_, &c)| c >= channels) {
            return Err(Error::input(format!(
                "placement puts partition {p} on channel {c}, but the device has {channels} channels (0..{})",
                channels - 1
            )));
        }
        Ok(v)
    }
}

/// Memory word width, validated: a multiple of 8 from 8 to 4096 bits.
pub fn word_bytes(word_bits: u32) -> Result<u64> {
    if !word_bits.is_multiple_of(8) || !(8..=4096).contains(&word_bits) {
        return Err(Error::input(format!(
            "word width {word_bits} bits: must be a multiple of 8 from 8 to 4096"
        )));
    }
    Ok(u64::from(word_bits / 8))
}

/// Checks that elements of `ty` tile a word of `word_bits` exactly.
pub fn check_elem_fits_word(ty: ElemType, word_bits: u32, what: &str) -> Result<()> {
    if !word_bits.is_multiple_of(ty.bits()) {
        return Err(Error::input(format!(
            "{what}: word width {word_bits} bits is not a multiple of the {ty} element width ({} bits)",
            ty.bits()
        )));
    }
    Ok(())
}

fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 {
        a
    } else {
        gcd(b, a % b)
    }
}

fn lcm(a: u64, b: u64) -> u64 {
    a / gcd(a, b) * b
}

/// The smallest row count that fills whole words in every image: for column-major images
/// the lcm over columns of elements per word; for a row-major record of `record_bits`
/// bits, `word_bits / gcd(word_bits, record_bits)`.
pub fn granule(word_bits: u32, column_bits: &[u32], row_major: bool) -> u64 {
    let w = u64::from(word_bits);
    if row_major {
        let r: u64 = column_bits.iter().map(|&b| u64::from(b)).sum();
        if r == 0 {
            return 1;
        }
        return w / gcd(w, r);
    }
    column_bits
        .iter()
        .fold(1, |acc, &b| lcm(acc, w / u64::from(b)))
}

/// Splits `rows` into `partitions` contiguous ranges whose starts are multiples of
/// `granule`; trailing partitions may be empty when there are too few rows.
pub fn split_rows(rows: u64, partitions: u32, granule: u64) -> Result<Vec<Range<u64>>> {
    if partitions == 0 {
        return Err(Error::input("partitions must be at least 1"));
    }
    let per = rows.div_ceil(u64::from(partitions)).div_ceil(granule) * granule;
    Ok((0..u64::from(partitions))
        .map(|p| (p * per).min(rows)..((p + 1) * per).min(rows))
        .collect())
}

/// What a region holds, as structured fields: names are never parsed back, so a table
/// called `scan` or a column called `out` cannot be mistaken for an output.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub enum RegionId {
    /// Partition `part`'s image of a table column (or `rows`, its row-major records).
    Input {
        /// Table name.
        table: String,
        /// Partition (= engine).
        part: u32,
        /// Column name, or `rows`.
        column: String,
    },
    /// The copy, on one channel, of a table every engine reads whole.
    Replica {
        /// Table name.
        table: String,
        /// Channel holding this copy.
        channel: u32,
        /// Column name, or `rows`.
        column: String,
    },
    /// An engine's output region (or count word) declared by its kernel.
    Output {
        /// Kernel name.
        kernel: String,
        /// Engine.
        engine: u32,
        /// Region name within the engine (`out`, `count`, …).
        name: String,
    },
}

impl RegionId {
    /// True for input images (partitions and replicas).
    pub fn is_input(&self) -> bool {
        !matches!(self, RegionId::Output { .. })
    }
}

impl std::fmt::Display for RegionId {
    /// The file-name form: `readings.p0.v`, `registry.c1.key`, `scan.p0.out`.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            RegionId::Input {
                table,
                part,
                column,
            } => write!(f, "{table}.p{part}.{column}"),
            RegionId::Replica {
                table,
                channel,
                column,
            } => write!(f, "{table}.c{channel}.{column}"),
            RegionId::Output {
                kernel,
                engine,
                name,
            } => write!(f, "{kernel}.p{engine}.{name}"),
        }
    }
}

/// One placed region of device memory.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Placed {
    /// What the region holds.
    pub id: RegionId,
    /// Channel the region lives on.
    pub channel: u32,
    /// Byte address of the first byte on the channel.
    pub base: u64,
    /// Bytes reserved.
    pub bytes: u64,
    /// Words reserved.
    pub words: u64,
}

impl Placed {
    /// Word address of the base.
    pub fn word_addr(&self, word_bytes: u64) -> u64 {
        self.base / word_bytes
    }
}

/// A word-aligned bump allocator per channel: the memory map of a run.
#[derive(Debug, Clone)]
pub struct MemoryMap {
    word_bytes: u64,
    channel_bytes: u64,
    next: Vec<u64>,
    regions: Vec<Placed>,
}

impl MemoryMap {
    /// An empty map for `channels` channels of `channel_bytes` bytes each.
    pub fn new(word_bytes: u64, channels: u32, channel_bytes: u64) -> Result<MemoryMap> {
        if channels == 0 {
            return Err(Error::input("channels must be at least 1"));
        }
        if !channel_bytes.is_multiple_of(word_bytes) {
            return Err(Error::input(format!(
                "channel size {channel_bytes} bytes (channel_mib) is not a whole number of {word_bytes}-byte words (word_bits)"
            )));
        }
        Ok(MemoryMap {
            word_bytes,
            channel_bytes,
            next: vec![0; channels as usize],
            regions: Vec::new(),
        })
    }

    /// Places `bytes` bytes for `id` on `channel` after everything already there.
    pub fn place(&mut self, id: RegionId, channel: u32, bytes: u64) -> Result<&Placed> {
        if self.get(&id).is_some() {
            return Err(Error::input(format!("region `{id}` is declared twice")));
        }
        let name = &id;
        let next = self.next.get_mut(channel as usize).ok_or_else(|| {
            Error::input(format!("region `{name}`: channel {channel} does not exist"))
        })?;
        let words = bytes.div_ceil(self.word_bytes);
        let base = *next;
        let end = words
            .checked_mul(self.word_bytes)
            .and_then(|b| b.checked_add(base));
        if end.is_none_or(|e| e > self.channel_bytes) {
            return Err(Error::input(format!(
                "region `{name}` ({bytes} bytes) does not fit channel {channel}: {} of {} bytes are free",
                self.channel_bytes - base,
                self.channel_bytes
            )));
        }
        *next = end.expect("checked above");
        self.regions.push(Placed {
            id,
            channel,
            base,
            bytes,
            words,
        });
        Ok(self.regions.last().expect("just pushed"))
    }

    /// Every region, in placement order.
    pub fn regions(&self) -> &[Placed] {
        &self.regions
    }

    /// The region holding `id`.
    pub fn get(&self, id: &RegionId) -> Option<&Placed> {
        self.regions.iter().find(|r| r.id == *id)
    }

    /// Bytes of one memory word.
    pub fn word_bytes(&self) -> u64 {
        self.word_bytes
    }

    /// Bytes of one channel.
    pub fn channel_bytes(&self) -> u64 {
        self.channel_bytes
    }

    /// Number of channels.
    pub fn channels(&self) -> u32 {
        self.next.len() as u32
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn granules() {
        // 512-bit words: 16 u32 or 64 u8 per word; lcm 64 (common practice).
        assert_eq!(granule(512, &[32, 8], false), 64);
        assert_eq!(granule(512, &[1], false), 512);
        // A 96-bit record in 512-bit words: 16 records = 3 words.
        assert_eq!(granule(512, &[32, 64], true), 16);
    }

    #[test]
    fn split_is_contiguous_and_aligned() {
        let parts = split_rows(1000, 3, 16).unwrap();
        assert_eq!(parts, vec![0..336, 336..672, 672..1000]);
        let parts = split_rows(10, 4, 16).unwrap();
        assert_eq!(parts, vec![0..10, 10..10, 10..10, 10..10]);
        assert!(split_rows(10, 0, 16).is_err());
    }

    #[test]
    fn overflow_names_region_and_capacity() {
        let mut m = MemoryMap::new(64, 1, 1024).unwrap();
        let input = |part: u32| RegionId::Input {
            table: "t".into(),
            part,
            column: "v".into(),
        };
        m.place(input(0), 0, 1000).unwrap();
        let e = m.place(input(1), 0, 100).unwrap_err().to_string();
        assert_eq!(
            e,
            "region `t.p1.v` (100 bytes) does not fit channel 0: 0 of 1024 bytes are free"
        );
    }

    #[test]
    fn placements() {
        assert_eq!(
            Placement::Spread.channels(5, 2).unwrap(),
            vec![0, 1, 0, 1, 0]
        );
        assert_eq!(Placement::Packed.channels(3, 4).unwrap(), vec![0, 0, 0]);
        assert!(Placement::parse("0,7").unwrap().channels(2, 4).is_err());
        assert!(Placement::parse("0,1").unwrap().channels(3, 4).is_err());
        assert!(word_bytes(500).is_err() && word_bytes(4104).is_err() && word_bytes(0).is_err());
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn regions_never_overlap(sizes in proptest::collection::vec((0u32..4, 0u64..5000), 1..40),
                                 wb in prop::sample::select(vec![1u64, 8, 64, 128])) {
            let mut m = MemoryMap::new(wb, 4, 1 << 20).unwrap();
            for (i, (ch, b)) in sizes.iter().enumerate() {
                let id = RegionId::Output { kernel: "k".into(), engine: i as u32, name: "r".into() };
                m.place(id, *ch, *b).unwrap();
            }
            let r = m.regions();
            for (i, a) in r.iter().enumerate() {
                prop_assert_eq!(a.base % wb, 0);
                prop_assert!(a.base + a.words * wb <= m.channel_bytes());
                for b in &r[i + 1..] {
                    if a.channel == b.channel && a.words > 0 && b.words > 0 {
                        prop_assert!(a.base + a.words * wb <= b.base || b.base + b.words * wb <= a.base);
                    }
                }
            }
        }

        #[test]
        fn split_covers_rows(rows in 0u64..100_000, parts in 1u32..20, g in prop::sample::select(vec![1u64, 16, 64, 512])) {
            let s = split_rows(rows, parts, g).unwrap();
            prop_assert_eq!(s.len(), parts as usize);
            prop_assert_eq!(s[0].start, 0);
            prop_assert_eq!(s.last().unwrap().end, rows);
            for w in s.windows(2) {
                prop_assert_eq!(w[0].end, w[1].start);
            }
            for r in &s {
                prop_assert!(r.start % g == 0 || r.start == rows);
            }
        }
    }
}
