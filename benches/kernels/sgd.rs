//! The SGD kernel: one epoch of squared-loss SGD (f32, 16-lane tree) for d ∈ {16, 64, 256,
//! 1024} and B ∈ {1, 16, 256}, n = 2^20 rows (2^18 for d = 1024, keeping the data at 1 GiB),
//! one engine per thread at 1 thread and at all threads, each over its own copy of the data
//! (as `weir bench sgd`). Throughput is record bytes of all engines, so criterion reports
//! GB/s consumed.

use criterion::{BenchmarkId, Criterion, Throughput};
use weir::bench::sgd::{bench_data, replicas, train_replicas};
use weir::kernels::sgd::Numeric;

pub fn bench(c: &mut Criterion) {
    let all = std::thread::available_parallelism().map_or(1, |n| n.get());
    let mut threads = vec![1];
    if all > 1 {
        threads.push(all);
    }
    for d in [16usize, 64, 256, 1024] {
        let rows: u64 = if d == 1024 { 1 << 18 } else { 1 << 20 };
        let data = bench_data(rows, d);
        let mut g = c.benchmark_group(format!("sgd_f32_d{d}"));
        for &t in &threads {
            let copies = replicas(&data, t);
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(t)
                .build()
                .unwrap();
            g.throughput(Throughput::Bytes(rows * (d as u64 + 1) * 4 * t as u64));
            let f32_16 = Numeric::F32 {
                lanes: 16,
                ftz: false,
            };
            for b in [1usize, 16, 256] {
                g.bench_with_input(BenchmarkId::new(format!("{t}thr"), b), &b, |bch, _| {
                    bch.iter(|| pool.install(|| train_replicas(&copies, b, &f32_16).unwrap().len()))
                });
            }
        }
        g.finish();
    }
}
