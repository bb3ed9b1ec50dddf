//! Compaction of mask words into `u32` row ids, two ways.
//!
//! While a chunk streams, [`push_ids_u32`] appends each word's ids to the chunk's own
//! buffer: sparse words walk their set bits, denser ones go byte by byte through a table
//! of bit positions, writing eight ids unconditionally and keeping as many as the byte
//! has bits. Once a buffer turns dense (see `Piece` in the parent module), the rest of its
//! words are only kept as masks, and [`write_ids_u32`] turns them into ids later, straight
//! into their place in the output, so a dense scan writes each id once instead of writing
//! and then copying it. There the widest instruction set compresses 16 ids at a time
//! (`vpcompressd`) and writes whole memory lines with streaming stores.
//!
//! ```text
//!   mask byte 0b0010_0110 ─► POS = [1, 2, 5, _, _, _, _, _], COUNT = 3
//!   ids[n..n+8] = base + 8k + POS;  n += 3
//! ```

use crate::kernels::isa::{Isa, Level};

/// Positions of the set bits of each byte value, ascending, padded with 0.
const POS: [[u8; 8]; 256] = {
    let mut t = [[0u8; 8]; 256];
    let mut b = 0;
    while b < 256 {
        let (mut n, mut j) = (0, 0);
        while j < 8 {
            if b & (1 << j) != 0 {
                t[b][n] = j as u8;
                n += 1;
            }
            j += 1;
        }
        b += 1;
    }
    t
};

/// Matches in a word at or below which the per-match walk is used.
const SPARSE: u32 = 3;

/// Writes the ids of the set bits of `m` (from `base`) into `win` through the position
/// table; returns the bytes kept. Ids of clear bits land past the kept ones and may wrap.
#[inline(always)]
fn table_word(win: &mut [u8; 4 * (64 + 8)], base: u32, m: u64) -> usize {
    let mut at = 0;
    // The byte's first id in all eight lanes, stepped by 8 a byte: a vector add, where a
    // fresh base each byte was a move and a broadcast.
    let mut b = [base; 8];
    for &byte in &m.to_le_bytes() {
        let mut v = [0u8; 32];
        for ((d, &p), &bj) in v.chunks_exact_mut(4).zip(&POS[usize::from(byte)]).zip(&b) {
            d.copy_from_slice(&bj.wrapping_add(u32::from(p)).to_le_bytes());
        }
        // `at` is at most 4 * 56 before the last byte, so the 32 bytes fit in `win`.
        win[at..at + 32].copy_from_slice(&v);
        at += 4 * byte.count_ones() as usize;
        b = b.map(|bj| bj.wrapping_add(8));
    }
    at
}

/// Calls `put(base + j)` for every set bit j of `m`, ascending: one step per match.
#[inline(always)]
fn walk_word(base: u32, m: u64, mut put: impl FnMut(u32)) {
    let mut w = m;
    while w != 0 {
        put(base + w.trailing_zeros());
        w &= w - 1;
    }
}

/// Appends, as little-endian `u32`, `base + j` for every set bit j of `m`, ascending.
/// The ids of set bits must fit in `u32`.
#[inline(always)]
pub fn push_ids_u32(out: &mut Vec<u8>, base: u32, m: u64) {
    let n = m.count_ones() as usize;
    if n <= SPARSE as usize {
        // The first SPARSE set bits are taken whatever the count, and the count says how
        // many to keep: no branch follows the data (a word's count is as unpredictable
        // as the data is).
        let mut ids = [0u8; 4 * SPARSE as usize];
        let mut w = m;
        for id in ids.chunks_exact_mut(4) {
            id.copy_from_slice(&base.wrapping_add(w.trailing_zeros()).to_le_bytes());
            w &= w.wrapping_sub(1);
        }
        return append_prefix(out, &ids, 4 * n);
    }
    // Each byte writes 32 bytes from where the kept ones end, so the word is staged in a
    // buffer with room for 64 + 8 ids and copied out once.
    let mut buf = [0u8; 4 * (64 + 8)];
    let at = table_word(&mut buf, base, m);
    out.extend_from_slice(&buf[..at]);
}

/// Appends the first `n` bytes of `bytes` to `out` with one capacity check and a copy of
/// fixed size (all `N` bytes go into the spare capacity; `n` of them are kept).
#[inline(always)]
fn append_prefix<const N: usize>(out: &mut Vec<u8>, bytes: &[u8; N], n: usize) {
    assert!(n <= N, "a prefix of the bytes");
    out.reserve(N);
    let len = out.len();
    for (d, &b) in out.spare_capacity_mut()[..N].iter_mut().zip(bytes) {
        d.write(b);
    }
    // SAFETY: `reserve(N)` made room for N more bytes, and the first N of the spare
    // capacity, so the first `n <= N`, were written just above.
    unsafe { out.set_len(len + n) };
}

/// Writes, as little-endian `u32`, `base + 64k + j` for every set bit j of `masks[k]`,
/// ascending, filling `out`, which must hold exactly that many ids (it panics otherwise).
/// The ids of set bits must fit in `u32`.
pub fn write_ids_u32(isa: Isa, masks: &[u64], base: u32, out: &mut [u8]) {
    let written = match isa.level() {
        #[cfg(target_arch = "x86_64")]
        // SAFETY: an AVX-512 `Isa` exists only after run-time detection of every feature
        // `write_avx512` enables (see `kernels::isa`).
        Level::Avx512 => unsafe { write_avx512(masks, base, out) },
        #[cfg(target_arch = "x86_64")]
        // SAFETY: an AVX2 `Isa` exists only after run-time detection of AVX2, BMI1, BMI2
        // and POPCNT, the features `write_avx2` enables (see `kernels::isa`).
        Level::Avx2 => unsafe { write_avx2(masks, base, out) },
        Level::Portable => write_body(masks, base, out),
    };
    assert_eq!(written, out.len(), "the output holds exactly the ids");
}

/// Mask words read ahead of the one being compacted: the masks come from memory in one
/// stream, which hardware prefetch alone was seen to leave well below the read rate.
const MASKS_AHEAD: usize = 128;

/// Asks for the mask word [`MASKS_AHEAD`] after word `k` to be brought into cache.
#[inline(always)]
fn prefetch_masks(masks: &[u64], k: usize) {
    #[cfg(target_arch = "x86_64")]
    // SAFETY: a prefetch never faults, whatever the address (SSE is part of the x86-64
    // baseline).
    unsafe {
        use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};
        _mm_prefetch::<_MM_HINT_T0>(masks.as_ptr().wrapping_add(k + MASKS_AHEAD).cast());
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = (masks, k);
}

/// The table compaction of [`write_ids_u32`], written once for the portable and AVX2
/// builds; returns the bytes written (it panics before writing past `out`). A word whose
/// unconditional writes could pass the end of `out` walks its bits instead, which only
/// the last words before the end ever do.
#[inline(always)]
fn write_body(masks: &[u64], base: u32, out: &mut [u8]) -> usize {
    let mut at = 0;
    for (k, &m) in masks.iter().enumerate() {
        prefetch_masks(masks, k);
        let b = base.wrapping_add(64 * k as u32);
        let rest = &mut out[at..];
        match rest.first_chunk_mut::<{ 4 * (64 + 8) }>() {
            // Every word through the table, however few its matches: deferred words come
            // from dense pieces, where a test on the count mispredicts on the sparse few
            // (it cost 5-10 % of a 10 % scan on AVX2).
            Some(win) => at += table_word(win, b, m),
            _ => walk_word(b, m, |id| {
                out[at..at + 4].copy_from_slice(&id.to_le_bytes());
                at += 4;
            }),
        }
    }
    at
}

/// # Safety
/// The CPU must support AVX2, BMI1, BMI2 and POPCNT (an AVX2 [`Isa`] proves it).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,bmi1,bmi2,popcnt")]
unsafe fn write_avx2(masks: &[u64], base: u32, out: &mut [u8]) -> usize {
    write_body(masks, base, out)
}

/// Lines of ids [`write_avx512`] gathers before it writes them out.
#[cfg(target_arch = "x86_64")]
const STAGE_LINES: usize = 8;

/// Ids gathered in cache on their way to `out`, which is written a whole 64-byte memory
/// line at a time with streaming stores: they skip reading the line first (the output is
/// far larger than the caches, so a plain store would fetch each line from memory before
/// overwriting it). Stage byte 0 stands for `out` byte `start`, so stage lines are
/// `out`'s memory lines; the lines `out` shares with its neighbours at either end get
/// plain stores of its own bytes only.
#[cfg(target_arch = "x86_64")]
#[repr(C, align(64))]
struct Stage {
    /// Whole lines, then a word's 64 ids, then the slack of one whole-vector store.
    bytes: [u8; 64 * STAGE_LINES + 256 + 64],
    /// Bytes gathered.
    fill: usize,
    /// The `out` byte that stage byte 0 stands for (negative before `out`'s first line).
    start: isize,
}

#[cfg(target_arch = "x86_64")]
impl Stage {
    /// Writes the whole lines gathered, and with `last` the partial one too, to `out`;
    /// moves the rest to the front. Panics before writing past `out`.
    ///
    /// # Safety
    /// The CPU must support AVX-512 F.
    #[target_feature(enable = "avx512f")]
    unsafe fn flush(&mut self, out: &mut [u8], last: bool) {
        use std::arch::x86_64::*;
        let lines = self.fill / 64;
        for l in 0..lines {
            let at = self.start + 64 * l as isize;
            if at < 0 {
                let from = (-at) as usize;
                out[..64 - from].copy_from_slice(&self.bytes[64 * l + from..64 * l + 64]);
                continue;
            }
            let at = at as usize;
            assert!(at + 64 <= out.len(), "more ids than the output holds");
            // SAFETY: the line is inside `out` (checked) and starts on a 64-byte boundary
            // (stage lines are `out`'s memory lines, and `Stage` is 64-byte aligned), as
            // a streaming store needs.
            unsafe {
                let line = _mm512_load_si512(self.bytes.as_ptr().add(64 * l).cast());
                _mm512_stream_si512(out.as_mut_ptr().add(at).cast(), line);
            }
        }
        let done = 64 * lines;
        let rest = self.fill - done;
        if last {
            let from = (-(self.start + done as isize)).max(0) as usize;
            let at = (self.start + done as isize).max(0) as usize;
            if from < rest {
                out[at..at + rest - from].copy_from_slice(&self.bytes[done + from..self.fill]);
            }
        } else if done > 0 {
            self.bytes.copy_within(done..done + 64, 0);
        }
        self.start += done as isize;
        self.fill = rest;
    }
}

/// [`write_ids_u32`] with compress-stores: each 16-bit quarter of a word packs its ids
/// into the low lanes of a vector, stored whole into the [`Stage`]; returns the bytes
/// written (it panics before writing past `out`).
///
/// # Safety
/// The CPU must support every feature enabled below (an AVX-512 `Isa` proves it).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f,avx512bw,avx512vl,bmi1,bmi2,popcnt")]
unsafe fn write_avx512(masks: &[u64], base: u32, out: &mut [u8]) -> usize {
    use std::arch::x86_64::*;
    let lead = out.as_ptr() as usize % 64;
    let mut stage = Stage {
        bytes: [0; 64 * STAGE_LINES + 256 + 64],
        fill: lead,
        start: -(lead as isize),
    };
    let lanes = _mm512_setr_epi32(0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15);
    let sixteen = _mm512_set1_epi32(16);
    for (k, &m) in masks.iter().enumerate() {
        prefetch_masks(masks, k);
        let mut ids = _mm512_add_epi32(
            _mm512_set1_epi32(base.wrapping_add(64 * k as u32) as i32),
            lanes,
        );
        for q in 0..4 {
            let bits = (m >> (16 * q)) as u16;
            let at = stage.bytes.as_mut_ptr().wrapping_add(stage.fill);
            // SAFETY: `fill` is below `64 * STAGE_LINES` when a word starts (see below)
            // and grows by at most 64 per quarter, so the 64 bytes stored end inside
            // `bytes`.
            unsafe { _mm512_storeu_si512(at.cast(), _mm512_maskz_compress_epi32(bits, ids)) };
            stage.fill += 4 * bits.count_ones() as usize;
            ids = _mm512_add_epi32(ids, sixteen);
        }
        if stage.fill >= 64 * STAGE_LINES {
            // SAFETY: the features are enabled here. Afterwards `fill` < 64.
            unsafe { stage.flush(out, false) };
        }
    }
    // SAFETY: the features are enabled here.
    unsafe { stage.flush(out, true) };
    // Streaming stores are weakly ordered: fence them before the output is handed on.
    _mm_sfence();
    (stage.start + stage.fill as isize) as usize
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// The one-step-per-match oracle.
    fn naive(base: u32, m: u64) -> Vec<u8> {
        (0..64)
            .filter(|j| m >> j & 1 == 1)
            .flat_map(|j| (base + j).to_le_bytes())
            .collect()
    }

    /// Every way this module compacts `words` from `base`, each checked against the walk.
    fn check_all(words: &[u64], base: u32) -> Result<(), TestCaseError> {
        let mut want = Vec::new();
        let mut pushed = Vec::new();
        for (i, &m) in words.iter().enumerate() {
            let b = base + 64 * i as u32;
            push_ids_u32(&mut pushed, b, m);
            want.extend(naive(b, m));
        }
        prop_assert_eq!(&pushed, &want, "push");
        // The staged writer streams whole lines and stores the shared lines at either end
        // plainly, so the output starts at every offset within a line, with guard bytes
        // on both sides that must stay as they were.
        for isa in Isa::available() {
            for offset in [0, 4, 28, 60, 63] {
                let mut buf = vec![0xa5u8; want.len() + 128];
                write_ids_u32(isa, words, base, &mut buf[offset..offset + want.len()]);
                let name = isa.name();
                let got = &buf[offset..offset + want.len()];
                prop_assert_eq!(got, &want[..], "write on {} at {}", name, offset);
                let mut guards = buf[..offset].iter().chain(&buf[offset + want.len()..]);
                prop_assert!(
                    guards.all(|&b| b == 0xa5),
                    "guards on {} at {}",
                    name,
                    offset
                );
            }
        }
        Ok(())
    }

    #[test]
    fn corner_words() {
        for m in [0, 1, 1 << 63, u64::MAX, 0x5555_5555_5555_5555, 0xff00, 0x7f] {
            let mut out = vec![9u8];
            push_ids_u32(&mut out, 1000, m);
            assert_eq!(out[1..], naive(1000, m)[..], "{m:#x}");
            assert_eq!(out[0], 9);
            check_all(&[m, m, 0, m], 1000).unwrap();
        }
        // The last ids of a partition may end at `u32::MAX`.
        check_all(&[u64::MAX], u32::MAX - 63).unwrap();
    }

    #[test]
    fn write_fills_exactly_the_slice_it_is_given() {
        let words = [u64::MAX, 0xf0f0, 1 << 40];
        for lead in 0..64 {
            let mut out = vec![0u8; lead + 4 * (64 + 8 + 1) + 3];
            let (ids, after) = out[lead..].split_at_mut(4 * (64 + 8 + 1));
            for isa in Isa::available() {
                write_ids_u32(isa, &words, 0, ids);
                assert_eq!(after, [0, 0, 0], "{}", isa.name());
            }
            assert!(out[..lead].iter().all(|&b| b == 0));
        }
    }

    #[test]
    fn write_refuses_an_output_of_the_wrong_length() {
        for isa in Isa::available() {
            for (masks, len) in [
                (vec![3u64], 4),
                (vec![3], 12),
                (vec![u64::MAX; 40], 4 * 64 * 40 - 4),
            ] {
                let r = std::panic::catch_unwind(move || {
                    write_ids_u32(isa, &masks, 0, &mut vec![0u8; len]);
                });
                assert!(r.is_err(), "{} accepted {len} bytes", isa.name());
            }
        }
    }

    proptest! {
        #[test]
        fn every_compaction_equals_the_walk(words in proptest::collection::vec(any::<u64>(), 1..20), base in 0u32..(u32::MAX - 64 * 20)) {
            check_all(&words, base)?;
        }

        #[test]
        fn every_compaction_equals_the_walk_on_sparse_words(words in proptest::collection::vec(any::<u64>().prop_map(|m| m & m.rotate_left(17) & m.rotate_left(41)), 1..40), base in 0u32..(u32::MAX - 64 * 40)) {
            check_all(&words, base)?;
        }
    }
}
