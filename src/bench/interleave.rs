//! The interleaved measurement every kernel bench uses: a reference (a streaming read
//! pass over as many bytes as the kernel reads) and the kernel are timed in alternation,
//! so both see the same machine — the same neighbours, clock and memory traffic — and
//! the kernel is reported as a ratio to the reference with its spread.
//!
//! ```text
//!   warm-up:  R K  (× warmup, untimed)
//!   timed:    R K  R K  R K  …   (× pairs)      pair i = (R_i, K_i)
//!   ratio   = median(R) / median(K)             = kernel rate / reference rate
//!   spread  = Q1 and Q3 of R_i / K_i over the pairs
//! ```
//!
//! Invariants: the order of calls is fixed by [`schedule`] alone (never by timings); each
//! timed reference run is immediately followed by its kernel run. When the reference and
//! the kernel process the same bytes, `ratio` is the kernel's fraction of the reference's
//! bandwidth; a ratio well above 1 means the reference ran slow (disturbed), not that the
//! kernel beat memory.
//!
//! Use from a bench (the closures run on the caller's thread; install a rayon pool
//! around the call to fix the thread count):
//!
//! ```no_run
//! use weir::bench::interleave::{interleave, ReadReference};
//! let data = vec![1u32; 1 << 20];
//! let reference = ReadReference::new(4 << 20).unwrap();
//! let m = interleave(1, 7, &mut || reference.run(), &mut || {
//!     std::hint::black_box(data.iter().filter(|&&x| x > 3).count());
//! });
//! println!("{:.0}% of read, IQR {:.0}–{:.0}%", 100.0 * m.ratio, 100.0 * m.ratio_q1, 100.0 * m.ratio_q3);
//! ```

use serde::Serialize;
use std::time::Instant;

use super::stats::{quantile, sorted, summarize, Summary};

pub use super::calibrate::ReadReference;

/// One step of the interleaved schedule.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Step {
    /// An untimed reference run.
    WarmReference,
    /// An untimed kernel run.
    WarmKernel,
    /// Timed reference run of pair `i`.
    Reference(usize),
    /// Timed kernel run of pair `i`.
    Kernel(usize),
}

/// The order of runs for `warmup` untimed and `pairs` timed pairs.
pub fn schedule(warmup: usize, pairs: usize) -> Vec<Step> {
    let warm = (0..warmup).flat_map(|_| [Step::WarmReference, Step::WarmKernel]);
    let timed = (0..pairs).flat_map(|i| [Step::Reference(i), Step::Kernel(i)]);
    warm.chain(timed).collect()
}

/// The result of an interleaved measurement.
#[derive(Debug, Clone, Serialize)]
pub struct Interleaved {
    /// Seconds of each timed reference run, in run order.
    pub reference_s: Vec<f64>,
    /// Seconds of each timed kernel run, in run order.
    pub kernel_s: Vec<f64>,
    /// Summary of `reference_s`.
    pub reference: Summary,
    /// Summary of `kernel_s`.
    pub kernel: Summary,
    /// `reference.median_s / kernel.median_s`: the kernel's rate over the reference's.
    pub ratio: f64,
    /// First quartile of the per-pair ratios `reference_s[i] / kernel_s[i]`.
    pub ratio_q1: f64,
    /// Third quartile of the per-pair ratios.
    pub ratio_q3: f64,
}

impl Interleaved {
    /// Builds the result from per-pair timings (equal lengths).
    pub fn from_times(reference_s: Vec<f64>, kernel_s: Vec<f64>) -> Interleaved {
        let reference = summarize(&reference_s);
        let kernel = summarize(&kernel_s);
        let pairs: Vec<f64> = reference_s
            .iter()
            .zip(&kernel_s)
            .map(|(r, k)| r / k)
            .collect();
        let pairs = sorted(&pairs);
        Interleaved {
            ratio: reference.median_s / kernel.median_s,
            ratio_q1: quantile(&pairs, 0.25),
            ratio_q3: quantile(&pairs, 0.75),
            reference_s,
            kernel_s,
            reference,
            kernel,
        }
    }
}

/// Runs `reference` and `kernel` in the order [`schedule`] gives and times the timed
/// steps (wall clock). `pairs` must be at least 1 for the statistics to be numbers.
pub fn interleave(
    warmup: usize,
    pairs: usize,
    reference: &mut dyn FnMut(),
    kernel: &mut dyn FnMut(),
) -> Interleaved {
    let mut r = vec![f64::NAN; pairs];
    let mut k = vec![f64::NAN; pairs];
    for step in schedule(warmup, pairs) {
        match step {
            Step::WarmReference => reference(),
            Step::WarmKernel => kernel(),
            Step::Reference(i) => r[i] = timed(reference),
            Step::Kernel(i) => k[i] = timed(kernel),
        }
    }
    Interleaved::from_times(r, k)
}

fn timed(f: &mut dyn FnMut()) -> f64 {
    let start = Instant::now();
    f();
    start.elapsed().as_secs_f64()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn schedule_warms_up_then_alternates_reference_first() {
        use Step::*;
        assert_eq!(
            schedule(1, 3),
            [
                WarmReference,
                WarmKernel,
                Reference(0),
                Kernel(0),
                Reference(1),
                Kernel(1),
                Reference(2),
                Kernel(2)
            ]
        );
        assert_eq!(schedule(0, 1), [Reference(0), Kernel(0)]);
        assert!(schedule(2, 0)
            .iter()
            .all(|s| matches!(s, WarmReference | WarmKernel)));
    }

    #[test]
    fn interleave_calls_in_schedule_order() {
        let log = std::cell::RefCell::new(Vec::new());
        let m = interleave(1, 2, &mut || log.borrow_mut().push('R'), &mut || {
            log.borrow_mut().push('K')
        });
        assert_eq!(log.into_inner(), ['R', 'K', 'R', 'K', 'R', 'K']);
        assert_eq!((m.reference_s.len(), m.kernel_s.len()), (2, 2));
        assert!(m.reference_s.iter().chain(&m.kernel_s).all(|t| *t >= 0.0));
    }

    #[test]
    fn ratio_of_medians_and_quartiles_of_pair_ratios_on_hand_made_times() {
        // Reference medians 2.0, kernel median 4.0: the kernel runs at half the rate.
        // Pair ratios 2/4, 1/4, 3/5, 2/2 = 0.5, 0.25, 0.6, 1.0; sorted 0.25 0.5 0.6 1.0;
        // Q1 at position 0.75 = 0.25 + 0.75·0.25 = 0.4375, Q3 at 2.25 = 0.6 + 0.25·0.4 = 0.7.
        let m = Interleaved::from_times(vec![2.0, 1.0, 3.0, 2.0], vec![4.0, 4.0, 5.0, 2.0]);
        assert_eq!(m.reference.median_s, 2.0);
        assert_eq!(m.kernel.median_s, 4.0);
        assert_eq!(m.ratio, 0.5);
        assert!((m.ratio_q1 - 0.4375).abs() < 1e-12, "{}", m.ratio_q1);
        assert!((m.ratio_q3 - 0.7).abs() < 1e-12, "{}", m.ratio_q3);
        assert_eq!((m.kernel.min_s, m.kernel.max_s), (2.0, 5.0));
    }
}
