//! Placement what-ifs: the same ledger with each engine's device traffic moved to another
//! channel, without re-running the kernel.
//!
//! Invariant: re-mapping changes only the channel of device entries; bytes, words and rows
//! are carried over unchanged, so ledger totals are the same before and after.

use crate::layout::Placement;
use crate::ledger::{Key, Ledger, Region};
use crate::{Error, Result};

/// Parses `spread`, `packed`, or the path of a file listing one channel per engine
/// (separated by commas, spaces or new lines; `#` starts a comment).
pub fn parse_placement(arg: &str) -> Result<Placement> {
    if arg == "spread" || arg == "packed" {
        return Placement::parse(arg);
    }
    let path = std::path::Path::new(arg);
    let text = std::fs::read_to_string(path).map_err(|e| Error::read(path, e))?;
    let list: Vec<&str> = text
        .lines()
        .map(|l| l.split('#').next().unwrap_or(""))
        .flat_map(|l| l.split(|c: char| c == ',' || c.is_whitespace()))
        .filter(|s| !s.is_empty())
        .collect();
    if list.is_empty() {
        return Err(Error::input(format!("{arg}: lists no channels")));
    }
    Placement::parse(&list.join(",")).map_err(|e| e.context(arg))
}

/// Engines in the ledger: one more than the largest engine index (0 when empty).
pub fn engine_count(ledger: &Ledger) -> u32 {
    ledger
        .entries()
        .map(|(k, _)| k.engine + 1)
        .max()
        .unwrap_or(0)
}

/// `ledger` with engine e's device traffic on the channel `placement` gives engine e on a
/// device of `channels` channels.
pub fn remap(ledger: &Ledger, placement: &Placement, channels: u32) -> Result<Ledger> {
    let map = placement.channels(engine_count(ledger), channels)?;
    let mut out = Ledger::new();
    for (k, t) in ledger.entries() {
        let key = match k.region {
            Region::Device => Key {
                channel: Some(map[k.engine as usize]),
                ..*k
            },
            _ => *k,
        };
        out.add(key, *t);
    }
    Ok(out)
}
