//! The memory-system model: one sweep of 64 points (engines 1..=32 × spread and packed)
//! over demo-sized ledgers (one read and one write entry per engine, 2^20 rows in all),
//! evaluated on the two-stack HBM2 preset. Dimension swept: nothing else; the figure is
//! the time for the whole sweep.

use criterion::Criterion;
use weir::ledger::{Direction, Key, Ledger, Phase, Traffic};
use weir::memsys::sweep::{sweep, SweepPoint};
use weir::memsys::Device;

fn points() -> Vec<SweepPoint> {
    let rows: u64 = 1 << 20;
    let mut pts = Vec::new();
    for series in ["spread", "packed"] {
        for engines in 1..=32u32 {
            let mut l = Ledger::new();
            let per = rows / u64::from(engines);
            for e in 0..engines {
                let c = if series == "spread" { e } else { 0 };
                let ph = Phase::single("scan");
                let read = Traffic {
                    bytes: per * 13,
                    words: (per * 13).div_ceil(64),
                    rows: per,
                };
                let write = Traffic {
                    bytes: per / 25 * 4 + 8,
                    words: (per / 25 * 4).div_ceil(64) + 1,
                    rows: per / 25,
                };
                l.add(Key::device(e, ph, c, Direction::Read), read);
                l.add(Key::device(e, ph, c, Direction::Write), write);
            }
            pts.push(SweepPoint {
                series: series.into(),
                engines,
                ledger: l,
            });
        }
    }
    pts
}

/// Registers the benchmark.
pub fn bench(c: &mut Criterion) {
    let d = Device::preset("hbm2x2").expect("preset");
    let pts = points();
    c.bench_function("memsys sweep 64 points", |b| {
        b.iter(|| sweep(&d, &pts, 512).expect("sweep"))
    });
}
