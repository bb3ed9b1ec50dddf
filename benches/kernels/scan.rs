//! The scan kernel. Sweeps: selectivity (0.1 %, 1 %, 10 %, 50 %) on a 256 MiB u32 column
//! with row-id output, and the three output kinds at 1 %. Throughput is input bytes, so
//! criterion reports GB/s of input consumed.

use criterion::{BenchmarkId, Criterion, Throughput};
use weir::bench::scan::{bench_params, bench_table};
use weir::kernels::scan::{scan_partition, EngineIo, Isa, ScanOutput};

const ROWS: u64 = 1 << 26;

fn io() -> EngineIo {
    EngineIo::host(1)
}

pub fn bench(c: &mut Criterion) {
    let isa = Isa::detect();
    let mut g = c.benchmark_group("scan_u32_row_ids");
    g.throughput(Throughput::Bytes(ROWS * 4));
    for s in [0.001, 0.01, 0.1, 0.5] {
        let table = bench_table(ROWS, s);
        let params = bench_params(&table);
        g.bench_with_input(BenchmarkId::from_parameter(s), &table, |b, t| {
            b.iter(|| scan_partition(isa, t, 0, &params, &io()).count)
        });
    }
    g.finish();
    let mut g = c.benchmark_group("scan_u32_outputs");
    g.throughput(Throughput::Bytes(ROWS * 4));
    let table = bench_table(ROWS, 0.01);
    for (name, out) in [
        ("row_ids", ScanOutput::RowIds),
        ("bitmap", ScanOutput::Bitmap),
        ("project", ScanOutput::Project(vec![0])),
    ] {
        let mut params = bench_params(&table);
        params.output = out;
        g.bench_function(name, |b| {
            b.iter(|| scan_partition(isa, &table, 0, &params, &io()).count)
        });
    }
    g.finish();
}
