//! The join kernel on shape A (|S| = 2^20 unique u64 keys, |L| = 2^24, u64 key + payload,
//! pairs materialised): the fast join and the mirror join. Throughput is probe tuples.

use criterion::{Criterion, Throughput};
use weir::bench::join::{bench_params, bench_tables, Materialised};
use weir::kernels::join::{fast_join, join_engine, JoinIo};

const BUILD: u64 = 1 << 20;
const PROBE: u64 = 1 << 24;

pub fn bench(c: &mut Criterion) {
    let (b, l) = bench_tables(BUILD, PROBE);
    let p = bench_params();
    let mut g = c.benchmark_group("join_shape_a");
    g.throughput(Throughput::Elements(PROBE));
    let mut kept = Materialised::default();
    g.bench_function("fast", |bch| {
        bch.iter(|| {
            kept.recycle();
            fast_join(&b, &l, 0, &p, &mut |v| kept.take(v)).unwrap()
        })
    });
    let mut out: Vec<u8> = Vec::new();
    g.bench_function("mirror", |bch| {
        bch.iter(|| {
            out.clear();
            let sink = &mut |c: &[u8]| out.extend_from_slice(c);
            join_engine(&b, &l, 0, &p, &JoinIo::host(), sink)
                .unwrap()
                .records
        })
    });
    g.finish();
}
