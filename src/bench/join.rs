//! The join benchmark: S(key, payload) of unique u64 keys, L(key, payload) of u64 with
//! every row matching, inner join materialising (probe payload, build payload) pairs.
//! Each timed fast-join run sits between read passes over the same bytes of L
//! (reference, kernel, reference, …), and the mirror (golden) join is timed as well.

use rayon::prelude::*;
use serde::Serialize;

use super::stats::{summarize, Summary};
use crate::gen::join::{Dup, JoinGen, KeySkew};
use crate::kernels::join::{fast_join, join_engine, JoinIo, JoinParams, OutField, Variant};
use crate::table::{ColumnData, ElemType, Table};

/// What to measure.
#[derive(Debug, Clone)]
pub struct JoinBenchParams {
    /// |S|.
    pub build_rows: u64,
    /// |L|.
    pub probe_rows: u64,
    /// Thread counts.
    pub threads: Vec<usize>,
    /// Timed runs per point (after one warm-up).
    pub runs: usize,
}

/// One measured point.
#[derive(Debug, Clone, Serialize)]
pub struct JoinPoint {
    /// Worker threads.
    pub threads: usize,
    /// Output pairs.
    pub pairs: u64,
    /// Fast join times.
    pub fast: Summary,
    /// Probe tuples per second at the median, millions.
    pub mprobes: f64,
    /// GB/s of L (key + payload) at the median.
    pub gbps: f64,
    /// Read pass over L's bytes, GB/s at the median.
    pub read_gbps: f64,
    /// Median of per-run kernel/reference speed ratios.
    pub ratio: f64,
    /// Smallest and largest per-run ratio.
    pub ratio_min: f64,
    /// Largest per-run ratio.
    pub ratio_max: f64,
    /// Mirror join times.
    pub mirror: Summary,
    /// Mirror probes per second at the median, millions.
    pub mirror_mprobes: f64,
}

/// The bench's tables.
pub fn bench_tables(build_rows: u64, probe_rows: u64) -> (Table, Table) {
    let g = JoinGen {
        seed: 1,
        build_rows,
        probe_rows,
        key_type: ElemType::U64,
        payload_type: ElemType::U64,
        dup: Dup::Unique,
        match_rate: 1.0,
        skew: KeySkew::Uniform,
    };
    let b = g.build().expect("bench generator options are valid");
    let l = g.probe(&b, 0..probe_rows).table;
    (b.table, l)
}

/// The bench's join parameters: one block, (probe payload, build payload) pairs.
pub fn bench_params() -> JoinParams {
    let mut p = JoinParams::new(ElemType::U64, ElemType::U64);
    p.capacity_bytes = 1 << 40;
    p.variant = Variant::Inner(vec![OutField::ProbePayload, OutField::BuildPayload]);
    p
}

fn read_pass(l: &Table) -> u64 {
    l.columns
        .iter()
        .map(|c| match &c.data {
            ColumnData::U64(v) => v
                .par_chunks(1 << 16)
                .map(|c| c.iter().fold(0u64, |a, &x| a ^ x))
                .reduce(|| 0, |a, b| a ^ b),
            _ => 0,
        })
        .fold(0, |a, b| a ^ b)
}

/// Materialised join output: the record buffers the fast join hands over, kept as they
/// are (no copy), and recycled as empty buffers with capacity for the next run.
#[derive(Default)]
pub struct Materialised {
    kept: Vec<Vec<u8>>,
    pool: Vec<Vec<u8>>,
}

impl Materialised {
    /// Takes one run of records, leaving a recycled buffer in its place.
    pub fn take(&mut self, v: &mut Vec<u8>) {
        let spare = self.pool.pop().unwrap_or_default();
        self.kept.push(std::mem::replace(v, spare));
    }

    /// Bytes held.
    pub fn bytes(&self) -> usize {
        self.kept.iter().map(Vec::len).sum()
    }

    /// Empties the kept buffers into the pool for the next run.
    pub fn recycle(&mut self) {
        for mut v in self.kept.drain(..) {
            v.clear();
            self.pool.push(v);
        }
    }
}

fn timed(f: impl FnOnce()) -> f64 {
    let t = std::time::Instant::now();
    f();
    t.elapsed().as_secs_f64()
}

/// Runs the benchmark; `progress(done, total)` after each thread count.
pub fn bench_join(
    p: &JoinBenchParams,
    tables: &(Table, Table),
    progress: &mut dyn FnMut(usize, usize),
) -> Vec<JoinPoint> {
    let (b, l) = tables;
    let params = bench_params();
    let l_bytes = p.probe_rows * 16;
    let mut out = Materialised::default();
    let mut points = Vec::new();
    for (i, &t) in p.threads.iter().enumerate() {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(t)
            .build()
            .expect("thread pool");
        let (mut refs, mut fast, mut mirror) = (Vec::new(), Vec::new(), Vec::new());
        let mut pairs = 0;
        pool.install(|| {
            for run in 0..=p.runs {
                let r = timed(|| {
                    std::hint::black_box(read_pass(l));
                });
                out.recycle();
                let k = timed(|| {
                    pairs = fast_join(b, l, 0, &params, &mut |v| out.take(v)).expect("bench join");
                });
                assert_eq!(out.bytes() as u64, pairs * 16, "16-byte pairs");
                let m = timed(|| {
                    let mut n = 0usize;
                    join_engine(b, l, 0, &params, &JoinIo::host(), &mut |c| n += c.len())
                        .expect("bench join");
                    std::hint::black_box(n);
                });
                if run > 0 {
                    refs.push(r);
                    fast.push(k);
                    mirror.push(m);
                }
            }
        });
        let refs_s = summarize(&refs);
        let mut ratios: Vec<f64> = refs.iter().zip(&fast).map(|(r, k)| r / k).collect();
        ratios.sort_by(f64::total_cmp);
        let fs = summarize(&fast);
        let ms = summarize(&mirror);
        points.push(JoinPoint {
            threads: t,
            pairs,
            mprobes: p.probe_rows as f64 / fs.median_s / 1e6,
            gbps: l_bytes as f64 / fs.median_s / 1e9,
            read_gbps: l_bytes as f64 / refs_s.median_s / 1e9,
            ratio: ratios[ratios.len() / 2],
            ratio_min: ratios[0],
            ratio_max: ratios[ratios.len() - 1],
            fast: fs,
            mirror_mprobes: p.probe_rows as f64 / ms.median_s / 1e6,
            mirror: ms,
        });
        progress(i + 1, p.threads.len());
    }
    points
}

/// The points as CSV.
pub fn to_csv(points: &[JoinPoint]) -> String {
    let mut s = String::from("threads,pairs,runs,median_s,min_s,max_s,mprobes,gbps,read_gbps,ratio,ratio_min,ratio_max,mirror_median_s,mirror_mprobes\n");
    for p in points {
        s.push_str(&format!(
            "{},{},{},{:.6},{:.6},{:.6},{:.2},{:.3},{:.3},{:.3},{:.3},{:.3},{:.6},{:.2}\n",
            p.threads,
            p.pairs,
            p.fast.runs,
            p.fast.median_s,
            p.fast.min_s,
            p.fast.max_s,
            p.mprobes,
            p.gbps,
            p.read_gbps,
            p.ratio,
            p.ratio_min,
            p.ratio_max,
            p.mirror.median_s,
            p.mirror_mprobes
        ));
    }
    s
}

/// Probe tuples per second by thread count, fast and mirror.
pub fn chart(points: &[JoinPoint], build_rows: u64, probe_rows: u64) -> crate::plot::Chart {
    use crate::plot::{Chart, Series};
    let series = |name: &str, f: &dyn Fn(&JoinPoint) -> f64| Series {
        name: name.into(),
        values: points.iter().map(|p| Some(f(p))).collect(),
    };
    Chart {
        title: format!("hash join, |S| = {build_rows}, |L| = {probe_rows}, u64 key + payload"),
        x_label: "threads".into(),
        y_label: "M probe tuples/s (median)".into(),
        x: points.iter().map(|p| p.threads.to_string()).collect(),
        series: vec![
            series("fast join", &|p| p.mprobes),
            series("mirror join", &|p| p.mirror_mprobes),
        ],
        references: Vec::new(),
    }
}
