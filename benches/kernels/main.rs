//! criterion benchmarks, one module per kernel. `cargo bench` runs them all.

use criterion::{criterion_group, criterion_main};

mod check;
mod scan;

criterion_group! {
    name = kernels;
    config = criterion::Criterion::default().sample_size(10);
    targets = scan::bench, check::bench
}
criterion_main!(kernels);
