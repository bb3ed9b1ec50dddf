//! The fast CPU table: open addressing over `(key, payload)` pairs with multiplicative
//! hashing and linear probing at slot granularity, probed in order with software
//! prefetch a fixed distance ahead.
//!
//! ```text
//!   slots: [key | payload] × 2^m   (2^m ≥ 2 × rows, so probes stay short)
//!   empty slot: key == `empty`, a value chosen absent from the block's keys
//! ```
//!
//! Tuples of one key sit on one probe path in build order (inserted in build order, no
//! deletions), so a probe reports them in build order: the same order as the mirror table.

use super::hash::FIB64;

/// How many rows ahead a probe prefetches its slot.
const PREFETCH_AHEAD: usize = 16;

/// One block's fast table.
pub struct FastTable {
    slots: Vec<[u64; 2]>,
    mask: usize,
    shift: u32,
    empty: u64,
}

/// A key value not among `keys`: the largest of `u64::MAX - n ..= u64::MAX` not present
/// (one must be missing, by counting), found in one pass.
fn absent_key(keys: &[u64]) -> u64 {
    let n = keys.len() as u64;
    let lo = u64::MAX - n;
    let mut seen = vec![false; keys.len() + 1];
    for &k in keys {
        if k >= lo {
            seen[(k - lo) as usize] = true;
        }
    }
    let i = seen.iter().rposition(|&s| !s).unwrap_or(0);
    lo + i as u64
}

impl FastTable {
    /// The table of the block's tuples, inserted in order.
    pub fn build(keys: &[u64], payloads: &[u64]) -> FastTable {
        let cap = (keys.len() * 2).next_power_of_two().max(16);
        let empty = absent_key(keys);
        let mut t = FastTable {
            slots: vec![[empty, 0]; cap],
            mask: cap - 1,
            shift: 64 - cap.trailing_zeros(),
            empty,
        };
        for (&k, &p) in keys.iter().zip(payloads) {
            let mut i = t.home(k);
            while t.slots[i][0] != empty {
                i = (i + 1) & t.mask;
            }
            t.slots[i] = [k, p];
        }
        t
    }

    #[inline(always)]
    fn home(&self, key: u64) -> usize {
        (key.wrapping_mul(FIB64) >> self.shift) as usize
    }

    #[inline(always)]
    fn prefetch(&self, key: u64) {
        #[cfg(target_arch = "x86_64")]
        // SAFETY: prefetch only hints the cache; `home` is always within `slots`.
        unsafe {
            use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};
            let p = self.slots.as_ptr().add(self.home(key)) as *const i8;
            _mm_prefetch::<_MM_HINT_T0>(p);
        }
        #[cfg(not(target_arch = "x86_64"))]
        let _ = key;
    }

    /// Calls `hit(row, payload)` for each matching tuple of each probe key, rows in
    /// order and a row's matches in build order.
    #[inline]
    pub fn probe_all<K: Copy + Into<u64>>(&self, keys: &[K], mut hit: impl FnMut(usize, u64)) {
        let n = keys.len();
        for &k in keys.iter().take(PREFETCH_AHEAD) {
            self.prefetch(k.into());
        }
        for r in 0..n {
            if r + PREFETCH_AHEAD < n {
                self.prefetch(keys[r + PREFETCH_AHEAD].into());
            }
            let key: u64 = keys[r].into();
            let mut i = self.home(key);
            loop {
                let s = self.slots[i];
                // Empty first: a probe key equal to `empty` is not in the block.
                if s[0] == self.empty {
                    break;
                }
                if s[0] == key {
                    hit(r, s[1]);
                }
                i = (i + 1) & self.mask;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn absent_key_is_absent() {
        let keys: Vec<u64> = (0..10).map(|i| u64::MAX - i).collect();
        let e = absent_key(&keys);
        assert!(!keys.contains(&e));
        assert_eq!(e, u64::MAX - 10);
        assert_eq!(absent_key(&[1, 2, 3]), u64::MAX);
    }

    #[test]
    fn duplicates_in_build_order() {
        let t = FastTable::build(&[7, 3, 7, u64::MAX, 7], &[1, 2, 3, 4, 5]);
        let mut got = Vec::new();
        t.probe_all(&[7u64, 9, u64::MAX, 3], |r, p| got.push((r, p)));
        assert_eq!(got, vec![(0, 1), (0, 3), (0, 5), (2, 4), (3, 2)]);
    }
}
