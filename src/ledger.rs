//! The byte ledger: how many bytes, memory words and rows each engine moves, per phase,
//! memory region, channel and direction.
//!
//! ```text
//!   worker ─► Traffic (plain u64s, one per stream it touches) ─┐ flushed once per block
//!   worker ─► Traffic ─────────────────────────────────────────┼─► Ledger (Key → Traffic)
//!   worker ─► Traffic ─────────────────────────────────────────┘   merged by addition
//! ```
//!
//! Counting rules (the contract every kernel follows):
//! - `bytes` are payload bytes, `rows` logical rows, `words` the memory words of the job's
//!   width touched, counted from the region's base address (a partial word counts whole;
//!   a word touched twice by one stream counts once — see [`Cursor`]).
//! - Kernels count as they touch memory; closed-form formulas only appear in tests.
//! - Merging is addition, so the result does not depend on thread count or merge order.
//!
//! This module depends on nothing else in the crate: any room may count.

use std::collections::BTreeMap;
use std::fmt;
use std::ops::AddAssign;

/// Where the bytes go.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Region {
    /// Off-chip device memory (high-bandwidth memory or DDR); the key's channel says which.
    Device,
    /// On-chip memory: tables and models kept inside the accelerator.
    OnChip,
    /// Transfers between host and device.
    HostLink,
}

impl Region {
    /// The name used in files.
    pub fn name(self) -> &'static str {
        match self {
            Region::Device => "device",
            Region::OnChip => "onchip",
            Region::HostLink => "host_link",
        }
    }

    fn parse(s: &str) -> Option<Region> {
        [Region::Device, Region::OnChip, Region::HostLink]
            .into_iter()
            .find(|r| r.name() == s)
    }
}

/// Read or write.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Direction {
    /// Data flowing into the engine.
    Read,
    /// Data flowing out of the engine.
    Write,
}

impl Direction {
    /// The name used in files.
    pub fn name(self) -> &'static str {
        match self {
            Direction::Read => "read",
            Direction::Write => "write",
        }
    }
}

/// A kernel phase: a name and an optional index (`build[3]`), ordered by name then index.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Phase {
    /// Phase name (`scan`, `build`, `probe`, `epoch`, `load`, `copyback`).
    pub name: &'static str,
    /// Block, epoch or chunk index, if the phase repeats.
    pub index: Option<u32>,
}

impl Phase {
    /// A phase that does not repeat.
    pub const fn single(name: &'static str) -> Phase {
        Phase { name, index: None }
    }

    /// The `index`-th instance of a repeating phase.
    pub const fn nth(name: &'static str, index: u32) -> Phase {
        Phase {
            name,
            index: Some(index),
        }
    }
}

impl fmt::Display for Phase {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.index {
            Some(i) => write!(f, "{}[{i}]", self.name),
            None => f.write_str(self.name),
        }
    }
}

/// What a counter is counted under.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Key {
    /// Engine index (engine p processes partition p).
    pub engine: u32,
    /// Kernel phase.
    pub phase: Phase,
    /// Memory region.
    pub region: Region,
    /// Device channel; `None` for on-chip and host-link traffic.
    pub channel: Option<u32>,
    /// Read or write.
    pub direction: Direction,
}

impl Key {
    /// A device-memory key.
    pub fn device(engine: u32, phase: Phase, channel: u32, direction: Direction) -> Key {
        Key {
            engine,
            phase,
            region: Region::Device,
            channel: Some(channel),
            direction,
        }
    }
}

/// Plain counters for one stream of accesses.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Traffic {
    /// Payload bytes.
    pub bytes: u64,
    /// Memory words touched.
    pub words: u64,
    /// Logical rows.
    pub rows: u64,
}

impl AddAssign for Traffic {
    fn add_assign(&mut self, o: Traffic) {
        self.bytes += o.bytes;
        self.words += o.words;
        self.rows += o.rows;
    }
}

impl Traffic {
    /// The counts of `n` repeats of these accesses, each counted in full.
    pub fn times(self, n: u64) -> Traffic {
        Traffic {
            bytes: self.bytes * n,
            words: self.words * n,
            rows: self.rows * n,
        }
    }
}

/// Memory words of `word_bytes` bytes touched by `len` bytes starting at byte address `addr`.
pub fn words_touched(addr: u64, len: u64, word_bytes: u64) -> u64 {
    if len == 0 {
        return 0;
    }
    (addr + len - 1) / word_bytes - addr / word_bytes + 1
}

/// Counts a sequential stream of accesses through a region: bytes, rows, and words
/// without counting twice a word shared by two consecutive accesses.
#[derive(Debug, Clone)]
pub struct Cursor {
    addr: u64,
    word_bytes: u64,
    last_word: Option<u64>,
    /// What has been counted so far.
    pub traffic: Traffic,
}

impl Cursor {
    /// A cursor at byte address `addr` (region base plus offset) for words of `word_bytes`.
    pub fn new(addr: u64, word_bytes: u64) -> Cursor {
        Cursor {
            addr,
            word_bytes,
            last_word: None,
            traffic: Traffic::default(),
        }
    }

    /// A cursor at `addr` that continues a stream which has already touched the byte
    /// before `addr` (the previous chunk of the same region): a word holding both bytes is
    /// not counted again. At a word boundary it is the same as [`Cursor::new`].
    pub fn continuing(addr: u64, word_bytes: u64) -> Cursor {
        let mut c = Cursor::new(addr, word_bytes);
        if addr > 0 {
            c.last_word = Some((addr - 1) / word_bytes);
        }
        c
    }

    /// Counts `bytes` bytes holding `rows` rows at the cursor, then moves past them.
    #[inline]
    pub fn touch(&mut self, bytes: u64, rows: u64) {
        if bytes > 0 {
            let first = self.addr / self.word_bytes;
            let last = (self.addr + bytes - 1) / self.word_bytes;
            let shared = u64::from(self.last_word == Some(first));
            self.traffic.words += last - first + 1 - shared;
            self.last_word = Some(last);
            self.addr += bytes;
        }
        self.traffic.bytes += bytes;
        self.traffic.rows += rows;
    }
}

/// Format version of `ledger.json`.
pub const LEDGER_FORMAT_VERSION: u32 = 1;

/// All counters of a run, keyed and ordered.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Ledger {
    entries: BTreeMap<Key, Traffic>,
}

/// One line of a grouped summary: reads and writes under a label.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Totals {
    /// Sum of read traffic.
    pub read: Traffic,
    /// Sum of write traffic.
    pub write: Traffic,
}

impl Ledger {
    /// An empty ledger.
    pub fn new() -> Ledger {
        Ledger::default()
    }

    /// Adds `t` under `key` (entries that count nothing are still kept, so a run that
    /// touched an empty partition shows it).
    pub fn add(&mut self, key: Key, t: Traffic) {
        *self.entries.entry(key).or_default() += t;
    }

    /// Adds every counter of `other`.
    pub fn merge(&mut self, other: &Ledger) {
        for (k, t) in &other.entries {
            self.add(*k, *t);
        }
    }

    /// The same counters under the keys `f` gives (counters whose new keys coincide add).
    pub fn rekeyed(&self, f: impl Fn(Key) -> Key) -> Ledger {
        let mut out = Ledger::new();
        for (k, t) in &self.entries {
            out.add(f(*k), *t);
        }
        out
    }

    /// The entries in key order.
    pub fn entries(&self) -> impl Iterator<Item = (&Key, &Traffic)> {
        self.entries.iter()
    }

    /// The counter under `key`, if any.
    pub fn get(&self, key: &Key) -> Option<Traffic> {
        self.entries.get(key).copied()
    }

    /// Sums reads and writes grouped by `group(key)` (engine, channel, phase, …), in the
    /// order of the group values.
    pub fn totals_by<G: Ord>(&self, group: impl Fn(&Key) -> G) -> Vec<(G, Totals)> {
        let mut m: BTreeMap<G, Totals> = BTreeMap::new();
        for (k, t) in &self.entries {
            let e = m.entry(group(k)).or_default();
            match k.direction {
                Direction::Read => e.read += *t,
                Direction::Write => e.write += *t,
            }
        }
        m.into_iter().collect()
    }

    /// Sum over all keys for which `pred` holds.
    pub fn sum(&self, pred: impl Fn(&Key) -> bool) -> Traffic {
        let mut s = Traffic::default();
        for (_, t) in self.entries.iter().filter(|(k, _)| pred(k)) {
            s += *t;
        }
        s
    }

    /// `ledger.csv`: header `engine,phase,region,channel,direction,bytes,words,rows`, one
    /// row per key (channel empty off the device).
    pub fn to_csv(&self) -> String {
        let mut s = String::from("engine,phase,region,channel,direction,bytes,words,rows\n");
        for (k, t) in &self.entries {
            let ch = k.channel.map(|c| c.to_string()).unwrap_or_default();
            s.push_str(&format!(
                "{},{},{},{ch},{},{},{},{}\n",
                k.engine,
                k.phase,
                k.region.name(),
                k.direction.name(),
                t.bytes,
                t.words,
                t.rows
            ));
        }
        s
    }

    /// `ledger.json` with its format version and the word width the words count.
    pub fn to_json(&self, word_bits: u32) -> serde_json::Value {
        let entries: Vec<serde_json::Value> = self
            .entries
            .iter()
            .map(|(k, t)| {
                serde_json::json!({
                    "engine": k.engine,
                    "phase": k.phase.to_string(),
                    "region": k.region.name(),
                    "channel": k.channel,
                    "direction": k.direction.name(),
                    "bytes": t.bytes,
                    "words": t.words,
                    "rows": t.rows,
                })
            })
            .collect();
        serde_json::json!({
            "format_version": LEDGER_FORMAT_VERSION,
            "word_bits": word_bits,
            "entries": entries,
        })
    }

    /// Reads the CSV form back (phases named by their text; used by tools that turn a
    /// device's own counters into a ledger). Errors name the line.
    pub fn from_csv(text: &str, phase_names: &[&'static str]) -> Result<Ledger, String> {
        let mut lines = text.lines();
        if lines.next() != Some("engine,phase,region,channel,direction,bytes,words,rows") {
            return Err("line 1: not a ledger header".into());
        }
        let mut l = Ledger::new();
        for (i, line) in lines.enumerate() {
            let bad = |what: &str| format!("line {}: {what}", i + 2);
            let f: Vec<&str> = line.split(',').collect();
            if f.len() != 8 {
                return Err(bad("expected 8 fields"));
            }
            let num = |s: &str| {
                s.parse::<u64>()
                    .map_err(|_| bad(&format!("`{s}` is not a count")))
            };
            let (pname, pidx) = match f[1].split_once('[') {
                Some((n, rest)) => (n, Some(num(rest.trim_end_matches(']'))? as u32)),
                None => (f[1], None),
            };
            let name = phase_names
                .iter()
                .find(|n| **n == pname)
                .ok_or_else(|| bad(&format!("unknown phase `{pname}`")))?;
            let key = Key {
                engine: num(f[0])? as u32,
                phase: Phase { name, index: pidx },
                region: Region::parse(f[2]).ok_or_else(|| bad("unknown region"))?,
                channel: if f[3].is_empty() {
                    None
                } else {
                    Some(num(f[3])? as u32)
                },
                direction: match f[4] {
                    "read" => Direction::Read,
                    "write" => Direction::Write,
                    _ => return Err(bad("unknown direction")),
                },
            };
            l.add(
                key,
                Traffic {
                    bytes: num(f[5])?,
                    words: num(f[6])?,
                    rows: num(f[7])?,
                },
            );
        }
        Ok(l)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn words_touched_counts_partial_words_whole() {
        // 64-byte words: bytes 60..68 straddle words 0 and 1 (common practice).
        assert_eq!(words_touched(60, 8, 64), 2);
        assert_eq!(words_touched(64, 64, 64), 1);
        assert_eq!(words_touched(0, 0, 64), 0);
        assert_eq!(words_touched(0, 1, 64), 1);
    }

    #[test]
    fn cursor_does_not_count_a_shared_word_twice() {
        let mut c = Cursor::new(0, 64);
        for _ in 0..10 {
            c.touch(4, 1);
        }
        assert_eq!(
            c.traffic,
            Traffic {
                bytes: 40,
                words: 1,
                rows: 10
            }
        );
        c.touch(100, 25);
        assert_eq!(c.traffic.words, words_touched(0, 140, 64));
    }

    #[test]
    fn csv_round_trips_and_orders_phases_by_index() {
        let mut l = Ledger::new();
        for b in [10u32, 2] {
            l.add(
                Key::device(1, Phase::nth("probe", b), 3, Direction::Read),
                Traffic {
                    bytes: 5,
                    words: 1,
                    rows: 1,
                },
            );
        }
        l.add(
            Key {
                engine: 0,
                phase: Phase::single("scan"),
                region: Region::OnChip,
                channel: None,
                direction: Direction::Write,
            },
            Traffic {
                bytes: 8,
                words: 1,
                rows: 0,
            },
        );
        let csv = l.to_csv();
        assert_eq!(
            csv,
            "engine,phase,region,channel,direction,bytes,words,rows\n\
             0,scan,onchip,,write,8,1,0\n\
             1,probe[2],device,3,read,5,1,1\n\
             1,probe[10],device,3,read,5,1,1\n"
        );
        assert_eq!(Ledger::from_csv(&csv, &["scan", "probe"]).unwrap(), l);
    }
}
