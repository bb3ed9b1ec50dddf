//! The in-order compare: record `r` of the golden output against the bytes at the same
//! offset of the dump (bitmaps: bit `r`), and what lies after the last record inside the
//! last golden word.
//!
//! ```text
//!  word:   |  rec0  rec1  rec2 | rec3  ····pad···· |  words past the golden output
//!          └──── compared record by record ───┘└ trailing ┘└ ignored (counted) ┘
//! ```

use super::shape::{hex, Shape};
use super::tolerance::{float_width, Tolerance};
use super::{Mismatch, FIRST_MISMATCHES};
use crate::image::{WordDump, WordState};

/// Why device bytes cannot be read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Gap {
    /// Past the dump's last word.
    Missing,
    /// An `x`/`z` or never-written word.
    Unknown,
}

impl Gap {
    fn text(self) -> &'static str {
        match self {
            Gap::Missing => "missing",
            Gap::Unknown => "x",
        }
    }
}

/// `len` bytes of `dump` from byte `off`, or why they cannot be read.
pub fn bytes_at(dump: &WordDump, off: u64, len: u64) -> Result<&[u8], Gap> {
    let wb = dump.word_bytes as u64;
    if len == 0 {
        return Ok(&[]);
    }
    let (w0, w1) = (off / wb, (off + len - 1) / wb);
    if w1 as usize >= dump.words() {
        return Err(Gap::Missing);
    }
    if dump.state[w0 as usize..=w1 as usize]
        .iter()
        .any(|s| *s != WordState::Written)
    {
        return Err(Gap::Unknown);
    }
    Ok(&dump.data[off as usize..(off + len) as usize])
}

/// The differing records of an in-order compare.
#[derive(Debug, Default)]
pub struct Ordered {
    /// How many records differ.
    pub differing: u64,
    /// The first ones.
    pub first: Vec<Mismatch>,
}

/// A mismatch of record `r` at byte `off`.
pub fn mismatch(shape: &Shape, r: u64, off: u64, expected: String, found: String) -> Mismatch {
    let word = off / shape.word_bytes;
    Mismatch {
        record: r,
        word,
        channel_word: shape.channel_word(word),
        byte_offset: off,
        expected,
        found,
    }
}

/// Compares every record of `gold` with `dump` in order; float records within `tol` of
/// their golden value agree (others stay exact).
pub fn ordered(shape: &Shape, gold: &[u8], dump: &WordDump, tol: Option<Tolerance>) -> Ordered {
    let mut out = Ordered::default();
    let mut note = |m: Mismatch| {
        out.differing += 1;
        if out.first.len() < FIRST_MISMATCHES {
            out.first.push(m);
        }
    };
    if shape.rec == 0 {
        for r in 0..shape.records {
            let byte = r / 8;
            let want = (gold[byte as usize] >> (r % 8)) & 1;
            let got = bytes_at(dump, byte, 1).map(|b| (b[0] >> (r % 8)) & 1);
            if got != Ok(want) {
                let found = got.map_or_else(|g| g.text().into(), |b| b.to_string());
                note(mismatch(shape, r, byte, want.to_string(), found));
            }
        }
        return out;
    }
    let rec = shape.rec;
    for r in 0..shape.records {
        let off = r * rec;
        let want = &gold[off as usize..(off + rec) as usize];
        let float = tol.zip(float_width(shape));
        match bytes_at(dump, off, rec) {
            Ok(got) if got == want => {}
            Ok(got) if float.is_some() => {
                let (t, w) = float.expect("checked");
                if let Some((e, f)) = t.differences(shape, w, want, got) {
                    note(mismatch(shape, r, off, e, f));
                }
            }
            got => {
                let found = got.map_or_else(|g| g.text().into(), |b| shape.render(b));
                note(mismatch(shape, r, off, shape.render(want), found));
            }
        }
    }
    out
}

/// A note on nonzero device data after the last record inside the last golden word
/// (bitmaps: set bits past the last row), if any.
pub fn trailing(shape: &Shape, dump: &WordDump) -> Option<String> {
    let end = shape.words * shape.word_bytes;
    let payload = shape.payload();
    let avail = (dump.words() as u64 * shape.word_bytes).min(end);
    if shape.rec == 0 && !shape.records.is_multiple_of(8) && payload <= avail {
        let last = payload - 1;
        let w = (last / shape.word_bytes) as usize;
        let spare = dump.data[last as usize] >> (shape.records % 8);
        if dump.state[w] == WordState::Written && spare != 0 {
            let bits: Vec<String> = (0..8 - shape.records % 8)
                .filter(|i| (spare >> i) & 1 == 1)
                .map(|i| (shape.records + i).to_string())
                .collect();
            return Some(format!(
                "bitmap bits past the last row ({}) are set: bits {}",
                shape.records - 1,
                bits.join(", ")
            ));
        }
    }
    let from = payload.min(avail);
    let junk: Vec<u64> = (from..avail)
        .filter(|&b| {
            dump.state[(b / shape.word_bytes) as usize] == WordState::Written
                && dump.data[b as usize] != 0
        })
        .collect();
    let (&first, &last) = (junk.first()?, junk.last()?);
    let word = first / shape.word_bytes;
    let at = shape
        .channel_word(word)
        .map(|c| format!(", channel word 0x{c:x}"))
        .unwrap_or_default();
    Some(format!(
        "data after the last record: bytes {first}..{} of the output (word {word}{at}) are not zero: {}",
        last + 1,
        hex(&dump.data[first as usize..=last as usize])
    ))
}
