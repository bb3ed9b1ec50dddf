//! A device's own counters read as a ledger, and set beside the golden ledger and the
//! prediction.
//!
//! Counters file (CSV, header names the columns, any order):
//!
//! ```text
//! engine,phase,channel,direction,bytes,words,cycles,seconds
//! 0,scan,0,read,,16384,4200,
//! ```
//!
//! `engine`, `phase` and `direction` are required; `channel` empty means the counter is not
//! device memory (`region` may say `onchip` or `host_link`; default `device`). Each row
//! gives `bytes` or `words` (or both; the other is derived with the ledger's word width) and
//! may give the engine's busy time as `cycles` (at the device's port clock) or `seconds`.
//! A phase's measured time is the largest busy time of its rows.

use std::collections::BTreeMap;

use super::ledger_file::{parse_direction, parse_phase, parse_region};
use super::model::Plan;
use crate::ledger::{Key, Ledger, Phase, Region, Traffic};
use crate::{Error, Result};

/// Counters read from a device.
#[derive(Debug, Clone, Default)]
pub struct Measured {
    /// The counters as a ledger.
    pub ledger: Ledger,
    /// Measured time per phase, s (phases with a time column only).
    pub phase_s: BTreeMap<Phase, f64>,
}

/// Reads counters CSV text. `word_bits` converts between bytes and words, `clock_mhz`
/// converts cycles to seconds; `what` names the file in errors.
pub fn read_counters(text: &str, word_bits: u32, clock_mhz: f64, what: &str) -> Result<Measured> {
    let word_bytes = u64::from(word_bits.div_ceil(8));
    let mut r = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .from_reader(text.as_bytes());
    let header = r
        .headers()
        .map_err(|e| Error::input(format!("{what}: {e}")))?
        .clone();
    let col = |n: &str| header.iter().position(|h| h == n);
    let known = [
        "engine",
        "phase",
        "region",
        "channel",
        "direction",
        "bytes",
        "words",
        "cycles",
        "seconds",
    ];
    if let Some(h) = header.iter().find(|h| !known.contains(h)) {
        return Err(Error::input(format!(
            "{what}: line 1: unknown column `{h}` (known: {})",
            known.join(", ")
        )));
    }
    let need =
        |n: &str| col(n).ok_or_else(|| Error::input(format!("{what}: line 1: no `{n}` column")));
    let (ce, cp, cd) = (need("engine")?, need("phase")?, need("direction")?);
    let mut m = Measured::default();
    for (i, rec) in r.records().enumerate() {
        let line = i + 2;
        let rec = rec.map_err(|e| Error::input(format!("{what}: line {line}: {e}")))?;
        let bad = |m: String| Error::input(format!("{what}: line {line}: {m}"));
        let field = |c: Option<usize>| c.and_then(|c| rec.get(c)).filter(|s| !s.is_empty());
        let num = |n: &str| -> Result<Option<u64>> {
            field(col(n))
                .map(|s| {
                    s.parse::<u64>()
                        .map_err(|_| bad(format!("{n} `{s}` is not a count")))
                })
                .transpose()
        };
        let engine = field(Some(ce)).ok_or_else(|| bad("engine is empty".into()))?;
        let engine: u32 = engine
            .parse()
            .map_err(|_| bad(format!("engine `{engine}` is not a number")))?;
        let phase_s = field(Some(cp)).unwrap_or("");
        let phase = parse_phase(phase_s).ok_or_else(|| bad(format!("bad phase `{phase_s}`")))?;
        let dir_s = field(Some(cd)).unwrap_or("");
        let direction = parse_direction(dir_s)
            .ok_or_else(|| bad(format!("direction `{dir_s}`: expected read or write")))?;
        let channel = num("channel")?.map(|c| c as u32);
        let region = match field(col("region")) {
            Some(s) => parse_region(s).ok_or_else(|| bad(format!("unknown region `{s}`")))?,
            None if channel.is_some() => Region::Device,
            None => return Err(bad("no channel and no region".into())),
        };
        let (bytes, words) = match (num("bytes")?, num("words")?) {
            (Some(b), Some(w)) => (b, w),
            (Some(b), None) => (b, b.div_ceil(word_bytes)),
            (None, Some(w)) => (w * word_bytes, w),
            (None, None) => return Err(bad("neither bytes nor words given".into())),
        };
        let secs = match (num("cycles")?, field(col("seconds"))) {
            (Some(c), _) => Some(c as f64 / (clock_mhz * 1e6)),
            (None, Some(s)) => Some(
                s.parse::<f64>()
                    .ok()
                    .filter(|x| x.is_finite() && *x >= 0.0)
                    .ok_or_else(|| bad(format!("seconds `{s}` is not a time")))?,
            ),
            (None, None) => None,
        };
        if let Some(s) = secs {
            let e = m.phase_s.entry(phase).or_insert(0.0);
            *e = e.max(s);
        }
        m.ledger.add(
            Key {
                engine,
                phase,
                region,
                channel,
                direction,
            },
            Traffic {
                bytes,
                words,
                rows: 0,
            },
        );
    }
    Ok(m)
}

/// One counter key, golden beside measured.
#[derive(Debug, Clone, serde::Serialize)]
pub struct CounterDiff {
    /// `engine 0 scan channel 0 read` style label.
    pub key: String,
    /// Golden ledger words (0 when absent).
    pub golden_words: u64,
    /// Measured words (0 when absent).
    pub measured_words: u64,
    /// measured − golden.
    pub diff_words: i64,
}

/// One phase's time, predicted beside measured.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PhaseDiff {
    /// Phase name.
    pub phase: String,
    /// Calibrated prediction, s.
    pub predicted_s: f64,
    /// Measured, s (None without a time column).
    pub measured_s: Option<f64>,
    /// measured ÷ predicted.
    pub ratio: Option<f64>,
}

fn label(k: &Key) -> String {
    let place = match k.channel {
        Some(c) => format!("channel {c}"),
        None => k.region.name().to_string(),
    };
    format!(
        "engine {} {} {place} {}",
        k.engine,
        k.phase,
        k.direction.name()
    )
}

/// Counter differences over every key in either ledger (rows are not compared: counters
/// rarely count rows).
pub fn counter_diffs(golden: &Ledger, measured: &Ledger) -> Vec<CounterDiff> {
    let mut keys: Vec<Key> = golden
        .entries()
        .chain(measured.entries())
        .map(|(k, _)| *k)
        .collect();
    keys.sort();
    keys.dedup();
    keys.iter()
        .map(|k| {
            let g = golden.get(k).unwrap_or_default().words;
            let m = measured.get(k).unwrap_or_default().words;
            CounterDiff {
                key: label(k),
                golden_words: g,
                measured_words: m,
                diff_words: m as i64 - g as i64,
            }
        })
        .collect()
}

/// Predicted phase times beside measured ones.
pub fn phase_diffs(plan: &Plan, measured: &Measured) -> Vec<PhaseDiff> {
    plan.phases
        .iter()
        .map(|p| {
            let m = measured
                .phase_s
                .iter()
                .find(|(ph, _)| ph.to_string() == p.phase)
                .map(|(_, s)| *s);
            PhaseDiff {
                phase: p.phase.clone(),
                predicted_s: p.time_s,
                measured_s: m,
                ratio: m.filter(|_| p.time_s > 0.0).map(|m| m / p.time_s),
            }
        })
        .collect()
}
