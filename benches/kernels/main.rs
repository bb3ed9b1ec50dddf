//! criterion benchmarks, one module per kernel. `cargo bench` runs them all.

use criterion::{criterion_group, criterion_main};

mod check;
mod join;
mod memsys;
mod scan;
mod sgd;

criterion_group! {
    name = kernels;
    config = criterion::Criterion::default().sample_size(10);
    targets = scan::bench, sgd::bench, memsys::bench, join::bench, check::bench
}
criterion_main!(kernels);
