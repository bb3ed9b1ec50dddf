//! Every command-line flag, defined once.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

/// Golden memory images, byte ledgers and a fast CPU baseline for accelerator kernels.
#[derive(Debug, Parser)]
#[command(name = "weir", version, about, propagate_version = true)]
pub struct Cli {
    /// The command.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run a job: write input images, golden outputs, ledger, memory map and manifest.
    Run(RunArgs),
    /// Print a run's manifest as a table and verify every file's checksum.
    Inspect(InspectArgs),
    /// Compare device or simulator dumps with a run's golden outputs.
    Check(CheckArgs),
    /// Generate a table for a kernel and write it as CSV, .npy or .bin.
    Gen(GenArgs),
    /// Measure the host's streaming read, write and copy bandwidth.
    Calibrate(CalibrateArgs),
    /// Benchmark a kernel on the host against the calibrated bandwidth.
    Bench(BenchArgs),
    /// Run the built-in wind-farm demo end to end.
    Demo(DemoArgs),
    /// Predict a run's device time from its ledger: bottleneck, per phase and in total.
    Plan(PlanArgs),
    /// Write a run's self-contained HTML report (ledger chart, plan, figures).
    Report(ReportArgs),
}

/// `weir run`.
#[derive(Debug, Args)]
pub struct RunArgs {
    /// The job file (TOML).
    pub job: PathBuf,
    /// Output directory (created; must not exist or be empty unless --force).
    #[arg(long)]
    pub out: PathBuf,
    /// Worker threads (default: all cores). Results do not depend on it.
    #[arg(long)]
    pub threads: Option<usize>,
    /// Replace an existing output directory.
    #[arg(long)]
    pub force: bool,
    /// Run once per seed A, A+1, …, B-1 into DIR/seed-N/ (constrained-random regression).
    #[arg(long, value_name = "A..B")]
    pub seeds: Option<String>,
}

/// `weir inspect`.
#[derive(Debug, Args)]
pub struct InspectArgs {
    /// A run's output directory.
    pub dir: PathBuf,
}

/// `weir check`.
#[derive(Debug, Args)]
pub struct CheckArgs {
    /// A run's output directory (holding manifest.json and golden/), or its golden/.
    pub golden: PathBuf,
    /// One dump (any name with --output), a directory of dumps of any subset of outputs
    /// named like the golden files (scan.p0.out.hex, …), or another run's directory.
    pub device: PathBuf,
    /// The golden output to check (scan.p3.out); repeat for several. With one dump file,
    /// names the output it holds.
    #[arg(long = "output", value_name = "NAME")]
    pub outputs: Vec<String>,
    /// Compare record outputs as multisets (for engines that emit in another order).
    #[arg(long)]
    pub unordered: bool,
    /// Nonzero data after the last record inside the last word (bitmaps: bits past the
    /// last row) is a mismatch, not a note.
    #[arg(long)]
    pub strict: bool,
    /// Float outputs (f32/f64 models, losses) agree within N units in the last place.
    #[arg(long, value_name = "N", conflicts_with_all = ["abs", "rel"])]
    pub ulps: Option<u64>,
    /// Float outputs agree within this absolute difference (plus --rel of the golden value).
    #[arg(long, value_name = "X")]
    pub abs: Option<f64>,
    /// Float outputs agree within this fraction of the golden value's magnitude (plus --abs).
    #[arg(long, value_name = "X")]
    pub rel: Option<f64>,
    /// Print the report as JSON.
    #[arg(long)]
    pub json: bool,
}

/// `weir gen`.
#[derive(Debug, Args)]
pub struct GenArgs {
    /// Which kernel's data.
    #[command(subcommand)]
    pub kind: GenKind,
}

/// Generators.
#[derive(Debug, Subcommand)]
pub enum GenKind {
    /// One value column with a requested selectivity for `lo <= v < hi`.
    Scan(GenScanArgs),
    /// Dense features and labels for the SGD kernel, with known true weights.
    Sgd(GenSgdArgs),
    /// A build table S(key, payload) and a probe table L(key, payload) for the join.
    Join(GenJoinArgs),
}

/// `weir gen sgd`.
#[derive(Debug, Args)]
pub struct GenSgdArgs {
    /// Samples.
    #[arg(long, default_value_t = 1 << 16)]
    pub rows: u64,
    /// Features per sample.
    #[arg(long, default_value_t = 16)]
    pub dims: usize,
    /// Labels: regression, logistic or margin.
    #[arg(long, default_value = "regression")]
    pub labels: String,
    /// Per-feature scales, comma-separated, repeated cyclically.
    #[arg(long, value_delimiter = ',', default_value = "1")]
    pub scale: Vec<f64>,
    /// Noise standard deviation.
    #[arg(long, default_value_t = 0.1)]
    pub noise: f64,
    /// True bias.
    #[arg(long, default_value_t = 0.0)]
    pub bias: f64,
    /// Seed.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Output prefix: writes PREFIX.x.npy (n × d f32), PREFIX.y.npy and PREFIX.weights.json.
    #[arg(long, value_name = "PREFIX")]
    pub out: PathBuf,
    /// Replace existing files.
    #[arg(long)]
    pub force: bool,
}

/// `weir gen scan`.
#[derive(Debug, Args)]
pub struct GenScanArgs {
    /// Rows.
    #[arg(long, default_value_t = 1 << 20)]
    pub rows: u64,
    /// Element type of the value column.
    #[arg(long = "type", default_value = "u32")]
    pub ty: String,
    /// Requested fraction of rows with lo <= v < hi.
    #[arg(long, default_value_t = 0.01)]
    pub selectivity: f64,
    /// Start of the match range (inclusive); negative values are values (`--lo -5`).
    #[arg(long, default_value_t = 1000.0, allow_negative_numbers = true)]
    pub lo: f64,
    /// End of the match range (exclusive).
    #[arg(long, default_value_t = 2000.0, allow_negative_numbers = true)]
    pub hi: f64,
    /// Value skew: uniform or zipf.
    #[arg(long, default_value = "uniform")]
    pub skew: String,
    /// Zipf exponent.
    #[arg(long, default_value_t = 0.99)]
    pub theta: f64,
    /// Plant corner rows (bounds, type limits, NaN, ±0, ±∞).
    #[arg(long)]
    pub corners: bool,
    /// Seed.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Output file: .csv, .npy or .bin.
    #[arg(long)]
    pub out: PathBuf,
    /// Replace an existing file.
    #[arg(long)]
    pub force: bool,
}

/// `weir calibrate`.
#[derive(Debug, Args)]
pub struct CalibrateArgs {
    /// Measure with 1..=N threads (default: all cores).
    #[arg(long, value_parser = at_least_one)]
    pub threads: Option<usize>,
    /// Buffer size in bytes (accepts suffixes K, M, G; default 1G).
    #[arg(long, default_value = "1G")]
    pub bytes: String,
    /// Repetitions per measure (the best is kept).
    #[arg(long, default_value_t = 5)]
    pub runs: usize,
    /// Save the calibration as JSON (read by `weir bench --calibration`).
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Replace an existing --out file.
    #[arg(long)]
    pub force: bool,
}

/// `weir bench`.
#[derive(Debug, Args)]
pub struct BenchArgs {
    /// Which kernel.
    #[command(subcommand)]
    pub kind: BenchKind,
}

/// Benchmarks.
#[derive(Debug, Subcommand)]
pub enum BenchKind {
    /// Predicate scan of one u32 column, row-id output.
    Scan(BenchScanArgs),
    /// One epoch of squared-loss minibatch SGD per engine, one engine per thread.
    Sgd(BenchSgdArgs),
    /// Hash join of unique u64 keys, every probe row matching, pairs materialised.
    Join(BenchJoinArgs),
}

/// `weir bench sgd`.
#[derive(Debug, Args)]
pub struct BenchSgdArgs {
    /// Thread counts (= engines), comma-separated (default: 1 and all cores).
    #[arg(long, value_delimiter = ',')]
    pub threads: Option<Vec<usize>>,
    /// Feature counts d, comma-separated.
    #[arg(long, value_delimiter = ',', default_value = "16,64,256,1024")]
    pub dims: Vec<usize>,
    /// Minibatch sizes, comma-separated.
    #[arg(long, value_delimiter = ',', default_value = "1,16,256")]
    pub batch: Vec<usize>,
    /// Samples (fewer for large d, keeping the data within --max-mib).
    #[arg(long, default_value_t = 1 << 20)]
    pub rows: u64,
    /// Largest dataset in MiB.
    #[arg(long, default_value_t = 1024)]
    pub max_mib: u64,
    /// Modes: f32 (16-lane tree), f32-seq, f64, fixed (Q7.8 data, Q7.24 model, Q15.24 accumulator, nearest-even).
    #[arg(long, value_delimiter = ',', default_value = "f32")]
    pub modes: Vec<String>,
    /// Timed runs per point, each after a read pass over the same bytes, after a warm-up.
    #[arg(long, default_value_t = 5)]
    pub runs: usize,
    /// Write results to PREFIX.csv, PREFIX.json and PREFIX.svg.
    #[arg(long, value_name = "PREFIX")]
    pub out: Option<PathBuf>,
    /// Also save each dataset as PREFIX-d{d}.x.npy and .y.npy (for benches/compare/sgd.py).
    #[arg(long, value_name = "PREFIX")]
    pub save_npy: Option<PathBuf>,
    /// Replace existing output files.
    #[arg(long)]
    pub force: bool,
}

/// `weir bench scan`.
#[derive(Debug, Args)]
pub struct BenchScanArgs {
    /// Thread counts to measure, comma-separated (default: 1 and all cores).
    #[arg(long, value_delimiter = ',')]
    pub threads: Option<Vec<usize>>,
    /// Rows of the u32 column (2^28 = 1 GiB).
    #[arg(long, default_value_t = 1 << 28)]
    pub rows: u64,
    /// Selectivities to measure, comma-separated.
    #[arg(long, value_delimiter = ',', default_value = "0.01")]
    pub selectivity: Vec<f64>,
    /// Timed runs per point, after one warm-up.
    #[arg(long, default_value_t = 7)]
    pub runs: usize,
    /// A calibration saved by `weir calibrate --out`, kept in the JSON for context (the
    /// fraction of read comes from the read pass interleaved with the scan's runs).
    #[arg(long)]
    pub calibration: Option<PathBuf>,
    /// Write results to PREFIX.csv, PREFIX.json and the plot PREFIX.svg.
    #[arg(long, value_name = "PREFIX")]
    pub out: Option<PathBuf>,
    /// Also save the generated column as .npy (for benches/compare/scan.py).
    #[arg(long)]
    pub save_npy: Option<PathBuf>,
    /// Replace existing output files.
    #[arg(long)]
    pub force: bool,
}

/// `weir demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Output directory.
    #[arg(long, default_value = "weir-demo")]
    pub out: PathBuf,
    /// Replace an existing output directory.
    #[arg(long)]
    pub force: bool,
}

/// `weir plan`.
#[derive(Debug, Args)]
pub struct PlanArgs {
    /// A run's output directory (holding ledger.json), or a job file (JOB.toml) to sweep.
    pub run_dir: PathBuf,
    /// With a job file: a sweep axis, `engines=A..B` (A..=B engines) or
    /// `placement=spread,packed`; each point runs the job ledger-only (no files).
    #[arg(long, value_name = "AXIS=VALUES")]
    pub sweep: Vec<String>,
    /// With --sweep: the directory for sweep.csv and sweep.svg.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// With --sweep: replace an earlier sweep directory.
    #[arg(long)]
    pub force: bool,
    /// A device preset (hbm2x2, ddr4x2) or a device description TOML file.
    #[arg(long)]
    pub device: String,
    /// Re-map each engine's channel: spread, packed, or a file listing one channel per engine.
    #[arg(long)]
    pub placement: Option<String>,
    /// A `weir bench` JSON result as the host baseline (default: the run's timing.json).
    #[arg(long)]
    pub bench: Option<PathBuf>,
    /// A device's own counters (CSV) to set beside the prediction and the golden ledger.
    #[arg(long, value_name = "COUNTERS.csv")]
    pub measured: Option<PathBuf>,
}

/// `weir report`.
#[derive(Debug, Args)]
pub struct ReportArgs {
    /// A run's output directory (holding ledger.json; plan.json and *.svg when present).
    pub run_dir: PathBuf,
}

/// `weir gen join`.
#[derive(Debug, Args)]
pub struct GenJoinArgs {
    /// Build rows |S|.
    #[arg(long, default_value_t = 1 << 16)]
    pub build_rows: u64,
    /// Probe rows |L|.
    #[arg(long, default_value_t = 1 << 20)]
    pub probe_rows: u64,
    /// Key type: u32 or u64.
    #[arg(long, default_value = "u64")]
    pub key_type: String,
    /// Payload type: u32 or u64.
    #[arg(long, default_value = "u64")]
    pub payload_type: String,
    /// S keys: unique, fixed:N (each key N times) or geometric:MEAN.
    #[arg(long, default_value = "unique")]
    pub dup: String,
    /// Requested fraction of L rows with a partner in S.
    #[arg(long, default_value_t = 0.5)]
    pub match_rate: f64,
    /// L key skew: uniform or zipf:THETA.
    #[arg(long, default_value = "uniform")]
    pub skew: String,
    /// Seed.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Output prefix: writes PREFIX-build.csv and PREFIX-probe.csv (or .npy per column
    /// with --npy).
    #[arg(long, value_name = "PREFIX")]
    pub out: PathBuf,
    /// Write one .npy per column instead of CSV.
    #[arg(long)]
    pub npy: bool,
    /// Replace existing files.
    #[arg(long)]
    pub force: bool,
}

/// `weir bench join`.
#[derive(Debug, Args)]
pub struct BenchJoinArgs {
    /// Thread counts to measure, comma-separated (default: 1 and all cores).
    #[arg(long, value_delimiter = ',')]
    pub threads: Option<Vec<usize>>,
    /// Shape: a (|S| = 2^20, |L| = 2^24) or b (|S| = 2^24, |L| = 2^26).
    #[arg(long, default_value = "a")]
    pub shape: String,
    /// Build rows (overrides the shape).
    #[arg(long)]
    pub build_rows: Option<u64>,
    /// Probe rows (overrides the shape).
    #[arg(long)]
    pub probe_rows: Option<u64>,
    /// Timed runs per point, after one warm-up.
    #[arg(long, default_value_t = 5)]
    pub runs: usize,
    /// Write results to PREFIX.csv, PREFIX.json and PREFIX.svg.
    #[arg(long, value_name = "PREFIX")]
    pub out: Option<PathBuf>,
    /// Also save the tables as PREFIX-{build,probe}-{key,payload}.npy (for
    /// benches/compare/join.py).
    #[arg(long, value_name = "PREFIX")]
    pub save_npy: Option<PathBuf>,
    /// Replace existing output files.
    #[arg(long)]
    pub force: bool,
}

/// A count that must be at least 1 (thread counts).
fn at_least_one(s: &str) -> Result<usize, String> {
    match s.parse::<usize>() {
        Ok(0) => Err("must be at least 1".into()),
        Ok(n) => Ok(n),
        Err(e) => Err(e.to_string()),
    }
}
