//! Timing statistics: repeated wall-clock runs of a closure and their summary (median,
//! extremes, quartiles), and quantiles of any sample.
//!
//! Quartiles interpolate linearly between order statistics: the p-quantile of n sorted
//! values sits at position p·(n−1), numpy's default `percentile` method (numpy docs,
//! `numpy.percentile`, method "linear"). The interquartile range is Q3 − Q1.

use serde::{Deserialize, Serialize};
use std::time::Instant;

/// Summary of a set of wall-clock timings, in seconds.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Summary {
    /// Number of timings summarised.
    pub runs: usize,
    /// Median; for an even count, the mean of the two middle values.
    pub median_s: f64,
    /// Fastest timing.
    pub min_s: f64,
    /// Slowest timing.
    pub max_s: f64,
    /// First quartile (see the module doc).
    pub q1_s: f64,
    /// Third quartile.
    pub q3_s: f64,
}

impl Summary {
    /// Interquartile range, `q3 - q1`.
    pub fn iqr_s(&self) -> f64 {
        self.q3_s - self.q1_s
    }
}

/// The `p`-quantile (0 ≤ p ≤ 1) of `sorted` (ascending) by linear interpolation between
/// order statistics; NaN for an empty slice.
pub fn quantile(sorted: &[f64], p: f64) -> f64 {
    match sorted.len() {
        0 => f64::NAN,
        n => {
            let pos = p.clamp(0.0, 1.0) * (n - 1) as f64;
            let (lo, frac) = (pos.floor() as usize, pos.fract());
            let hi = (lo + 1).min(n - 1);
            sorted[lo] + (sorted[hi] - sorted[lo]) * frac
        }
    }
}

/// `values` sorted ascending (NaN last), for [`quantile`].
pub fn sorted(values: &[f64]) -> Vec<f64> {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    v
}

/// Summarises `times_s`. An empty slice gives `runs == 0` and NaN statistics, so
/// a caller that forgot to time anything cannot mistake the result for a real figure.
pub fn summarize(times_s: &[f64]) -> Summary {
    let sorted = sorted(times_s);
    Summary {
        runs: sorted.len(),
        // The 0.5-quantile is the middle value, or the mean of the middle two.
        median_s: quantile(&sorted, 0.5),
        min_s: sorted.first().copied().unwrap_or(f64::NAN),
        max_s: sorted.last().copied().unwrap_or(f64::NAN),
        q1_s: quantile(&sorted, 0.25),
        q3_s: quantile(&sorted, 0.75),
    }
}

/// Calls `f` `warmup` times untimed, then `runs` times, returning each timed run's
/// wall-clock duration in seconds. Warm-up runs let caches, page tables and thread
/// pools settle so the timed runs measure steady state (common practice).
pub fn time_runs<F: FnMut()>(warmup: usize, runs: usize, mut f: F) -> Vec<f64> {
    for _ in 0..warmup {
        f();
    }
    (0..runs)
        .map(|_| {
            let start = Instant::now();
            f();
            start.elapsed().as_secs_f64()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn odd_count_median_is_middle_value() {
        // Sorted: 1, 2, 5 -> median 2.
        let s = summarize(&[5.0, 1.0, 2.0]);
        assert_eq!(
            s,
            Summary {
                runs: 3,
                median_s: 2.0,
                min_s: 1.0,
                max_s: 5.0,
                // Positions 0.5 and 1.5: 1 + 0.5·(2−1) = 1.5 and 2 + 0.5·(5−2) = 3.5.
                q1_s: 1.5,
                q3_s: 3.5,
            }
        );
    }

    #[test]
    fn even_count_median_is_mean_of_middle_two() {
        // Sorted: 0.1, 0.2, 0.4, 0.9 -> median (0.2 + 0.4) / 2 = 0.3.
        let s = summarize(&[0.4, 0.9, 0.1, 0.2]);
        assert_eq!(s.runs, 4);
        assert!((s.median_s - 0.3).abs() < 1e-15);
        assert_eq!(s.min_s, 0.1);
        assert_eq!(s.max_s, 0.9);
    }

    #[test]
    fn single_timing_is_its_own_summary() {
        let s = summarize(&[0.25]);
        assert_eq!(
            (s.runs, s.median_s, s.min_s, s.max_s),
            (1, 0.25, 0.25, 0.25)
        );
    }

    #[test]
    fn empty_input_gives_nan_not_zero() {
        let s = summarize(&[]);
        assert_eq!(s.runs, 0);
        assert!(s.median_s.is_nan() && s.min_s.is_nan() && s.max_s.is_nan());
        assert!(s.q1_s.is_nan() && s.q3_s.is_nan());
    }

    #[test]
    fn quartiles_match_numpy_linear_percentiles() {
        // numpy.percentile([1, 2, 3, 4, 5, 6, 7, 8, 9, 10], [25, 75]) = [3.25, 7.75]
        // (linear method: positions 2.25 and 6.75); worked by hand from the numpy docs.
        let v: Vec<f64> = (1..=10).map(f64::from).collect();
        let s = summarize(&v);
        assert_eq!((s.q1_s, s.median_s, s.q3_s), (3.25, 5.5, 7.75));
        assert_eq!(s.iqr_s(), 4.5);
        // Order does not matter; one value is every quantile of itself.
        let mut r = v.clone();
        r.reverse();
        assert_eq!(summarize(&r), s);
        assert_eq!(quantile(&[7.0], 0.25), 7.0);
        assert!(quantile(&[], 0.5).is_nan());
    }

    #[test]
    fn summary_round_trips_through_json() {
        let s = summarize(&[0.5, 1.5]);
        let text = serde_json::to_string(&s).unwrap();
        assert_eq!(serde_json::from_str::<Summary>(&text).unwrap(), s);
    }

    #[test]
    fn time_runs_calls_warmup_plus_runs_and_times_only_runs() {
        let mut calls = 0;
        let times = time_runs(2, 3, || {
            calls += 1;
            // Only the timed calls (after the 2 warm-ups) sleep, so each timing
            // must cover at least this sleep.
            if calls > 2 {
                std::thread::sleep(std::time::Duration::from_millis(2));
            }
        });
        assert_eq!(calls, 5);
        assert_eq!(times.len(), 3);
        assert!(times.iter().all(|&t| t >= 0.002), "{times:?}");
    }
}
