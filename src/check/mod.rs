//! Comparing device dumps with golden outputs, and saying what went wrong and where.
//!
//! ```text
//!   GOLDEN (run dir or its golden/) ─► aim ─► (output, golden entry, dump file)…
//!   DEVICE (dump, dir of dumps, run dir)      │  golden files verified by SHA-256 first
//!                                             ▼
//!                   dump::read (hex/bin/npy words, typed .npy) ─► Shape + WordDump
//!                                             ▼
//!            compare (in order) | unordered (multiset, sorted) ─► differing records
//!                                             ▼
//!                        diagnose (one likely cause, one line of evidence)
//!                                             ▼
//!                           text (summary table, details) / JSON
//! ```
//!
//! Invariants: an output without a dump is "not checked", never "match"; a golden file
//! that differs from its manifest checksum is an error, never a device mismatch; records
//! are compared up to the golden record count, and what lies past it inside the last word
//! (trailing bytes, bitmap bits past the last row) is a note, or a mismatch with `strict`.

mod aim;
mod compare;
mod diagnose;
mod dump;
mod shape;
mod text;
pub mod tolerance;
pub mod unordered;

use serde::Serialize;

pub use aim::check;
pub use tolerance::Tolerance;

/// How many mismatches a report lists per output.
pub const FIRST_MISMATCHES: usize = 10;

/// One differing record.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Mismatch {
    /// Record index (row id position, bitmap row, projected record, pair).
    pub record: u64,
    /// Memory word index within the output region.
    pub word: u64,
    /// Word address on the channel (region base / word bytes + word), when the output
    /// has a device address.
    pub channel_word: Option<u64>,
    /// Byte offset of the record within the output region.
    pub byte_offset: u64,
    /// Expected value: hex, or fields by name (`ts=0x… power=0x…`); empty for a surplus record.
    pub expected: String,
    /// Value found: hex or fields, `x` for unknown or unwritten words, `missing` past the
    /// dump's end; empty for a missing record of an unordered compare.
    pub found: String,
}

/// The likely cause of one output's differences.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Diagnosis {
    /// Class: `shifted`, `offset`, `byte_order`, `word_order`, `bit`, `width`,
    /// `absolute_addresses`, `stale`, `truncated`.
    pub class: &'static str,
    /// One line with the evidence.
    pub line: String,
}

/// What became of one output.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// Every record matches (and with `strict`, nothing trails the last record).
    Match,
    /// Some record differs.
    Mismatch,
    /// No dump of this output was given.
    NotChecked,
}

/// The comparison of one golden output.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct OutputCheck {
    /// Golden stem (`scan.p0.out`).
    pub output: String,
    /// Engine (= partition).
    pub engine: Option<u32>,
    /// Channel of the output region.
    pub channel: Option<u32>,
    /// The golden file compared against.
    pub golden_file: String,
    /// The device file read; `None` when no dump of this output was given.
    pub device_file: Option<String>,
    /// Records expected.
    pub records: u64,
    /// Records that differ (in an unordered compare: golden records not found).
    pub differing: u64,
    /// Device records not among the golden records (unordered compare only).
    pub surplus: Option<u64>,
    /// The verdict.
    pub verdict: Verdict,
    /// The first few differing records, in record order (unordered: missing records).
    pub first_mismatches: Vec<Mismatch>,
    /// The first few surplus device records, in record order (unordered compare only).
    pub first_surplus: Vec<Mismatch>,
    /// The likely cause, when one fits.
    pub diagnosis: Option<Diagnosis>,
    /// Remarks that are not differences: trailing data, words past the output.
    pub notes: Vec<String>,
    /// Words in the dump after the golden words, not compared.
    pub ignored_words: u64,
}

/// The whole report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CheckReport {
    /// True when at least one output was checked and every checked output matches.
    pub matched: bool,
    /// Whether records were compared as multisets.
    pub unordered: bool,
    /// Whether trailing data counts as a mismatch.
    pub strict: bool,
    /// The tolerance float outputs were compared with (`None`: exact).
    pub tolerance: Option<Tolerance>,
    /// One entry per golden output considered.
    pub outputs: Vec<OutputCheck>,
}

/// Options of a check.
#[derive(Debug, Clone, Default)]
pub struct CheckOptions {
    /// Compare record outputs as multisets.
    pub unordered: bool,
    /// Trailing data after the last record is a mismatch, not a note.
    pub strict: bool,
    /// Float outputs agree within this tolerance (others are always exact).
    pub tolerance: Option<Tolerance>,
    /// Golden outputs to check (stems); empty means every output the device side holds.
    /// With one dump file, exactly one names the output the file holds.
    pub outputs: Vec<String>,
}
