//! Compaction of a mask word into `u32` row ids, byte by byte of the mask: each mask byte
//! looks up the positions of its set bits and writes eight ids unconditionally, keeping
//! as many as the byte has bits. No branch depends on the data inside a word, which is
//! what holds the dense (10–50 %) scans near the read rate; sparse words take the
//! one-step-per-match walk instead.
//!
//! ```text
//!   mask byte 0b0010_0110 ─► POS = [1, 2, 5, _, _, _, _, _], COUNT = 3
//!   ids[n..n+8] = base + 8k + POS;  n += 3
//! ```

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

/// Appends, as little-endian `u32`, `base + j` for every set bit j of `m`, ascending.
/// The ids of set bits must fit in `u32`; ids of clear bits are written past the kept
/// ones and may wrap (they are never kept).
#[inline(always)]
pub fn push_ids_u32(out: &mut Vec<u8>, base: u32, m: u64) {
    let n = m.count_ones();
    if n <= SPARSE {
        let mut w = m;
        while w != 0 {
            out.extend_from_slice(&(base + w.trailing_zeros()).to_le_bytes());
            w &= w - 1;
        }
        return;
    }
    // Each byte writes 8 ids (32 bytes) from where the kept ones end, so the word is
    // staged in a buffer with room for 64 + 8 ids and copied out once.
    let mut buf = [0u8; 4 * (64 + 8)];
    let mut at = 0;
    for (k, &byte) in m.to_le_bytes().iter().enumerate() {
        let b = base.wrapping_add(8 * k as u32);
        let mut v = [0u8; 32];
        for (d, &p) in v.chunks_exact_mut(4).zip(&POS[usize::from(byte)]) {
            d.copy_from_slice(&b.wrapping_add(u32::from(p)).to_le_bytes());
        }
        buf[at..at + 32].copy_from_slice(&v);
        at += 4 * byte.count_ones() as usize;
    }
    debug_assert_eq!(at, 4 * n as usize);
    out.extend_from_slice(&buf[..at]);
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

    #[test]
    fn corner_words() {
        for m in [0, 1, 1 << 63, u64::MAX, 0x5555_5555_5555_5555, 0xff00, 0x7f] {
            let mut out = vec![9u8];
            push_ids_u32(&mut out, 1000, m);
            assert_eq!(out[1..], naive(1000, m)[..], "{m:#x}");
            assert_eq!(out[0], 9);
        }
    }

    proptest! {
        #[test]
        fn table_compaction_equals_the_walk(words in proptest::collection::vec(any::<u64>(), 1..20), base in 0u32..(u32::MAX - 64 * 20)) {
            let mut got = Vec::new();
            let mut want = Vec::new();
            for (i, &m) in words.iter().enumerate() {
                let b = base + 64 * i as u32;
                push_ids_u32(&mut got, b, m);
                want.extend(naive(b, m));
            }
            prop_assert_eq!(got, want);
        }
    }
}
