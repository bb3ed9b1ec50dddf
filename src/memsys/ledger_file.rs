//! Reading `ledger.json` (the form `Ledger::to_json` writes) back into a [`Ledger`].
//!
//! Invariant: a file whose `format_version` is newer than [`LEDGER_FORMAT_VERSION`] is
//! refused, never half-read. Phase names are interned once per distinct name, so a ledger
//! of any kernel reads back without a list of known phases.

use std::collections::BTreeSet;
use std::sync::Mutex;

use serde::Deserialize;

use crate::ledger::{Direction, Key, Ledger, Phase, Region, Traffic, LEDGER_FORMAT_VERSION};
use crate::{Error, Result};

#[derive(Deserialize)]
struct FileEntry {
    engine: u32,
    phase: String,
    region: String,
    channel: Option<u32>,
    direction: String,
    bytes: u64,
    words: u64,
    rows: u64,
}

#[derive(Deserialize)]
struct LedgerFile {
    word_bits: u32,
    entries: Vec<FileEntry>,
}

/// A phase name with a `'static` lifetime: each distinct name is stored once.
pub fn intern(name: &str) -> &'static str {
    static NAMES: Mutex<BTreeSet<&'static str>> = Mutex::new(BTreeSet::new());
    let mut set = NAMES.lock().unwrap_or_else(|e| e.into_inner());
    if let Some(n) = set.get(name) {
        return n;
    }
    let leaked: &'static str = Box::leak(name.to_string().into_boxed_str());
    set.insert(leaked);
    leaked
}

/// Parses `probe[3]` or `scan`.
pub fn parse_phase(s: &str) -> Option<Phase> {
    match s.split_once('[') {
        Some((n, rest)) => {
            let i = rest.strip_suffix(']')?.parse().ok()?;
            Some(Phase::nth(intern(n), i))
        }
        None if !s.is_empty() => Some(Phase::single(intern(s))),
        None => None,
    }
}

/// Parses a region name.
pub fn parse_region(s: &str) -> Option<Region> {
    [Region::Device, Region::OnChip, Region::HostLink]
        .into_iter()
        .find(|r| r.name() == s)
}

/// Parses `read` or `write`.
pub fn parse_direction(s: &str) -> Option<Direction> {
    [Direction::Read, Direction::Write]
        .into_iter()
        .find(|d| d.name() == s)
}

/// Reads `ledger.json` text; `what` names the file in errors. Returns the ledger and the
/// word width its words count.
pub fn read_ledger_json(text: &str, what: &str) -> Result<(Ledger, u32)> {
    let v: serde_json::Value =
        serde_json::from_str(text).map_err(|e| Error::input(format!("{what}: {e}")))?;
    let version = v.get("format_version").and_then(|x| x.as_u64());
    match version {
        Some(n) if n > u64::from(LEDGER_FORMAT_VERSION) => {
            return Err(Error::input(format!(
                "{what}: ledger format_version {n} is newer than this weir reads ({LEDGER_FORMAT_VERSION})"
            )))
        }
        None => return Err(Error::input(format!("{what}: no `format_version`"))),
        _ => {}
    }
    let f: LedgerFile =
        serde_json::from_value(v).map_err(|e| Error::input(format!("{what}: {e}")))?;
    let mut l = Ledger::new();
    for (i, e) in f.entries.iter().enumerate() {
        let bad = |m: String| Error::input(format!("{what}: entries[{i}]: {m}"));
        let key = Key {
            engine: e.engine,
            phase: parse_phase(&e.phase).ok_or_else(|| bad(format!("bad phase `{}`", e.phase)))?,
            region: parse_region(&e.region)
                .ok_or_else(|| bad(format!("unknown region `{}`", e.region)))?,
            channel: e.channel,
            direction: parse_direction(&e.direction)
                .ok_or_else(|| bad(format!("unknown direction `{}`", e.direction)))?,
        };
        l.add(
            key,
            Traffic {
                bytes: e.bytes,
                words: e.words,
                rows: e.rows,
            },
        );
    }
    Ok((l, f.word_bits))
}
