//! The SGD benchmark: one epoch of squared-loss minibatch SGD over n × d `f32` samples,
//! one engine per thread, each over its own copy of the dataset (as replicated engines
//! read their own replica: engines sharing one copy in step would serve each other from
//! the last-level cache, and the figure would swing with how far apart they run), timed
//! interleaved with a read pass over the same copies by the same threads (the
//! reference's loop, in the shape that reads them fastest): reference, kernel,
//! reference, kernel, … so both see the same machine state. Reported
//! as samples/s, GB/s of records consumed, and the ratio of medians kernel/reference with
//! the spread of per-pair ratios.

use std::time::Instant;

use rayon::prelude::*;
use serde::Serialize;

use super::calibrate::{fastest_shape, read_sum, ReadShape};
use super::stats::{summarize, Summary};
use crate::gen::sgd::{Labels, SamplesGen};
use crate::kernels::isa::Isa;
use crate::kernels::sgd::*;
use crate::plot::{Chart, Series};

/// What to measure.
#[derive(Debug, Clone)]
pub struct SgdBenchParams {
    /// Feature counts d.
    pub dims: Vec<usize>,
    /// Minibatch sizes B.
    pub batches: Vec<usize>,
    /// Samples n (capped so the data stays at or under `max_bytes`).
    pub rows: u64,
    /// Largest dataset in bytes.
    pub max_bytes: u64,
    /// Thread counts (= engines).
    pub threads: Vec<usize>,
    /// Arithmetic modes to time.
    pub modes: Vec<Numeric>,
    /// Timed kernel runs per point (each paired with a reference run), after a warm-up.
    pub runs: usize,
}

/// One measured point.
#[derive(Debug, Clone, Serialize)]
pub struct SgdPoint {
    /// Features.
    pub dims: usize,
    /// Minibatch size.
    pub batch: usize,
    /// Samples.
    pub rows: u64,
    /// Threads and engines.
    pub threads: usize,
    /// Arithmetic mode.
    pub mode: String,
    /// Kernel timing (one epoch of every engine).
    #[serde(flatten)]
    pub time: Summary,
    /// Samples per second over all engines.
    pub samples_per_s: f64,
    /// Record bytes consumed per second over all engines, GB/s.
    pub gbps: f64,
    /// The interleaved read pass over the same bytes, GB/s at its median.
    pub read_gbps: f64,
    /// Median kernel GB/s over median read GB/s.
    pub ratio: f64,
    /// Smallest and largest ratio of a kernel run to its paired read run.
    pub ratio_min: f64,
    /// See `ratio_min`.
    pub ratio_max: f64,
    /// Engine 0's final model (for comparing with another implementation).
    pub model: Vec<f64>,
}

/// The name of a mode in tables.
pub fn mode_name(n: &Numeric) -> String {
    match n {
        Numeric::F32 { lanes, ftz } => format!("f32 L={lanes}{}", if *ftz { " ftz" } else { "" }),
        Numeric::F64 { lanes } => format!("f64 L={lanes}"),
        Numeric::Fixed(s) => format!("fixed {}/{}/{}", s.data, s.model, s.acc),
    }
}

/// The bench's dataset: `rows` samples of `dims` features, regression labels.
pub fn bench_data(rows: u64, dims: usize) -> SgdData {
    SamplesGen {
        rows,
        dims,
        seed: 1,
        scale: vec![1.0],
        noise: 0.1,
        bias: 0.0,
        labels: Labels::Regression,
    }
    .generate()
    .data
}

/// The bench's parameters: squared loss, one epoch, input order, one engine (each engine
/// of a bench trains on its own copy, see [`train_replicas`]).
pub fn bench_params(batch: usize, numeric: Numeric) -> SgdParams {
    let h = Hyper {
        step: Step {
            eta: 1e-3,
            decay: 0.0,
        },
        l2: 0.0,
    };
    SgdParams {
        loss: Loss::Squared,
        batch,
        hyper: h,
        bias: true,
        epochs: 1,
        order: Order::Input,
        tol: None,
        numeric,
        engines: EngineMode::Independent { sweep: vec![h] },
        capacity: None,
        block_epochs: 1,
        snapshots: 0,
        pad_records: false,
        quant: None,
    }
}

/// Engine placements for `n` engines (64-byte words, separate channels).
pub fn bench_io(n: usize) -> Vec<SgdIo> {
    (0..n as u32)
        .map(|e| SgdIo {
            engine: e,
            word_bytes: 64,
            channel: e,
            data_base: 0,
            model_base: 0,
        })
        .collect()
}

/// `n` copies of `data`, one per engine, their features on huge pages as the generator
/// places them (the read pass and the engines then stream alike from every copy).
pub fn replicas(data: &SgdData, n: usize) -> Vec<SgdData> {
    (0..n).map(|_| replica(data)).collect()
}

/// One copy of `data` for [`replicas`].
fn replica(data: &SgdData) -> SgdData {
    let x = data.features.as_slice().expect("row-major");
    let mut v = crate::kernels::hints::huge_vec(x.len());
    v.extend_from_slice(x);
    SgdData {
        features: ndarray::Array2::from_shape_vec(data.features.raw_dim(), v)
            .expect("the same shape"),
        labels: data.labels.clone(),
    }
}

/// One epoch of one engine per copy (placed by [`bench_io`]), all at once on the current
/// thread pool: the same work as a job's independent engines with one step size.
pub fn train_replicas(
    copies: &[SgdData],
    batch: usize,
    numeric: &Numeric,
) -> Result<Vec<SgdEngineResult>, SgdError> {
    let params = bench_params(batch, numeric.clone());
    copies
        .par_iter()
        .zip(bench_io(copies.len()))
        .map(|(c, io)| train_validated(c, &params, &[io]).map(|mut r| r.remove(0)))
        .collect()
}

/// A slice of `f32` as the 8-byte words the read loop takes, with the values before and
/// after the aligned middle (at most one each).
fn as_words(v: &[f32]) -> (&[f32], &[u64], &[f32]) {
    // SAFETY: every bit pattern is a valid `u64`, and `align_to` keeps the middle aligned
    // and within `v`.
    unsafe { v.align_to::<u64>() }
}

/// The fastest read shape (see [`fastest_shape`]) over each copy's features on the
/// current pool, one copy per thread.
fn read_shape(isa: Isa, copies: &[SgdData]) -> ReadShape {
    let parts: Vec<&[u64]> = copies
        .iter()
        .map(|c| as_words(c.features.as_slice().expect("row-major")).1)
        .collect();
    fastest_shape(isa, &parts)
}

/// One thread per copy reading its every feature and label once (the bytes one epoch of
/// each engine reads) with the reference's loop in `shape`, so the kernel is set against
/// the fastest read of the very bytes it streams.
fn read_pass(copies: &[SgdData], isa: Isa, shape: ReadShape) {
    rayon::broadcast(|ctx| {
        let c = &copies[ctx.index()];
        for v in [
            c.features.as_slice().expect("row-major"),
            c.labels.as_slice().expect("contiguous"),
        ] {
            let (head, mid, tail) = as_words(v);
            std::hint::black_box(read_sum(isa, shape, std::hint::black_box(mid)));
            std::hint::black_box(head.iter().chain(tail).sum::<f32>());
        }
    });
}

/// Runs the benchmark; `progress(done, total)` after each point; `data_for(d, data)`
/// receives each dataset once (for saving it).
pub fn bench_sgd(
    p: &SgdBenchParams,
    progress: &mut dyn FnMut(usize, usize),
    data_for: &mut dyn FnMut(usize, &SgdData),
) -> Result<Vec<SgdPoint>, SgdError> {
    let total = p.dims.len() * p.batches.len() * p.threads.len() * p.modes.len();
    let mut points = Vec::new();
    let isa = Isa::detect();
    for &d in &p.dims {
        let rows = p.rows.min(p.max_bytes / ((d as u64 + 1) * 4)).max(1);
        let data = bench_data(rows, d);
        data_for(d, &data);
        validate(&data, &bench_params(1, Numeric::F64 { lanes: 1 }), Some(d))?;
        let bytes = rows * (d as u64 + 1) * 4;
        for &t in &p.threads {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(t)
                .build()
                .expect("thread pool");
            let copies = replicas(&data, t);
            let shape = pool.install(|| read_shape(isa, &copies));
            for numeric in &p.modes {
                for &b in &p.batches {
                    let (mut kt, mut rt, mut model) = (Vec::new(), Vec::new(), Vec::new());
                    pool.install(|| -> Result<(), SgdError> {
                        for run in 0..=p.runs {
                            let s = Instant::now();
                            read_pass(&copies, isa, shape);
                            let r = s.elapsed().as_secs_f64();
                            let s = Instant::now();
                            let rs = train_replicas(&copies, b.min(rows as usize), numeric);
                            let rs = std::hint::black_box(rs?);
                            let k = s.elapsed().as_secs_f64();
                            model = rs[0].model.to_f64();
                            if run > 0 {
                                rt.push(r);
                                kt.push(k);
                            }
                        }
                        Ok(())
                    })?;
                    let (time, rtime) = (summarize(&kt), summarize(&rt));
                    let all = (bytes * t as u64) as f64;
                    let ratios: Vec<f64> = kt.iter().zip(&rt).map(|(k, r)| r / k).collect();
                    points.push(SgdPoint {
                        dims: d,
                        batch: b,
                        rows,
                        threads: t,
                        mode: mode_name(numeric),
                        samples_per_s: (rows * t as u64) as f64 / time.median_s,
                        gbps: all / time.median_s / 1e9,
                        read_gbps: all / rtime.median_s / 1e9,
                        ratio: rtime.median_s / time.median_s,
                        ratio_min: ratios.iter().copied().fold(f64::INFINITY, f64::min),
                        ratio_max: ratios.iter().copied().fold(0.0, f64::max),
                        time,
                        model,
                    });
                    progress(points.len(), total);
                }
            }
        }
    }
    Ok(points)
}

/// GB/s against d, one line per (threads, mode, B).
pub fn chart(points: &[SgdPoint]) -> Chart {
    let mut dims: Vec<usize> = points.iter().map(|p| p.dims).collect();
    dims.dedup();
    let mut keys: Vec<(usize, String, usize)> = Vec::new();
    for p in points {
        let k = (p.threads, p.mode.clone(), p.batch);
        if !keys.contains(&k) {
            keys.push(k);
        }
    }
    let series = keys
        .iter()
        .map(|(t, m, b)| Series {
            name: format!("{t} thr, {m}, B={b}"),
            values: dims
                .iter()
                .map(|&d| {
                    points
                        .iter()
                        .find(|p| p.dims == d && p.threads == *t && &p.mode == m && p.batch == *b)
                        .map(|p| p.gbps)
                })
                .collect(),
        })
        .collect();
    Chart {
        title: "one epoch of squared-loss SGD, one engine per thread".into(),
        x_label: "features d".into(),
        y_label: "GB/s of records (median)".into(),
        x: dims.iter().map(|d| d.to_string()).collect(),
        series,
        references: Vec::new(),
    }
}

/// The points as CSV.
pub fn to_csv(points: &[SgdPoint]) -> String {
    let mut s = String::from("dims,batch,rows,threads,mode,runs,median_s,min_s,max_s,samples_per_s,gbps,read_gbps,ratio,ratio_min,ratio_max\n");
    for p in points {
        s.push_str(&format!(
            "{},{},{},{},{},{},{:.6},{:.6},{:.6},{:.0},{:.3},{:.3},{:.3},{:.3},{:.3}\n",
            p.dims,
            p.batch,
            p.rows,
            p.threads,
            p.mode,
            p.time.runs,
            p.time.median_s,
            p.time.min_s,
            p.time.max_s,
            p.samples_per_s,
            p.gbps,
            p.read_gbps,
            p.ratio,
            p.ratio_min,
            p.ratio_max
        ));
    }
    s
}
