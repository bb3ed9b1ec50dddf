//! The SGD kernel: one epoch of squared-loss SGD (f32, 16-lane tree) for d ∈ {16, 64, 256,
//! 1024} and B ∈ {1, 16, 256}, n = 2^20 rows (2^18 for d = 1024, keeping the data at 1 GiB),
//! one engine per thread at 1 thread and at all threads. Throughput is record bytes of all
//! engines, so criterion reports GB/s consumed.

use criterion::{BenchmarkId, Criterion, Throughput};
use weir::bench::sgd::{bench_data, bench_io, bench_params};
use weir::kernels::sgd::{train_validated, Numeric};

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
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(t)
                .build()
                .unwrap();
            g.throughput(Throughput::Bytes(rows * (d as u64 + 1) * 4 * t as u64));
            for b in [1usize, 16, 256] {
                let p = bench_params(
                    b,
                    Numeric::F32 {
                        lanes: 16,
                        ftz: false,
                    },
                    t,
                );
                let io = bench_io(t);
                g.bench_with_input(BenchmarkId::new(format!("{t}thr"), b), &b, |bch, _| {
                    bch.iter(|| pool.install(|| train_validated(&data, &p, &io).unwrap().len()))
                });
            }
        }
        g.finish();
    }
}
