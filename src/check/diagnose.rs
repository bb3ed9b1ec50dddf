//! Naming the likely cause of one output's differences, with one line of evidence.
//!
//! Classes are tried in a fixed order, from the shape of the whole dump to patterns in
//! single records, and the first that explains *every* difference wins; nothing is said
//! when none does (random damage gets no diagnosis):
//!
//! ```text
//!  absolute_addresses  the region's words sit at base/word_bytes, words before it absent
//!  width               narrower lines zero-extended: low bytes of each word repack to golden
//!  truncated           every word from some index on is missing or unwritten
//!  word_order          word j holds golden word n-1-j
//!  byte_order          bytes reversed within each element, or within each word
//!  offset              one field differs by the partition's row start (global vs local ids)
//!  stale               differing words equal another golden output's words at the same offsets
//!  shifted             after record i the sequences align s records apart (dropped / extra)
//!  bit                 the same single bit is all that differs in every differing word
//!  offset              one field differs by the same constant in every differing record
//! ```

use super::compare::{bytes_at, ordered};
use super::shape::{hex, Shape};
use super::Diagnosis;
use crate::image::{WordDump, WordState};

/// Largest record shift the alignment tries.
const MAX_SHIFT: u64 = 8;

/// What a diagnosis may look at besides the output itself.
pub struct Context<'a> {
    /// Golden bytes, whole words.
    pub gold: &'a [u8],
    /// The dump.
    pub dump: &'a WordDump,
    /// Row starts of every partition `(engine, start)`, this output's engine first.
    pub row_starts: Vec<(u32, u64)>,
    /// Other golden outputs of the same kind (name, bytes), loaded on demand.
    pub neighbours: &'a dyn Fn() -> Vec<(String, Vec<u8>)>,
    /// Only shape classes apply (unordered compares).
    pub shape_only: bool,
}

fn diag(class: &'static str, line: String) -> Option<Diagnosis> {
    Some(Diagnosis { class, line })
}

fn written(d: &WordDump, w: u64) -> bool {
    d.state.get(w as usize) == Some(&WordState::Written)
}

fn at(s: &Shape, w: u64) -> String {
    match s.channel_word(w) {
        Some(c) => format!("word {w} (channel word 0x{c:x})"),
        None => format!("word {w}"),
    }
}

/// The likely cause of the differences of a failing output.
pub fn diagnose(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let shape_classes = [absolute, width, truncated];
    let record_classes = [
        word_order,
        byte_order,
        row_start_offset,
        stale,
        shifted,
        bit,
        offset,
    ];
    let n = if c.shape_only {
        0
    } else {
        record_classes.len()
    };
    shape_classes
        .iter()
        .chain(&record_classes[..n])
        .find_map(|f| f(s, c))
}

/// A verdict on `dump` as a whole: "all N records match" or "k of N records differ".
fn verdict(s: &Shape, gold: &[u8], dump: &WordDump) -> String {
    let o = ordered(s, gold, dump, None);
    if o.differing == 0 {
        format!("all {} records match", s.records)
    } else {
        format!("{} of {} records differ", o.differing, s.records)
    }
}

fn absolute(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let b = s.base_word.filter(|&b| b > 0)?;
    let d = c.dump;
    let (b_us, wb) = (b as usize, d.word_bytes);
    if d.words() <= b_us || (0..b.min(s.words)).any(|w| written(d, w)) || !written(d, b) {
        return None;
    }
    let rebased = WordDump {
        word_bytes: wb,
        data: d.data[b_us * wb..].to_vec(),
        state: d.state[b_us..].to_vec(),
    };
    diag(
        "absolute_addresses",
        format!(
            "the dump is at absolute channel addresses: its words start at @{b:x} (the region base / {wb} bytes) and the words before are absent; rebased to the region, {}",
            verdict(s, c.gold, &rebased)
        ),
    )
}

fn width(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let d = c.dump;
    let wb = s.word_bytes as usize;
    if (d.words() as u64) <= s.words {
        return None;
    }
    (1..wb).rev().filter(|k| wb.is_multiple_of(*k)).find_map(|k| {
        let high_zero = (0..d.words()).all(|w| d.word(w)[k..].iter().all(|&b| b == 0));
        if !high_zero {
            return None;
        }
        let mut data: Vec<u8> = (0..d.words()).flat_map(|w| d.word(w)[..k].to_vec()).collect();
        data.resize(data.len().div_ceil(wb) * wb, 0);
        let repacked = WordDump {
            word_bytes: wb,
            state: vec![WordState::Written; data.len() / wb],
            data,
        };
        (ordered(s, c.gold, &repacked, None).differing == 0).then(|| Diagnosis {
            class: "width",
            line: format!(
                "the dump's lines are {} bits wide, not {}: every line fits in {} bits, and read as {}-bit words all {} records match",
                k * 8,
                wb * 8,
                k * 8,
                k * 8,
                s.records
            ),
        })
    })
}

fn truncated(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let d = c.dump;
    let mut t = s.words;
    while t > 0 && !written(d, t - 1) {
        t -= 1;
    }
    if t == s.words {
        return None;
    }
    let cut = t * s.word_bytes;
    let whole = cut.checked_div(s.rec).unwrap_or(cut * 8);
    let head = Shape {
        records: whole.min(s.records),
        ..s.clone()
    };
    if ordered(&head, c.gold, d, None).differing != 0 {
        return None;
    }
    let lost = s.words - t;
    let past = s.words.saturating_sub((d.words() as u64).max(t));
    diag(
        "truncated",
        format!(
            "truncated: the dump holds the golden words up to {} and nothing from there on: {lost} of {} words missing ({} unwritten or x, {past} past the end of the dump)",
            at(s, t),
            s.words,
            lost - past
        ),
    )
}

/// Word `w` of the dump when written.
fn dword(d: &WordDump, w: u64) -> Option<&[u8]> {
    written(d, w).then(|| d.word(w as usize))
}

fn gword<'a>(s: &Shape, g: &'a [u8], w: u64) -> &'a [u8] {
    let wb = s.word_bytes as usize;
    &g[w as usize * wb..(w as usize + 1) * wb]
}

/// Words of the golden output that differ in the dump.
fn differing_words(s: &Shape, c: &Context<'_>) -> Vec<u64> {
    (0..s.words)
        .filter(|&w| dword(c.dump, w) != Some(gword(s, c.gold, w)))
        .collect()
}

fn word_order(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let n = s.words;
    let rev = |w: u64| gword(s, c.gold, n - 1 - w);
    let symmetric = (0..n).all(|w| rev(w) == gword(s, c.gold, w));
    if n < 2 || symmetric || !(0..n).all(|w| dword(c.dump, w) == Some(rev(w))) {
        return None;
    }
    diag(
        "word_order",
        format!("word order reversed: dump word j holds golden word {}-j for all {n} words (word 0 holds {})", n - 1, hex(rev(0))),
    )
}

fn byte_order(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let words = differing_words(s, c);
    let first = *words.first()?;
    let e = s.elem_bytes() as usize;
    let wb = s.word_bytes as usize;
    for (chunk, what) in [
        (e, format!("each {e}-byte element")),
        (wb, format!("each {wb}-byte word")),
    ] {
        if chunk < 2 || !wb.is_multiple_of(chunk) {
            continue;
        }
        let swapped = |w: u64| {
            dword(c.dump, w).map(|b| {
                b.chunks(chunk)
                    .flat_map(|x| x.iter().rev().copied())
                    .collect::<Vec<u8>>()
            })
        };
        if words
            .iter()
            .all(|&w| swapped(w).as_deref() == Some(gword(s, c.gold, w)))
        {
            return diag(
                "byte_order",
                format!(
                    "byte order reversed within {what}: all {} differing words match with their bytes swapped ({}: expected {}, found {})",
                    words.len(),
                    at(s, first),
                    hex(gword(s, c.gold, first)),
                    hex(dword(c.dump, first).unwrap_or_default())
                ),
            );
        }
        if chunk == wb {
            break;
        }
    }
    None
}

/// Field spans of a record: its fields, or the whole record as one value.
fn spans(s: &Shape) -> Vec<(String, u32, u32)> {
    if s.fields.is_empty() {
        vec![(String::new(), 0, (s.rec * 8) as u32)]
    } else {
        s.fields
            .iter()
            .map(|f| (f.name.clone(), f.bit, f.bits))
            .collect()
    }
}

fn bits_of(b: &[u8], bit: u32, bits: u32) -> u128 {
    (0..bits).fold(0u128, |v, i| {
        let at = bit + i;
        v | (u128::from((b[(at / 8) as usize] >> (at % 8)) & 1) << i)
    })
}

/// The one field (index) and delta by which every differing record differs, if any.
fn common_delta(s: &Shape, c: &Context<'_>) -> Option<(usize, u128, u64)> {
    if s.rec == 0 || s.rec > 16 && s.fields.is_empty() {
        return None;
    }
    let sp = spans(s);
    let mut found: Option<(usize, u128)> = None;
    let mut n = 0;
    for r in 0..s.records {
        let off = r * s.rec;
        let want = &c.gold[off as usize..(off + s.rec) as usize];
        let got = bytes_at(c.dump, off, s.rec).ok()?;
        if got == want {
            continue;
        }
        n += 1;
        let diffs: Vec<(usize, u128)> = sp
            .iter()
            .enumerate()
            .filter_map(|(i, (_, bit, bits))| {
                let (g, d) = (bits_of(want, *bit, *bits), bits_of(got, *bit, *bits));
                let mask = if *bits >= 128 {
                    u128::MAX
                } else {
                    (1u128 << bits) - 1
                };
                (g != d).then(|| (i, d.wrapping_sub(g) & mask))
            })
            .collect();
        match (diffs.as_slice(), found) {
            ([one], None) => found = Some(*one),
            ([one], Some(f)) if *one == f => {}
            _ => return None,
        }
    }
    found.map(|(i, d)| (i, d, n))
}

fn field_label(s: &Shape, i: usize) -> String {
    match s.fields.get(i) {
        Some(f) => format!("field {}", f.name),
        None => "record".into(),
    }
}

fn row_start_offset(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let (i, d, n) = common_delta(s, c)?;
    let bits = spans(s)[i].2;
    let mask = if bits >= 128 {
        u128::MAX
    } else {
        (1u128 << bits) - 1
    };
    let own = c.row_starts.first().map(|x| x.0);
    for &(e, start) in &c.row_starts {
        let st = u128::from(start);
        let (plus, minus) = (st == d, st > 0 && (st.wrapping_neg() & mask) == d);
        if st == 0 || !(plus || minus) {
            continue;
        }
        let whose = if Some(e) == own {
            format!("this partition's row start P{e}_ROW_START")
        } else {
            format!("partition {e}'s row start P{e}_ROW_START")
        };
        let (sign, ids) = if plus {
            ("+", "global row ids where local ones are expected")
        } else {
            ("-", "local row ids where global ones are expected")
        };
        return diag(
            "offset",
            format!(
                "constant offset: in all {n} differing records the {} is the golden value {sign} 0x{start:x}, {whose} ({start}): the dump holds {ids}",
                field_label(s, i)
            ),
        );
    }
    None
}

fn offset(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let (i, d, n) = common_delta(s, c)?;
    (n >= 2).then(|| Diagnosis {
        class: "offset",
        line: format!(
            "constant offset: in all {n} differing records the {} is the golden value + 0x{d:x} (mod 2^{})",
            field_label(s, i),
            spans(s)[i].2
        ),
    })
}

fn stale(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let words = differing_words(s, c);
    if words.is_empty() || !words.iter().all(|&w| written(c.dump, w)) {
        return None;
    }
    let wb = s.word_bytes as usize;
    (c.neighbours)().into_iter().find_map(|(name, g)| {
        let same = words.iter().all(|&w| {
            let o = w as usize * wb;
            g.get(o..o + wb) == Some(c.dump.word(w as usize))
        });
        same.then(|| Diagnosis {
            class: "stale",
            line: format!(
                "stale data: all {} differing words (the first at {}) equal {name}'s golden words at the same offsets, left from an earlier run or another engine",
                words.len(),
                at(s, words[0])
            ),
        })
    })
}

fn shifted(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    if s.rec == 0 {
        return None;
    }
    let rec = |r: u64| &c.gold[(r * s.rec) as usize..((r + 1) * s.rec) as usize];
    let dev = |r: u64| bytes_at(c.dump, r * s.rec, s.rec).ok();
    let i = (0..s.records).find(|&r| dev(r) != Some(rec(r)))?;
    for sh in 1..=MAX_SHIFT.min(s.records - i - 1) {
        let span = i..s.records - sh;
        if span.clone().all(|r| dev(r) == Some(rec(r + sh))) {
            return diag(
                "shifted",
                format!(
                    "records shifted after index {i}: {sh} golden record(s) from {i} on are missing (first {}), and records {}.. appear {sh} place(s) earlier",
                    s.render(rec(i)),
                    i + sh
                ),
            );
        }
        if span.clone().all(|r| dev(r + sh) == Some(rec(r))) {
            let extra = dev(i).map_or_else(|| "x".into(), |b| s.render(b));
            return diag(
                "shifted",
                format!(
                    "records shifted after index {i}: {sh} extra record(s) in the dump at index {i} (first {extra}), and golden records {i}.. appear {sh} place(s) later"
                ),
            );
        }
    }
    None
}

fn bit(s: &Shape, c: &Context<'_>) -> Option<Diagnosis> {
    let words = differing_words(s, c);
    if words.is_empty() || !words.iter().all(|&w| written(c.dump, w)) {
        return None;
    }
    // Every differing word must differ in exactly one bit, the same one.
    let xor = |w: u64| -> Vec<u8> {
        let (g, d) = (gword(s, c.gold, w), c.dump.word(w as usize));
        g.iter().zip(d).map(|(a, b)| a ^ b).collect()
    };
    let first = xor(words[0]);
    let ones: u32 = first.iter().map(|x| x.count_ones()).sum();
    if ones != 1 || !words.iter().all(|&w| xor(w) == first) {
        return None;
    }
    let byte = first.iter().position(|&x| x != 0)?;
    let common = first;
    let b = byte * 8 + common[byte].trailing_zeros() as usize;
    let val = |buf: &[u8]| (buf[b / 8] >> (b % 8)) & 1;
    let vals: Vec<u8> = words
        .iter()
        .map(|&w| val(c.dump.word(w as usize)))
        .collect();
    let stuck = vals.iter().all(|&v| v == vals[0]);
    let how = if stuck {
        format!("stuck at {}", vals[0])
    } else {
        "flipped".into()
    };
    diag(
        "bit",
        format!(
            "bit {b} of the word (byte {}, bit {}) is {how}: it differs in all {} differing words, the first at {}",
            b / 8,
            b % 8,
            words.len(),
            at(s, words[0])
        ),
    )
}
