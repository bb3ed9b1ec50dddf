//! The join's input pair: a build table S(key, payload) and a probe table L(key,
//! payload), with S keys unique or duplicated, a requested match rate, and uniform or
//! Zipf-skewed probe keys.
//!
//! ```text
//!   distinct key index d ──bijection──► key   (d < D: in S;  d ≥ D: never in S)
//!   S: each d repeated count(d) times (1, a fixed count, or geometric), in d order
//!   L row r: with probability `match_rate` a key of S (uniform or Zipf over d < D),
//!            else key(D + uniform index): a key no S row has
//! ```
//!
//! Every value comes from the [`Stream`] of its (seed, table, column, block), so a probe
//! row range gives the same bytes however the probe table is partitioned or threaded.
//! Keys stay below 2^63 (u64) or 2^32 (u32).

use rayon::prelude::*;

use super::rng::{Stream, Zipf, BLOCK_ROWS};
use crate::kernels::join::hash::fmix32;
use crate::table::{Column, ColumnData, ElemType, Table};

/// How many S rows share a key.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Dup {
    /// Every key once.
    Unique,
    /// Every key this many times (the last key fewer if |S| is not a multiple).
    Fixed(u32),
    /// Geometric counts (≥ 1) with this mean (≥ 1).
    Geometric(f64),
}

/// Probe key skew over the build keys.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum KeySkew {
    /// Every build key equally likely.
    Uniform,
    /// Zipf with exponent θ over build keys in generation order.
    Zipf(f64),
}

/// A join input generator.
#[derive(Debug, Clone, PartialEq)]
pub struct JoinGen {
    /// Seed.
    pub seed: u64,
    /// |S|.
    pub build_rows: u64,
    /// |L|.
    pub probe_rows: u64,
    /// Key type (u32 or u64), both sides.
    pub key_type: ElemType,
    /// Payload type (u32 or u64), both sides.
    pub payload_type: ElemType,
    /// Duplicate keys in S.
    pub dup: Dup,
    /// Requested fraction of L rows with a partner.
    pub match_rate: f64,
    /// L key skew.
    pub skew: KeySkew,
}

/// The generated build table and what the probe side needs from it.
#[derive(Debug, Clone)]
pub struct BuildSide {
    /// S(key, payload).
    pub table: Table,
    /// Rows of S holding distinct key index d.
    pub counts: Vec<u32>,
    zipf: Option<Zipf>,
}

/// A generated probe row range with what it achieved.
#[derive(Debug, Clone)]
pub struct ProbePart {
    /// L(key, payload) rows of the range.
    pub table: Table,
    /// Rows with a partner in S.
    pub matched: u64,
    /// Inner-join output pairs of the range.
    pub pairs: u64,
}

const MASK63: u64 = (1 << 63) - 1;

/// A bijection on 63-bit values (odd multiplier mod 2^63, then xorshift, twice).
fn mix63(mut x: u64) -> u64 {
    for m in [0x5851_F42D_4C95_7F2Du64, 0x1405_7B7E_F767_814Fu64] {
        x = x.wrapping_mul(m) & MASK63;
        x ^= x >> 31;
    }
    x
}

impl JoinGen {
    /// Checks the options.
    pub fn validate(&self) -> Result<(), String> {
        for (what, t) in [("key", self.key_type), ("payload", self.payload_type)] {
            if !matches!(t, ElemType::U32 | ElemType::U64) {
                return Err(format!(
                    "{what} type {t}: the join generator makes u32 or u64"
                ));
            }
        }
        if !(0.0..=1.0).contains(&self.match_rate) {
            return Err(format!(
                "match rate {} must be within 0..=1",
                self.match_rate
            ));
        }
        match self.dup {
            Dup::Fixed(0) => return Err("duplicate count must be at least 1".into()),
            Dup::Geometric(m) if m.is_nan() || m < 1.0 => {
                return Err(format!("geometric duplicate mean {m} must be at least 1"))
            }
            _ => {}
        }
        if let KeySkew::Zipf(t) = self.skew {
            if t.is_nan() || t < 0.0 {
                return Err(format!("Zipf theta {t} must be at least 0"));
            }
        }
        if self.key_type == ElemType::U32 && self.build_rows + self.probe_rows > u64::from(u32::MAX)
        {
            return Err(
                "u32 keys: |S| + |L| must stay below 2^32 so non-matching keys exist".into(),
            );
        }
        Ok(())
    }

    /// The key of distinct index `d`.
    pub fn key(&self, d: u64) -> u64 {
        if self.key_type == ElemType::U32 {
            u64::from(fmix32((d as u32) ^ (self.seed as u32)))
        } else {
            mix63((d ^ self.seed) & MASK63)
        }
    }

    fn payload_col(&self, table: &str, rows: std::ops::Range<u64>) -> Column {
        let v: Vec<u64> = block_values(self.seed, table, "payload", rows, |s, _| s.next_u64());
        typed("payload", self.payload_type, v)
    }

    /// Generates S whole (it must fit in memory to be joined).
    pub fn build(&self) -> Result<BuildSide, String> {
        self.validate()?;
        let n = self.build_rows;
        let mut counts: Vec<u32> = Vec::new();
        let mut total = 0u64;
        let mut stream = Stream::new(self.seed, "build", "dup", 0);
        while total < n {
            let d = counts.len() as u64;
            let c = match self.dup {
                Dup::Unique => 1,
                Dup::Fixed(c) => u64::from(c),
                Dup::Geometric(m) => {
                    // Counts of keys d come from the stream of d's block, in order.
                    if d.is_multiple_of(BLOCK_ROWS) {
                        stream = Stream::new(self.seed, "build", "dup", d / BLOCK_ROWS);
                    }
                    geometric(&mut stream, 1.0 / m)
                }
            }
            .min(n - total);
            counts.push(c as u32);
            total += c;
        }
        let mut keys = Vec::with_capacity(n as usize);
        for (d, &c) in counts.iter().enumerate() {
            let k = self.key(d as u64);
            keys.extend(std::iter::repeat_n(k, c as usize));
        }
        let table = Table::new(
            "build",
            vec![
                typed("key", self.key_type, keys),
                self.payload_col("build", 0..n),
            ],
        )?;
        let zipf = match self.skew {
            KeySkew::Zipf(t) if !counts.is_empty() => Some(Zipf::new(counts.len() as u64, t)),
            _ => None,
        };
        Ok(BuildSide {
            table,
            counts,
            zipf,
        })
    }

    /// Probe rows `rows` against the build side `b`.
    pub fn probe(&self, b: &BuildSide, rows: std::ops::Range<u64>) -> ProbePart {
        let distinct = b.counts.len() as u64;
        let rate = if distinct == 0 { 0.0 } else { self.match_rate };
        let idx: Vec<u64> = block_values(self.seed, "probe", "key", rows.clone(), |s, _| {
            if s.chance(rate) {
                match &b.zipf {
                    Some(z) => z.sample(s),
                    None => s.int_in(0, distinct as i128 - 1) as u64,
                }
            } else {
                distinct + s.int_in(0, self.probe_rows.max(1) as i128 - 1) as u64
            }
        });
        let matched = idx.iter().filter(|&&d| d < distinct).count() as u64;
        let pairs = idx
            .iter()
            .filter(|&&d| d < distinct)
            .map(|&d| u64::from(b.counts[d as usize]))
            .sum();
        let keys = idx.iter().map(|&d| self.key(d)).collect();
        let table = Table::new(
            "probe",
            vec![
                typed("key", self.key_type, keys),
                self.payload_col("probe", rows),
            ],
        )
        .expect("equal columns");
        ProbePart {
            table,
            matched,
            pairs,
        }
    }
}

/// A geometric count ≥ 1 with success probability `p` (mean 1/p), by inversion.
fn geometric(s: &mut Stream, p: f64) -> u64 {
    if p >= 1.0 {
        return 1;
    }
    let u = 1.0 - s.unit(); // in (0, 1]
    1 + (libm::log(u) / libm::log(1.0 - p)).floor() as u64
}

/// One value per row of `rows`, each block of [`BLOCK_ROWS`] from its own stream (blocks
/// in parallel, results in row order).
fn block_values(
    seed: u64,
    table: &str,
    column: &str,
    rows: std::ops::Range<u64>,
    f: impl Fn(&mut Stream, u64) -> u64 + Sync,
) -> Vec<u64> {
    if rows.is_empty() {
        return Vec::new();
    }
    let first = rows.start / BLOCK_ROWS;
    let last = (rows.end - 1) / BLOCK_ROWS;
    let parts: Vec<Vec<u64>> = (first..=last)
        .into_par_iter()
        .map(|blk| {
            let mut s = Stream::new(seed, table, column, blk);
            let lo = blk * BLOCK_ROWS;
            let hi = (lo + BLOCK_ROWS).min(rows.end);
            let mut v = Vec::with_capacity((hi - lo) as usize);
            for r in lo..hi {
                let x = f(&mut s, r);
                if r >= rows.start {
                    v.push(x);
                }
            }
            v
        })
        .collect();
    parts.concat()
}

fn typed(name: &str, ty: ElemType, v: Vec<u64>) -> Column {
    let data = match ty {
        ElemType::U32 => ColumnData::U32(v.into_iter().map(|x| x as u32).collect()),
        _ => ColumnData::U64(v),
    };
    Column::new(name, ty, data).expect("u32/u64 column")
}
