//! The scan benchmark: one `u32` column, a half-open range predicate, row-id output, timed
//! at several thread counts and selectivities, interleaved with a streaming read of as
//! many bytes (`bench::interleave`) and reported as a fraction of that read's bandwidth.
//! A column that fits in the last-level cache is labelled so and gets no fraction.

use serde::Serialize;

use super::calibrate::CalibrationError;
use super::interleave::{interleave, ReadReference};
use super::stats::Summary;
use crate::gen::{ColumnGen, Dist, Shape, Skew, TableGen};
use crate::kernels::predicate;
use crate::kernels::scan::{
    fuse_ranges, scan_partition_into, EngineIo, Isa, ScanBuffers, ScanOutput, ScanParams,
};
use crate::plot::{Chart, Reference, Series};
use crate::table::{ColumnData, ElemType, Table};

/// Start of the match range the bench's column is generated for.
pub const LO: u32 = 1 << 20;
/// End (exclusive) of the match range.
pub const HI: u32 = 1 << 21;

/// What to measure.
#[derive(Debug, Clone)]
pub struct ScanBenchParams {
    /// Rows of the `u32` column.
    pub rows: u64,
    /// Thread counts.
    pub threads: Vec<usize>,
    /// Selectivities.
    pub selectivities: Vec<f64>,
    /// Timed (reference, kernel) pairs per point, after one warm-up pair.
    pub runs: usize,
    /// Size of the host's last-level cache, if known.
    pub llc_bytes: Option<u64>,
}

/// A fraction of read above this is reported as a disturbed reference, not a result: a
/// kernel that reads every byte cannot outrun a plain read of the same bytes by more than
/// noise.
pub const DISTURBED_ABOVE: f64 = 1.05;

/// One measured point.
#[derive(Debug, Clone, Serialize)]
pub struct ScanPoint {
    /// Worker threads.
    pub threads: usize,
    /// Requested selectivity.
    pub selectivity: f64,
    /// Matching rows.
    pub matches: u64,
    /// Input bytes consumed per run.
    pub bytes: u64,
    /// Kernel timing statistics.
    #[serde(flatten)]
    pub time: Summary,
    /// Reference (streaming read) timing statistics, interleaved with the kernel's.
    pub read_time: Summary,
    /// Input consumed per second at the median time, in GB/s (10^9 bytes).
    pub gbps: f64,
    /// The interleaved reference's read rate at its median time, GB/s.
    pub read_gbps: f64,
    /// Ratio of medians, reference time over kernel time: the kernel's fraction of the
    /// read bandwidth. `None` when the column fits in the last-level cache.
    pub fraction_of_read: Option<f64>,
    /// First and third quartiles of the per-pair ratios.
    pub fraction_q1: f64,
    /// See `fraction_q1`.
    pub fraction_q3: f64,
    /// The fraction is above [`DISTURBED_ABOVE`]: the reference was disturbed.
    pub disturbed: bool,
    /// The column fits in the last-level cache, so it is not compared with memory.
    pub in_cache: bool,
    /// Instruction set of the kernel.
    pub isa: &'static str,
}

/// The bench's column: `rows` u32 values, `selectivity` of them in `[LO, HI)`.
pub fn bench_table(rows: u64, selectivity: f64) -> Table {
    let g = TableGen {
        table: "bench".into(),
        rows,
        seed: 1,
        shape: Shape::Columns(vec![ColumnGen {
            name: "v".into(),
            ty: ElemType::U32,
            dist: Dist::Select {
                selectivity,
                lo: f64::from(LO),
                hi: f64::from(HI),
                min: 0.0,
                max: f64::from(u32::MAX),
                skew: Skew::Uniform,
            },
            corners: false,
        }]),
    };
    g.generate(0..rows)
}

/// `table` with its `u32` columns copied onto 2 MiB pages, as the read reference's buffer
/// is, so both sides of the fraction read the same kind of pages.
fn on_huge_pages(mut table: Table) -> Table {
    for c in &mut table.columns {
        if let ColumnData::U32(v) = &c.data {
            let mut h = crate::kernels::hints::huge_vec(v.len());
            h.extend_from_slice(v);
            c.data = ColumnData::U32(h);
        }
    }
    table
}

/// The bench's scan parameters: `v >= LO and v < HI`, row ids.
pub fn bench_params(table: &Table) -> ScanParams {
    let text = format!("v >= {LO} and v < {HI}");
    let schema = table.schema();
    let predicate = predicate::compile(&text, &schema).expect("the bench predicate is valid");
    ScanParams {
        predicate: fuse_ranges(&predicate, &schema),
        output: ScanOutput::RowIds,
        global_ids: true,
        wide_ids: false,
    }
}

/// Runs the benchmark; `progress(done, total)` is called after each point. `table_for`
/// receives each table once, after it is generated (for saving it). Fails only when the
/// reference buffer cannot be allocated or a pool cannot start.
pub fn bench_scan(
    p: &ScanBenchParams,
    progress: &mut dyn FnMut(usize, usize),
    table_for: &mut dyn FnMut(f64, &Table),
) -> Result<Vec<ScanPoint>, CalibrationError> {
    let isa = Isa::detect();
    let bytes = p.rows * 4;
    let reference = ReadReference::new(bytes)?;
    let in_cache = p.llc_bytes.is_some_and(|llc| bytes <= llc);
    let total = p.threads.len() * p.selectivities.len();
    let mut points = Vec::new();
    for &s in &p.selectivities {
        let table = on_huge_pages(bench_table(p.rows, s));
        table_for(s, &table);
        let params = bench_params(&table);
        let io = EngineIo::host(1);
        for &t in &p.threads {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(t)
                .build()
                .map_err(|e| CalibrationError::ThreadPool {
                    threads: t,
                    message: e.to_string(),
                })?;
            let mut matches = 0;
            // The output buffer is reused across runs, as a caller scanning repeatedly
            // would; the warm-up run sizes it.
            let mut bufs = ScanBuffers::default();
            let m = pool.install(|| {
                interleave(1, p.runs, &mut || reference.run(), &mut || {
                    let (count, _) = scan_partition_into(isa, &table, 0, &params, &io, &mut bufs);
                    matches = std::hint::black_box(count);
                })
            });
            let ref_bytes = reference.bytes() as f64;
            points.push(ScanPoint {
                threads: t,
                selectivity: s,
                matches,
                bytes,
                time: m.kernel,
                read_time: m.reference,
                gbps: bytes as f64 / m.kernel.median_s / 1e9,
                read_gbps: ref_bytes / m.reference.median_s / 1e9,
                fraction_of_read: (!in_cache).then_some(m.ratio),
                fraction_q1: m.ratio_q1,
                fraction_q3: m.ratio_q3,
                disturbed: !in_cache && m.ratio > DISTURBED_ABOVE,
                in_cache,
                isa: isa.name(),
            });
            progress(points.len(), total);
        }
    }
    Ok(points)
}

/// GB/s against selectivity, one line per thread count, with the calibrated read
/// bandwidth of each thread count as a dashed reference.
pub fn chart(points: &[ScanPoint], rows: u64) -> Chart {
    let mut sels: Vec<f64> = Vec::new();
    let mut threads: Vec<usize> = Vec::new();
    for p in points {
        if !sels.contains(&p.selectivity) {
            sels.push(p.selectivity);
        }
        if !threads.contains(&p.threads) {
            threads.push(p.threads);
        }
    }
    let name = |t: usize| {
        if t == 1 {
            "1 thread".to_string()
        } else {
            format!("{t} threads")
        }
    };
    let series = threads
        .iter()
        .map(|&t| Series {
            name: name(t),
            values: sels
                .iter()
                .map(|&s| {
                    points
                        .iter()
                        .find(|p| p.threads == t && p.selectivity == s)
                        .map(|p| p.gbps)
                })
                .collect(),
        })
        .collect();
    let references = threads
        .iter()
        .filter_map(|&t| points.iter().find(|p| p.threads == t))
        .map(|p| Reference {
            name: format!("read, {}", name(p.threads)),
            value: p.read_gbps,
        })
        .collect();
    Chart {
        title: format!("scan of {} MiB of u32, row-id output", (rows * 4) >> 20),
        x_label: "selectivity".into(),
        y_label: "GB/s of input (median)".into(),
        x: sels.iter().map(|s| s.to_string()).collect(),
        series,
        references,
    }
}

/// The points as CSV.
pub fn to_csv(points: &[ScanPoint]) -> String {
    let mut s = String::from("threads,selectivity,matches,bytes,runs,median_s,min_s,max_s,q1_s,q3_s,read_median_s,gbps,read_gbps,fraction_of_read,fraction_q1,fraction_q3,disturbed,in_cache,isa\n");
    for p in points {
        let fraction = p
            .fraction_of_read
            .map_or(String::new(), |f| format!("{f:.3}"));
        s.push_str(&format!(
            "{},{},{},{},{},{:.6},{:.6},{:.6},{:.6},{:.6},{:.6},{:.3},{:.3},{},{:.3},{:.3},{},{},{}\n",
            p.threads,
            p.selectivity,
            p.matches,
            p.bytes,
            p.time.runs,
            p.time.median_s,
            p.time.min_s,
            p.time.max_s,
            p.time.q1_s,
            p.time.q3_s,
            p.read_time.median_s,
            p.gbps,
            p.read_gbps,
            fraction,
            p.fraction_q1,
            p.fraction_q3,
            p.disturbed,
            p.in_cache,
            p.isa
        ));
    }
    s
}
