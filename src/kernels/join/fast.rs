//! The fast CPU table: open addressing over cache-line buckets of four `(key, payload)`
//! slots, multiplicative hashing, linear probing from bucket to bucket, and probes
//! prefetched a fixed distance ahead.
//!
//! ```text
//!   bucket (64 bytes, aligned):  [key0 key1 key2 key3 | pay0 pay1 pay2 pay3]  × 2^m
//!   2^m × 4 ≥ 2 × rows (load factor ≤ 0.5), so a probe nearly always reads one line
//!   empty slot: key == `empty`, a value chosen absent from the block's keys
//! ```
//!
//! A bucket's used slots are a prefix, and a full bucket sends inserts to the next one.
//! Tuples of one key share a home bucket and so a probe path; each is inserted at the
//! first free slot on it (no deletions), so a probe meets them in build order: the same
//! order as the mirror table.

use super::hash::FIB64;

/// How many rows ahead a probe or an insert prefetches its bucket.
const PREFETCH_AHEAD: usize = 16;

/// Slots per bucket: four `u64` keys and their payloads fill one 64-byte line.
const SLOTS: usize = 4;

#[derive(Clone, Copy)]
#[repr(C, align(64))]
struct Bucket {
    keys: [u64; SLOTS],
    pays: [u64; SLOTS],
}

/// One block's fast table.
pub struct FastTable {
    buckets: Vec<Bucket>,
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
        let count = (keys.len() * 2).div_ceil(SLOTS).next_power_of_two().max(4);
        let empty = absent_key(keys);
        let mut buckets = crate::kernels::hints::huge_vec(count);
        buckets.resize(
            count,
            Bucket {
                keys: [empty; SLOTS],
                pays: [0; SLOTS],
            },
        );
        let mut t = FastTable {
            buckets,
            mask: count - 1,
            shift: 64 - count.trailing_zeros(),
            empty,
        };
        for (r, (&k, &p)) in keys.iter().zip(payloads).enumerate() {
            if let Some(&ahead) = keys.get(r + PREFETCH_AHEAD) {
                t.prefetch(ahead);
            }
            let mut i = t.home(k);
            loop {
                let b = &mut t.buckets[i];
                if let Some(j) = b.keys.iter().position(|&x| x == empty) {
                    b.keys[j] = k;
                    b.pays[j] = p;
                    break;
                }
                i = (i + 1) & t.mask;
            }
        }
        t
    }

    #[inline(always)]
    fn home(&self, key: u64) -> usize {
        (key.wrapping_mul(FIB64) >> self.shift) as usize
    }

    #[inline(always)]
    fn prefetch(&self, key: u64) {
        crate::kernels::hints::prefetch(&self.buckets, self.home(key));
    }

    /// Calls `hit(row, payload)` for each matching tuple of each of the first `n` probe
    /// keys, rows in order and a row's matches in build order. Keys past `n` are only
    /// prefetched, so a caller probing a long run piece by piece keeps the prefetches in
    /// flight across pieces.
    #[inline]
    pub fn probe_all<K: Copy + Into<u64>>(
        &self,
        keys: &[K],
        n: usize,
        mut hit: impl FnMut(usize, u64),
    ) {
        for &k in keys.iter().take(PREFETCH_AHEAD) {
            self.prefetch(k.into());
        }
        for (r, &k) in keys[..n].iter().enumerate() {
            if let Some(&ahead) = keys.get(r + PREFETCH_AHEAD) {
                self.prefetch(ahead.into());
            }
            let key: u64 = k.into();
            // `empty` is absent from the block's keys, so a probe for it has no match.
            if key == self.empty {
                continue;
            }
            let mut i = self.home(key);
            loop {
                let b = &self.buckets[i];
                let mut full = true;
                for j in 0..SLOTS {
                    if b.keys[j] == key {
                        hit(r, b.pays[j]);
                    }
                    full &= b.keys[j] != self.empty;
                }
                if !full {
                    break;
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
        t.probe_all(&[7u64, 9, u64::MAX, 3, u64::MAX - 5], 5, |r, p| {
            got.push((r, p))
        });
        assert_eq!(got, vec![(0, 1), (0, 3), (0, 5), (2, 4), (3, 2)]);
    }

    #[test]
    fn a_key_spilling_over_many_buckets_keeps_build_order() {
        // Twelve tuples of one key fill three buckets on one path, then other keys.
        let keys: Vec<u64> = (0..12).map(|_| 42).chain(0..20).collect();
        let pays: Vec<u64> = (0..keys.len() as u64).collect();
        let t = FastTable::build(&keys, &pays);
        let mut got = Vec::new();
        t.probe_all(&[42u64], 1, |_, p| got.push(p));
        assert_eq!(got, (0..12).collect::<Vec<u64>>());
    }

    #[test]
    fn keys_past_n_are_prefetched_only() {
        let t = FastTable::build(&[1, 2, 3], &[10, 20, 30]);
        let mut got = Vec::new();
        t.probe_all(&[3u64, 1, 2, 2, 1], 2, |r, p| got.push((r, p)));
        assert_eq!(got, vec![(0, 30), (1, 10)]);
    }
}
