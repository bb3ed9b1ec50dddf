//! Host memory-bandwidth calibration: streaming read, write and copy rates for
//! 1..=N threads, the denominator that kernel benchmarks are reported against.
//!
//! Figures are in GB/s, 1 GB = 1e9 bytes. The buffer must be several times the
//! last-level cache for the figures to describe DRAM rather than cache (some
//! server parts report several hundred MiB of L3); smaller buffers are allowed
//! (tests, cache-resident checks) and then measure cache.
//!
//! Read is a wrapping sum of u64 words, the loop compiled for the widest vector
//! instruction set detected at run time. Write fills with ordinary stores, not
//! non-temporal ones, as a kernel writing results through normal code would.
//! Copy is `copy_from_slice`, so the platform `memcpy` picks its own instructions
//! (glibc's switches to non-temporal stores for large copies; recalled from memory).

use super::stats::{summarize, time_runs, Summary};
use crate::kernels::isa::{Isa, Level};
use rayon::ThreadPoolBuilder;
use serde::{Deserialize, Serialize};
use std::hint::black_box;
use std::ops::Range;
use std::sync::{Mutex, PoisonError};

/// Version of the JSON layout written by [`Calibration::to_json`].
pub const FORMAT_VERSION: u32 = 2;

/// Default buffer size: 1 GiB, well past the last-level cache of current servers.
pub const DEFAULT_BYTES: u64 = 1 << 30;

/// Default number of timed repetitions per measure.
pub const DEFAULT_RUNS: usize = 5;

/// Bytes per cache line; per-thread slices start on line boundaries so no line is
/// shared between threads (common practice for x86_64 and most AArch64 parts).
const LINE_BYTES: u64 = 64;
const LINE_WORDS: usize = (LINE_BYTES / 8) as usize;

/// Each timed sample moves at least this many bytes, repeating passes over small
/// buffers, so that timer and thread wake-up overhead stay small against the run.
const MIN_BYTES_PER_SAMPLE: u64 = 64 << 20;

/// How the read loop walks each thread's slice: as this many interleaved contiguous
/// streams, with or without software prefetch [`READ_AHEAD_BYTES`] ahead of each.
///
/// No one shape reads fastest everywhere: on a 2-core AVX-512 server VM four streams read
/// DRAM 5-15% faster than one; on a 2-core AVX2-only one, one or two plain streams read
/// about 17 GB/s on one core where four read about 10 GB/s, and a scan walking four
/// prefetched streams outran the four-stream reference. So every host's reference is the
/// fastest of [`READ_SHAPES`], chosen per thread count by [`fastest_shape`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ReadShape {
    /// Interleaved streams per thread (1, 2 or 4).
    pub streams: usize,
    /// Software prefetch ahead of each stream.
    pub prefetch: bool,
}

impl ReadShape {
    const fn new(streams: usize, prefetch: bool) -> ReadShape {
        ReadShape { streams, prefetch }
    }
}

impl std::fmt::Display for ReadShape {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let pf = if self.prefetch { "+prefetch" } else { "" };
        write!(f, "{}x{pf}", self.streams)
    }
}

/// The read loop shapes each host tries.
pub const READ_SHAPES: [ReadShape; 6] = [
    ReadShape::new(1, false),
    ReadShape::new(2, false),
    ReadShape::new(4, false),
    ReadShape::new(1, true),
    ReadShape::new(2, true),
    ReadShape::new(4, true),
];

/// How far ahead of each stream a prefetching read loop asks for lines, in bytes: as far
/// as the kernels' own walks prefetch.
const READ_AHEAD_BYTES: usize = 2048;

/// Timed passes per shape when choosing the fastest.
const SHAPE_TRIALS: usize = 3;

/// The read loop shape that reads `parts` fastest on the current rayon pool (one part
/// per thread), by median of [`SHAPE_TRIALS`] passes after one untimed pass.
pub fn fastest_shape(isa: Isa, parts: &[&[u64]]) -> ReadShape {
    let median = |shape: ReadShape| {
        let times = time_runs(1, SHAPE_TRIALS, &mut || {
            rayon::broadcast(|ctx| black_box(read_sum(isa, shape, black_box(parts[ctx.index()]))));
        });
        summarize(&times).median_s
    };
    READ_SHAPES
        .iter()
        .map(|&s| (median(s), s))
        .min_by(|a, b| a.0.total_cmp(&b.0))
        .map_or(READ_SHAPES[0], |(_, s)| s)
}

/// Errors from calibration and from loading a saved calibration.
#[derive(Debug, thiserror::Error)]
pub enum CalibrationError {
    /// A parameter is out of range.
    #[error("calibration parameter {name} = {value} is invalid: {reason}")]
    InvalidParam {
        /// Parameter name.
        name: &'static str,
        /// Value given.
        value: u64,
        /// What is required.
        reason: &'static str,
    },
    /// The measurement buffers could not be allocated.
    #[error("cannot allocate two calibration buffers of {bytes} bytes each")]
    Alloc {
        /// Size of one buffer.
        bytes: u64,
    },
    /// The worker thread pool could not be built.
    #[error("cannot start a {threads}-thread pool: {message}")]
    ThreadPool {
        /// Requested thread count.
        threads: usize,
        /// Reason given by the pool builder.
        message: String,
    },
    /// Saved calibration text is not valid JSON of the expected shape.
    #[error("calibration JSON is invalid: {0}")]
    Json(#[from] serde_json::Error),
    /// Saved calibration was written in another layout version.
    #[error("calibration format_version {found} is not supported (expected {expected})")]
    FormatVersion {
        /// Version found in the text.
        found: u32,
        /// Version this build reads.
        expected: u32,
    },
    /// Saved calibration holds no measurements.
    #[error("calibration has no bandwidth points")]
    NoPoints,
}

/// What to measure.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CalibrationParams {
    /// Thread counts 1..=max_threads are measured.
    pub max_threads: usize,
    /// Size of each buffer in bytes: a multiple of 64 with at least one 64-byte line
    /// per thread. Use several times the last-level cache (the default 1 GiB) to
    /// measure DRAM.
    pub bytes: u64,
    /// Timed repetitions per measure, after one untimed warm-up.
    pub runs: usize,
}

impl Default for CalibrationParams {
    /// All hardware threads, [`DEFAULT_BYTES`], [`DEFAULT_RUNS`].
    fn default() -> Self {
        CalibrationParams {
            max_threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
            bytes: DEFAULT_BYTES,
            runs: DEFAULT_RUNS,
        }
    }
}

/// One measure's rate over its timed runs, GB/s (1e9 bytes/s).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Rate {
    /// Rate at the median run time.
    pub median_gbps: f64,
    /// Rate at the third-quartile (slower) run time: the low end of the spread.
    pub q1_gbps: f64,
    /// Rate at the first-quartile (faster) run time: the high end of the spread.
    pub q3_gbps: f64,
    /// Rate of the fastest run.
    pub best_gbps: f64,
}

impl Rate {
    /// The rate of moving `bytes` in each of the timed runs summarised by `s`.
    pub fn from_times(bytes: f64, s: &Summary) -> Rate {
        let r = |t: f64| bytes / t / 1e9;
        Rate {
            median_gbps: r(s.median_s),
            q1_gbps: r(s.q3_s),
            q3_gbps: r(s.q1_s),
            best_gbps: r(s.min_s),
        }
    }
}

/// Measured rates for one thread count.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BandwidthPoint {
    /// Worker threads used.
    pub threads: usize,
    /// Bytes read per second by a wrapping-sum reduction over the buffer.
    pub read: Rate,
    /// Bytes written per second by filling the buffer with ordinary (temporal)
    /// stores. The read-for-ownership traffic this causes is not counted.
    pub write: Rate,
    /// Bytes read plus bytes written per second by `copy_from_slice`, so a copy of
    /// N bytes counts 2N, as STREAM's Copy does (recalled from memory).
    pub copy: Rate,
}

/// A saved host calibration.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Calibration {
    /// Layout version, [`FORMAT_VERSION`] when written by this build.
    pub format_version: u32,
    /// Size of each measurement buffer in bytes.
    pub bytes: u64,
    /// Timed repetitions per measure.
    pub runs: usize,
    /// CPU model name from `/proc/cpuinfo`, or "unknown".
    pub cpu: String,
    /// Vector instruction set the read and write loops were compiled for: the
    /// widest detected at run time, "avx512", "avx2" or "portable".
    pub isa: String,
    /// One point per thread count, ascending.
    pub points: Vec<BandwidthPoint>,
}

impl Calibration {
    /// Pretty-printed JSON.
    pub fn to_json(&self) -> Result<String, CalibrationError> {
        Ok(serde_json::to_string_pretty(self)?)
    }

    /// Parses JSON written by [`Calibration::to_json`], rejecting other layout
    /// versions before looking at the rest of the document.
    pub fn from_json(text: &str) -> Result<Calibration, CalibrationError> {
        #[derive(Deserialize)]
        struct VersionProbe {
            format_version: u32,
        }
        let probe: VersionProbe = serde_json::from_str(text)?;
        if probe.format_version != FORMAT_VERSION {
            return Err(CalibrationError::FormatVersion {
                found: probe.format_version,
                expected: FORMAT_VERSION,
            });
        }
        let calibration: Calibration = serde_json::from_str(text)?;
        if calibration.points.is_empty() {
            return Err(CalibrationError::NoPoints);
        }
        Ok(calibration)
    }

    /// Median read rate measured with `threads` threads, or the highest median over
    /// all thread counts when that count was not measured; 0.0 if there are no points.
    pub fn read_gbps(&self, threads: usize) -> f64 {
        match self.points.iter().find(|p| p.threads == threads) {
            Some(point) => point.read.median_gbps,
            None => self
                .points
                .iter()
                .map(|p| p.read.median_gbps)
                .fold(0.0, f64::max),
        }
    }
}

/// Measures read, write and copy bandwidth for 1..=`params.max_threads` threads.
///
/// Buffers are allocated and written once before any timing so page faults are
/// not measured. Each thread works on its own contiguous, line-aligned slice.
/// Each measure reports the median of `params.runs` timed runs after one warm-up,
/// with the quartiles as its spread and the fastest run beside them: on a shared host
/// the best run alone swings from one invocation to the next. `progress`
/// is called with (measures done, measures total) as the work advances.
pub fn calibrate(
    params: &CalibrationParams,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Calibration, CalibrationError> {
    let words = validate(params)?;
    let mut src = AlignedWords::new(words, params.bytes)?;
    let mut dst = AlignedWords::new(words, params.bytes)?;
    src.as_mut_slice()
        .iter_mut()
        .enumerate()
        .for_each(|(i, w)| *w = pattern(i));
    let passes = MIN_BYTES_PER_SAMPLE.div_ceil(params.bytes).max(1) as usize;
    let sample_bytes = params.bytes as f64 * passes as f64;
    let isa = Isa::detect();

    let total = params.max_threads * 3;
    let mut done = 0;
    progress(done, total);
    let mut points = Vec::with_capacity(params.max_threads);
    for threads in 1..=params.max_threads {
        let pool = ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .map_err(|e| CalibrationError::ThreadPool {
                threads,
                message: e.to_string(),
            })?;
        let ranges = split_lines(words, threads);
        let timings = |f: &mut dyn FnMut()| summarize(&time_runs(1, params.runs, f));

        let read_s = {
            let src_parts = slices(src.as_slice(), &ranges);
            let shape = pool.install(|| fastest_shape(isa, &src_parts));
            timings(&mut || {
                pool.broadcast(|ctx| {
                    for _ in 0..passes {
                        black_box(read_sum(isa, shape, black_box(src_parts[ctx.index()])));
                    }
                });
            })
        };
        done += 1;
        progress(done, total);

        let write_s = {
            let dst_parts = slices_mut(dst.as_mut_slice(), &ranges);
            timings(&mut || {
                pool.broadcast(|ctx| {
                    let mut part = lock(&dst_parts[ctx.index()]);
                    for pass in 0..passes {
                        fill(isa, black_box(&mut part[..]), pattern(pass));
                    }
                });
            })
        };
        done += 1;
        progress(done, total);

        let copy_s = {
            let src_parts = slices(src.as_slice(), &ranges);
            let dst_parts = slices_mut(dst.as_mut_slice(), &ranges);
            timings(&mut || {
                pool.broadcast(|ctx| {
                    let mut part = lock(&dst_parts[ctx.index()]);
                    for _ in 0..passes {
                        black_box(&mut part[..]).copy_from_slice(src_parts[ctx.index()]);
                    }
                });
            })
        };
        done += 1;
        progress(done, total);

        points.push(BandwidthPoint {
            threads,
            read: Rate::from_times(sample_bytes, &read_s),
            write: Rate::from_times(sample_bytes, &write_s),
            copy: Rate::from_times(2.0 * sample_bytes, &copy_s),
        });
    }

    Ok(Calibration {
        format_version: FORMAT_VERSION,
        bytes: params.bytes,
        runs: params.runs,
        cpu: cpu_model(),
        isa: isa.name().to_string(),
        points,
    })
}

/// Checks `params` and returns the buffer length in u64 words.
fn validate(params: &CalibrationParams) -> Result<usize, CalibrationError> {
    let invalid = |name, value, reason| {
        Err(CalibrationError::InvalidParam {
            name,
            value,
            reason,
        })
    };
    if params.max_threads == 0 {
        return invalid("max_threads", 0, "must be at least 1");
    }
    if params.runs == 0 {
        return invalid("runs", 0, "must be at least 1");
    }
    if !params.bytes.is_multiple_of(LINE_BYTES) {
        return invalid("bytes", params.bytes, "must be a multiple of 64");
    }
    if params.bytes / LINE_BYTES < params.max_threads as u64 {
        return invalid(
            "bytes",
            params.bytes,
            "must hold at least one 64-byte line per thread",
        );
    }
    match usize::try_from(params.bytes / 8) {
        Ok(words) => Ok(words),
        Err(_) => invalid(
            "bytes",
            params.bytes,
            "exceeds this platform's address space",
        ),
    }
}

/// Deterministic, non-repeating fill so every byte matters to the read sum and the
/// fill value is never a byte-repeated constant (which would become a memset).
fn pattern(i: usize) -> u64 {
    // 2^64 / golden ratio, the Fibonacci-hashing multiplier (common practice).
    (i as u64 ^ 0x5555).wrapping_mul(0x9E37_79B9_7F4A_7C15)
}

/// Splits `words` into `threads` contiguous ranges of whole cache lines, as even
/// as possible; a trailing partial line goes to the last range.
fn split_lines(words: usize, threads: usize) -> Vec<Range<usize>> {
    let lines = words / LINE_WORDS;
    let bound = |t: usize| match t {
        _ if t == threads => words,
        _ => lines * t / threads * LINE_WORDS,
    };
    (0..threads).map(|t| bound(t)..bound(t + 1)).collect()
}

fn slices<'a>(data: &'a [u64], ranges: &[Range<usize>]) -> Vec<&'a [u64]> {
    ranges.iter().map(|r| &data[r.clone()]).collect()
}

/// Disjoint mutable slices, each behind a mutex so a shared broadcast closure can
/// hand slice i to thread i; each lock is only ever taken by one thread.
fn slices_mut<'a>(mut data: &'a mut [u64], ranges: &[Range<usize>]) -> Vec<Mutex<&'a mut [u64]>> {
    let mut consumed = 0;
    ranges
        .iter()
        .map(|r| {
            let (head, tail) = std::mem::take(&mut data).split_at_mut(r.end - consumed);
            consumed = r.end;
            data = tail;
            Mutex::new(head)
        })
        .collect()
}

fn lock<'m, 'a>(part: &'m Mutex<&'a mut [u64]>) -> std::sync::MutexGuard<'m, &'a mut [u64]> {
    // The kernels cannot panic, so a poisoned lock still guards valid data.
    part.lock().unwrap_or_else(PoisonError::into_inner)
}

/// A u64 buffer whose visible part starts on a cache-line boundary, so vector
/// loads never straddle lines (large heap blocks are usually only 16-byte aligned).
struct AlignedWords {
    storage: Vec<u64>,
    offset: usize,
    words: usize,
}

impl AlignedWords {
    /// Allocates and zero-fills (so touches every page of) `words` words.
    fn new(words: usize, bytes: u64) -> Result<Self, CalibrationError> {
        let padded = words.checked_add(LINE_WORDS - 1);
        let mut storage = Vec::new();
        padded
            .and_then(|n| storage.try_reserve_exact(n).ok())
            .ok_or(CalibrationError::Alloc { bytes })?;
        // On 2 MiB pages, like the data the benches read (the SGD bench's copies).
        crate::kernels::hints::advise_huge(&storage);
        storage.resize(storage.capacity(), 0);
        // Alignment only affects speed, so an unavailable offset falls back to 0.
        let offset = storage.as_ptr().align_offset(LINE_BYTES as usize);
        let offset = if offset < LINE_WORDS { offset } else { 0 };
        Ok(AlignedWords {
            storage,
            offset,
            words,
        })
    }

    fn as_slice(&self) -> &[u64] {
        &self.storage[self.offset..self.offset + self.words]
    }

    fn as_mut_slice(&mut self) -> &mut [u64] {
        &mut self.storage[self.offset..self.offset + self.words]
    }
}

/// First "model name" in `/proc/cpuinfo`, or "unknown" where there is none.
fn cpu_model() -> String {
    std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|text| {
            text.lines()
                .filter_map(|line| line.split_once(':'))
                .find(|(key, _)| key.trim() == "model name")
                .map(|(_, value)| value.trim().to_string())
        })
        .unwrap_or_else(|| "unknown".to_string())
}

/// A streaming read pass over its own buffer, split across the threads of the current
/// rayon pool in line-aligned slices: the reference of the interleaved benches
/// (`bench::interleave`). The loop is the calibration's read loop, in the shape that
/// reads fastest on this host at the pool's thread count (chosen on the first pass at
/// each count).
pub struct ReadReference {
    buf: AlignedWords,
    isa: Isa,
    /// The shape chosen for each thread count so far.
    shapes: Mutex<Vec<(usize, ReadShape)>>,
}

impl ReadReference {
    /// A reference reading `bytes` (rounded down to whole 8-byte words, at least one
    /// line), filled once so every page is resident before timing.
    pub fn new(bytes: u64) -> Result<ReadReference, CalibrationError> {
        let words = usize::try_from((bytes / 8).max(LINE_WORDS as u64))
            .map_err(|_| CalibrationError::Alloc { bytes })?;
        let mut buf = AlignedWords::new(words, bytes)?;
        buf.as_mut_slice()
            .iter_mut()
            .enumerate()
            .for_each(|(i, w)| *w = pattern(i));
        Ok(ReadReference {
            buf,
            isa: Isa::detect(),
            shapes: Mutex::new(Vec::new()),
        })
    }

    /// Bytes one pass reads.
    pub fn bytes(&self) -> u64 {
        self.buf.words as u64 * 8
    }

    /// The shape used at `threads` threads, if a pass at that count has run.
    pub fn shape(&self, threads: usize) -> Option<ReadShape> {
        let shapes = self.shapes.lock().unwrap_or_else(PoisonError::into_inner);
        shapes.iter().find(|s| s.0 == threads).map(|s| s.1)
    }

    /// One pass: every thread of the current pool reads its slice once. The first pass
    /// at a thread count first times every shape (see [`fastest_shape`]).
    pub fn run(&self) {
        let data = self.buf.as_slice();
        let threads = rayon::current_num_threads();
        let ranges = split_lines(data.len(), threads);
        let shape = self.shape(threads).unwrap_or_else(|| {
            let shape = fastest_shape(self.isa, &slices(data, &ranges));
            let mut shapes = self.shapes.lock().unwrap_or_else(PoisonError::into_inner);
            shapes.push((threads, shape));
            shape
        });
        rayon::broadcast(|ctx| {
            black_box(read_sum(
                self.isa,
                shape,
                black_box(&data[ranges[ctx.index()].clone()]),
            ));
        });
    }
}

/// A loop body compiled once per instruction set: `run` is inlined into each
/// `target_feature` wrapper, so the compiler vectorises it for that set.
trait Kernel {
    type Output;
    fn run(self) -> Self::Output;
}

/// Wrapping sum of every word, over `STREAMS` interleaved streams with `LANES`
/// independent accumulators each (prefetching ahead of each with `PF`), so that many
/// loads are in flight and the loop waits on memory rather than on the adds.
struct ReadSum<'a, const LANES: usize, const STREAMS: usize, const PF: bool>(&'a [u64]);

impl<const LANES: usize, const STREAMS: usize, const PF: bool> Kernel
    for ReadSum<'_, LANES, STREAMS, PF>
{
    type Output = u64;

    #[inline(always)]
    fn run(self) -> u64 {
        let per_stream = self.0.len() / (STREAMS * LANES) * LANES;
        let (body, tail) = self.0.split_at(per_stream * STREAMS);
        let streams: [&[u64]; STREAMS] =
            std::array::from_fn(|k| &body[k * per_stream..(k + 1) * per_stream]);
        let mut acc = [[0u64; LANES]; STREAMS];
        for start in (0..per_stream).step_by(LANES) {
            for (lanes, stream) in acc.iter_mut().zip(&streams) {
                if PF {
                    prefetch_ahead(&stream[start..start + LANES]);
                }
                for (a, &w) in lanes.iter_mut().zip(&stream[start..start + LANES]) {
                    *a = a.wrapping_add(w);
                }
            }
        }
        let tail_sum = tail.iter().fold(0u64, |s, &w| s.wrapping_add(w));
        acc.into_iter()
            .flatten()
            .fold(tail_sum, |s, w| s.wrapping_add(w))
    }
}

/// Asks for the lines [`READ_AHEAD_BYTES`] past `words` (one hint per line they span).
#[inline(always)]
fn prefetch_ahead(words: &[u64]) {
    #[cfg(target_arch = "x86_64")]
    {
        let ahead = words.as_ptr().cast::<u8>().wrapping_add(READ_AHEAD_BYTES);
        for line in (0..std::mem::size_of_val(words)).step_by(LINE_BYTES as usize) {
            // SAFETY: a prefetch never faults, whatever the address (SSE is part of the
            // x86-64 baseline).
            unsafe {
                use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};
                _mm_prefetch::<_MM_HINT_T0>(ahead.wrapping_add(line).cast());
            }
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = words;
}

/// Stores one value into every word.
struct Fill<'a>(&'a mut [u64], u64);

impl Kernel for Fill<'_> {
    type Output = ();

    #[inline(always)]
    fn run(self) {
        self.0.fill(self.1);
    }
}

/// The wrapping sum of `data`, read by the loop in `shape` (the reference's loop, for
/// benches that read their own buffers), with accumulators filling the vector register
/// file (32 zmm, 16 ymm or 16 xmm across the streams): with 4 zmm in all, one core read
/// DRAM about 30% slower in testing.
pub fn read_sum(isa: Isa, shape: ReadShape, data: &[u64]) -> u64 {
    macro_rules! shaped {
        ($pf:literal) => {
            match (isa.level(), shape.streams) {
                #[cfg(target_arch = "x86_64")]
                (Level::Avx512, 1) => run_kernel(isa, ReadSum::<256, 1, $pf>(data)),
                #[cfg(target_arch = "x86_64")]
                (Level::Avx512, 2) => run_kernel(isa, ReadSum::<128, 2, $pf>(data)),
                #[cfg(target_arch = "x86_64")]
                (Level::Avx512, _) => run_kernel(isa, ReadSum::<64, 4, $pf>(data)),
                #[cfg(target_arch = "x86_64")]
                (Level::Avx2, 1) => run_kernel(isa, ReadSum::<64, 1, $pf>(data)),
                #[cfg(target_arch = "x86_64")]
                (Level::Avx2, 2) => run_kernel(isa, ReadSum::<32, 2, $pf>(data)),
                #[cfg(target_arch = "x86_64")]
                (Level::Avx2, _) => run_kernel(isa, ReadSum::<16, 4, $pf>(data)),
                (Level::Portable, 1) => run_kernel(isa, ReadSum::<32, 1, $pf>(data)),
                (Level::Portable, 2) => run_kernel(isa, ReadSum::<16, 2, $pf>(data)),
                (Level::Portable, _) => run_kernel(isa, ReadSum::<8, 4, $pf>(data)),
            }
        };
    }
    if shape.prefetch {
        shaped!(true)
    } else {
        shaped!(false)
    }
}

fn fill(isa: Isa, data: &mut [u64], value: u64) {
    run_kernel(isa, Fill(data, value))
}

fn run_kernel<K: Kernel>(isa: Isa, kernel: K) -> K::Output {
    match isa.level() {
        // SAFETY: an AVX-512 `Isa` exists only after run-time detection of AVX-512 F
        // (and more), the one feature `run_avx512` enables (see `kernels::isa`).
        #[cfg(target_arch = "x86_64")]
        Level::Avx512 => unsafe { run_avx512(kernel) },
        // SAFETY: an AVX2 `Isa` exists only after run-time detection of AVX2 (and more),
        // the one feature `run_avx2` enables.
        #[cfg(target_arch = "x86_64")]
        Level::Avx2 => unsafe { run_avx2(kernel) },
        Level::Portable => kernel.run(),
    }
}

#[cfg(target_arch = "x86_64")]
/// # Safety
/// The CPU must support AVX-512 F.
#[target_feature(enable = "avx512f")]
unsafe fn run_avx512<K: Kernel>(kernel: K) -> K::Output {
    kernel.run()
}

#[cfg(target_arch = "x86_64")]
/// # Safety
/// The CPU must support AVX2.
#[target_feature(enable = "avx2")]
unsafe fn run_avx2<K: Kernel>(kernel: K) -> K::Output {
    kernel.run()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn small_params(max_threads: usize) -> CalibrationParams {
        CalibrationParams {
            max_threads,
            bytes: 4 << 20,
            runs: 1,
        }
    }

    #[test]
    fn calibration_gives_positive_finite_rates_per_thread_count() {
        let mut calls = Vec::new();
        let cal = calibrate(&small_params(2), &mut |done, total| {
            calls.push((done, total))
        })
        .unwrap();
        assert_eq!(cal.format_version, FORMAT_VERSION);
        assert_eq!((cal.bytes, cal.runs), (4 << 20, 1));
        assert_eq!(cal.isa, Isa::available()[0].name());
        let threads: Vec<usize> = cal.points.iter().map(|p| p.threads).collect();
        assert_eq!(threads, [1, 2]);
        for p in &cal.points {
            for r in [p.read, p.write, p.copy] {
                let v = [r.q1_gbps, r.median_gbps, r.q3_gbps, r.best_gbps];
                assert!(v.iter().all(|g| g.is_finite() && *g > 0.0), "{p:?}");
                assert!(v.windows(2).all(|w| w[0] <= w[1]), "{p:?}");
            }
        }
        let expected: Vec<(usize, usize)> = (0..=6).map(|d| (d, 6)).collect();
        assert_eq!(calls, expected);
    }

    #[test]
    fn json_round_trips() {
        let cal = calibrate(&small_params(1), &mut |_, _| {}).unwrap();
        let text = cal.to_json().unwrap();
        assert_eq!(Calibration::from_json(&text).unwrap(), cal);
    }

    fn sample() -> Calibration {
        let rate = |g| Rate {
            median_gbps: g,
            q1_gbps: g,
            q3_gbps: g,
            best_gbps: g,
        };
        let point = |threads, read_gbps| BandwidthPoint {
            threads,
            read: rate(read_gbps),
            write: rate(1.0),
            copy: rate(2.0),
        };
        Calibration {
            format_version: FORMAT_VERSION,
            bytes: DEFAULT_BYTES,
            runs: 3,
            cpu: "test part".to_string(),
            isa: "avx512".to_string(),
            points: vec![point(1, 10.0), point(2, 30.0), point(4, 25.0)],
        }
    }

    #[test]
    fn json_keeps_every_float_bit() {
        // A measured rate that serde_json's default fast float parser read back
        // one ulp off; the crate enables serde_json's float_roundtrip for this.
        let mut cal = sample();
        cal.points[0].read.median_gbps = 22.854494674175754;
        let back = Calibration::from_json(&cal.to_json().unwrap()).unwrap();
        assert_eq!(
            back.points[0].read.median_gbps.to_bits(),
            22.854494674175754f64.to_bits()
        );
    }

    #[test]
    fn read_rate_uses_matching_point_else_the_maximum() {
        let cal = sample();
        assert_eq!(cal.read_gbps(1), 10.0);
        assert_eq!(cal.read_gbps(4), 25.0);
        assert_eq!(cal.read_gbps(3), 30.0);
    }

    #[test]
    fn from_json_rejects_other_format_version() {
        let text = sample().to_json().unwrap().replace(
            &format!("\"format_version\": {FORMAT_VERSION}"),
            "\"format_version\": 999",
        );
        let err = Calibration::from_json(&text).unwrap_err();
        assert_eq!(
            err.to_string(),
            format!("calibration format_version 999 is not supported (expected {FORMAT_VERSION})")
        );
    }

    #[test]
    fn from_json_reports_where_malformed_json_breaks() {
        let err = Calibration::from_json("{\n  \"format_version\": 1,\n  \"bytes\": oops\n}")
            .unwrap_err();
        let msg = err.to_string();
        assert!(msg.starts_with("calibration JSON is invalid: "), "{msg}");
        assert!(msg.contains("line 3"), "{msg}");
    }

    #[test]
    fn from_json_rejects_missing_fields_and_empty_points() {
        let err = Calibration::from_json(&format!("{{\"format_version\": {FORMAT_VERSION}}}"))
            .unwrap_err();
        assert!(err.to_string().contains("missing field"), "{err}");
        let mut empty = sample();
        empty.points.clear();
        let err = Calibration::from_json(&empty.to_json().unwrap()).unwrap_err();
        assert_eq!(err.to_string(), "calibration has no bandwidth points");
    }

    #[test]
    fn bad_params_are_rejected_with_the_value() {
        let cases = [
            (
                CalibrationParams {
                    max_threads: 0,
                    ..small_params(1)
                },
                "max_threads = 0",
            ),
            (
                CalibrationParams {
                    runs: 0,
                    ..small_params(1)
                },
                "runs = 0",
            ),
            (
                CalibrationParams {
                    bytes: 1000,
                    ..small_params(1)
                },
                "bytes = 1000 is invalid: must be a multiple of 64",
            ),
            (
                CalibrationParams {
                    bytes: 128,
                    ..small_params(3)
                },
                "bytes = 128 is invalid: must hold at least one",
            ),
        ];
        for (params, needle) in cases {
            let err = calibrate(&params, &mut |_, _| {}).unwrap_err();
            assert!(err.to_string().contains(needle), "{err} lacks {needle}");
        }
    }

    #[test]
    fn unallocatable_buffer_is_an_error_not_an_abort() {
        let params = CalibrationParams {
            bytes: 1 << 62,
            ..small_params(1)
        };
        let err = calibrate(&params, &mut |_, _| {}).unwrap_err();
        assert_eq!(
            err.to_string(),
            format!(
                "cannot allocate two calibration buffers of {} bytes each",
                1u64 << 62
            )
        );
    }

    #[test]
    fn read_kernel_matches_plain_sum_on_every_isa() {
        // Lengths below one block (all tail), exactly whole blocks (no tail) and
        // between, each from every start offset within a line, so the streams,
        // the tail and unaligned starts are all checked against a plain sum.
        let block = 256;
        let data: Vec<u64> = (0..block * 3 + 13 + LINE_WORDS).map(pattern).collect();
        for isa in Isa::available() {
            for shape in READ_SHAPES {
                for len in [0, 1, block - 1, block, block * 3, block * 3 + 13] {
                    for start in 0..LINE_WORDS {
                        let part = &data[start..start + len];
                        let plain = part.iter().fold(0u64, |s, &w| s.wrapping_add(w));
                        let got = read_sum(isa, shape, part);
                        assert_eq!(got, plain, "{} {shape} len {len} from {start}", isa.name());
                    }
                }
            }
        }
    }

    #[test]
    fn fill_kernel_writes_every_word_on_every_isa() {
        for isa in Isa::available() {
            let mut data = vec![0u64; 64 * 3 + 5];
            fill(isa, &mut data[1..], 7);
            assert_eq!(data[0], 0, "{}", isa.name());
            assert!(data[1..].iter().all(|&w| w == 7), "{}", isa.name());
        }
    }

    #[test]
    fn split_covers_all_words_in_line_aligned_pieces() {
        for (words, threads) in [(8, 1), (64, 2), (40, 4), (8 * 7 + 3, 3)] {
            let ranges = split_lines(words, threads);
            assert_eq!(ranges.len(), threads);
            assert_eq!(ranges[0].start, 0);
            assert_eq!(ranges[threads - 1].end, words);
            for pair in ranges.windows(2) {
                assert_eq!(pair[0].end, pair[1].start);
                assert_eq!(pair[1].start % LINE_WORDS, 0);
            }
            assert!(ranges.iter().all(|r| r.len() >= LINE_WORDS), "{ranges:?}");
        }
    }

    #[test]
    fn mutable_slices_match_ranges() {
        let mut data: Vec<u64> = (0..40).collect();
        let ranges = split_lines(40, 3);
        let parts = slices_mut(&mut data, &ranges);
        for (part, range) in parts.iter().zip(&ranges) {
            let part = lock(part);
            assert_eq!(part.len(), range.len());
            assert_eq!(part[0], range.start as u64);
        }
    }
}
