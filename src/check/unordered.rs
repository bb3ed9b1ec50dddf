//! The unordered compare: golden and device records as multisets, in O(n log n).
//!
//! Both sides are sorted by record value (index as tie-break, so equal records stay in
//! record order) and merged. In a run of equal values with `a` golden and `b` device
//! records, the first `min(a, b)` of each side pair up; the rest of the longer side are
//! missing (golden) or surplus (device) records. Both lists come back in record order.
//! Records of up to 16 bytes sort as integers; longer ones as byte slices.

use rayon::prelude::*;

/// What an unordered compare found.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct Diff {
    /// Golden record indices with no device record of the same value, ascending.
    pub missing: Vec<u64>,
    /// Device record indices with no golden record of the same value, ascending.
    pub surplus: Vec<u64>,
}

/// Compares `gold` and `dev`, both packed records of `rec` bytes; `dev_ok(i)` says whether
/// device record `i` could be read (unreadable ones are never records).
pub fn diff(gold: &[u8], dev: &[u8], rec: usize, dev_ok: &(dyn Fn(usize) -> bool + Sync)) -> Diff {
    assert!(rec > 0, "records have bytes");
    let key = |b: &[u8]| {
        let mut k = [0u8; 16];
        k[..b.len()].copy_from_slice(b);
        k
    };
    match rec {
        1..=8 => keyed(gold, dev, rec, dev_ok, |b| {
            u64::from_le_bytes(key(b)[..8].try_into().expect("8"))
        }),
        9..=16 => keyed(gold, dev, rec, dev_ok, |b| u128::from_le_bytes(key(b))),
        _ => keyed(gold, dev, rec, dev_ok, |b| b),
    }
}

fn keyed<'a, K: Ord + Copy + Send + Sync>(
    gold: &'a [u8],
    dev: &'a [u8],
    rec: usize,
    dev_ok: &(dyn Fn(usize) -> bool + Sync),
    key: impl Fn(&'a [u8]) -> K + Sync,
) -> Diff {
    let sorted = |data: &'a [u8], ok: &(dyn Fn(usize) -> bool + Sync)| {
        let mut v: Vec<(K, u32)> = data
            .par_chunks_exact(rec)
            .enumerate()
            .filter(|(i, _)| ok(*i))
            .map(|(i, c)| (key(c), i as u32))
            .collect();
        v.par_sort_unstable();
        v
    };
    let (g, d) = rayon::join(|| sorted(gold, &|_| true), || sorted(dev, dev_ok));
    let mut out = Diff::default();
    let (mut i, mut j) = (0, 0);
    while i < g.len() || j < d.len() {
        let k = match (g.get(i), d.get(j)) {
            (Some(a), Some(b)) => a.0.min(b.0),
            (Some(a), None) => a.0,
            (None, Some(b)) => b.0,
            (None, None) => unreachable!("loop condition"),
        };
        let (i0, j0) = (i, j);
        while i < g.len() && g[i].0 == k {
            i += 1;
        }
        while j < d.len() && d[j].0 == k {
            j += 1;
        }
        let pairs = (i - i0).min(j - j0);
        out.missing
            .extend(g[i0 + pairs..i].iter().map(|x| u64::from(x.1)));
        out.surplus
            .extend(d[j0 + pairs..j].iter().map(|x| u64::from(x.1)));
    }
    out.missing.par_sort_unstable();
    out.surplus.par_sort_unstable();
    out
}

/// The naive oracle: for each golden record in order, take the first unused equal
/// device record; unmatched golden records are missing, unused device records surplus.
pub fn naive_diff(gold: &[u8], dev: &[u8], rec: usize, dev_ok: &dyn Fn(usize) -> bool) -> Diff {
    let d: Vec<&[u8]> = dev.chunks_exact(rec).collect();
    let mut used: Vec<bool> = (0..d.len()).map(|i| !dev_ok(i)).collect();
    let mut out = Diff::default();
    for (gi, g) in gold.chunks_exact(rec).enumerate() {
        match (0..d.len()).find(|&j| !used[j] && d[j] == g) {
            Some(j) => used[j] = true,
            None => out.missing.push(gi as u64),
        }
    }
    out.surplus = (0..d.len())
        .filter(|&j| !used[j] && dev_ok(j))
        .map(|j| j as u64)
        .collect();
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn sorted_diff_equals_the_naive_multiset_difference(
            rec in prop_oneof![Just(1usize), Just(4), Just(12), Just(20)],
            gold in proptest::collection::vec(0u8..4, 0..240),
            dev in proptest::collection::vec(0u8..4, 0..240),
            holes in proptest::collection::vec(any::<bool>(), 60),
        ) {
            // Values from a small alphabet, so duplicates and partial overlaps are common.
            let cut = |v: &[u8]| v[..v.len() / rec * rec].to_vec();
            let (gold, dev) = (cut(&gold), cut(&dev));
            let ok = |i: usize| !holes[i % holes.len()];
            let fast = diff(&gold, &dev, rec, &ok);
            let slow = naive_diff(&gold, &dev, rec, &ok);
            prop_assert_eq!(fast, slow);
        }
    }

    #[test]
    fn a_record_written_twice_is_one_missing_and_one_surplus() {
        let gold: Vec<u8> = [1u32, 2, 3].iter().flat_map(|v| v.to_le_bytes()).collect();
        let dev: Vec<u8> = [3u32, 1, 1].iter().flat_map(|v| v.to_le_bytes()).collect();
        let d = diff(&gold, &dev, 4, &|_| true);
        assert_eq!(d.missing, [1]);
        assert_eq!(d.surplus, [2]);
    }
}
