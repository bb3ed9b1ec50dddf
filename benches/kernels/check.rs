//! The unordered check at 16 M u32 records: the device side a fixed permutation of the
//! golden side with a few records replaced. The reference beside it sorts the same two
//! record sets (the floor any sort-based multiset compare pays), so the ratio shows what
//! pairing and reporting add.

use criterion::{Criterion, Throughput};
use rayon::prelude::*;
use weir::check::unordered::diff;

const RECORDS: usize = 16 << 20;

fn data() -> (Vec<u8>, Vec<u8>) {
    let gold: Vec<u32> = (0..RECORDS as u32)
        .map(|i| i.wrapping_mul(2_654_435_761))
        .collect();
    // A fixed permutation: index i goes to i * 3 mod n (3 is coprime with 2^24).
    let mut dev = vec![0u32; RECORDS];
    for (i, v) in gold.iter().enumerate() {
        dev[i * 3 % RECORDS] = *v;
    }
    for k in 0..16 {
        dev[k * 1_000_003 % RECORDS] ^= 0x8000_0000;
    }
    let bytes = |v: &[u32]| v.iter().flat_map(|x| x.to_le_bytes()).collect::<Vec<u8>>();
    (bytes(&gold), bytes(&dev))
}

pub fn bench(c: &mut Criterion) {
    let (gold, dev) = data();
    let mut g = c.benchmark_group("check_unordered_16M_u32");
    g.throughput(Throughput::Elements(RECORDS as u64));
    g.bench_function("diff", |b| {
        b.iter(|| diff(&gold, &dev, 4, &|_| true).missing.len())
    });
    g.bench_function("reference_sort_both", |b| {
        b.iter(|| {
            let sort = |d: &[u8]| {
                let mut v: Vec<u32> = d
                    .par_chunks_exact(4)
                    .map(|c| u32::from_le_bytes(c.try_into().expect("4")))
                    .collect();
                v.par_sort_unstable();
                v[0]
            };
            sort(&gold) ^ sort(&dev)
        })
    });
    g.finish();
}
