//! Sweeps: one ledger per point (engine count × placement, say), each predicted on the
//! same device, as CSV rows and a line chart of predicted aggregate bandwidth.
//!
//! Invariant: rows come out in the order the points were given; the chart has one line
//! per distinct series label (in order of first appearance) over the sorted engine counts.

use std::fmt::Write as _;

use serde::Serialize;

use super::device::Device;
use super::model::evaluate;
use crate::ledger::Ledger;
use crate::plot::{Chart, Series};
use crate::Result;

/// One point of a sweep: the series it belongs to (a placement), its x value (engines)
/// and the ledger a ledger-only run produced for it.
#[derive(Debug, Clone)]
pub struct SweepPoint {
    /// Series label, such as `spread` or `packed`.
    pub series: String,
    /// Engines at this point.
    pub engines: u32,
    /// The point's ledger.
    pub ledger: Ledger,
}

/// One predicted point.
#[derive(Debug, Clone, Serialize)]
pub struct SweepRow {
    /// Series label.
    pub series: String,
    /// Engines.
    pub engines: u32,
    /// Calibrated total, s.
    pub predicted_s: f64,
    /// Peak-bandwidth total, s.
    pub peak_s: f64,
    /// Device payload bytes per second (read + write) at the calibrated total, GB/s.
    pub aggregate_gbps: f64,
    /// Payload bytes read per second at the calibrated total (consumption rate), GB/s.
    pub consumed_gbps: f64,
    /// Bottleneck of the longest phase.
    pub bottleneck: String,
}

/// Predicts every point on `d` (ledger words of `word_bits`).
pub fn sweep(d: &Device, points: &[SweepPoint], word_bits: u32) -> Result<Vec<SweepRow>> {
    points
        .iter()
        .map(|p| {
            let plan = evaluate(d, &p.ledger, word_bits)?;
            let worst = plan
                .phases
                .iter()
                .max_by(|a, b| a.time_s.total_cmp(&b.time_s))
                .map(|ph| ph.bottleneck.to_string())
                .unwrap_or_default();
            Ok(SweepRow {
                series: p.series.clone(),
                engines: p.engines,
                predicted_s: plan.total_s,
                peak_s: plan.peak_total_s,
                aggregate_gbps: plan.aggregate_gbps,
                consumed_gbps: super::model::gbps(plan.read_bytes, plan.total_s),
                bottleneck: worst,
            })
        })
        .collect()
}

/// The rows as CSV with the header
/// `series,engines,predicted_s,peak_s,aggregate_gbps,consumed_gbps,bottleneck`.
pub fn sweep_csv(rows: &[SweepRow]) -> String {
    let mut s =
        String::from("series,engines,predicted_s,peak_s,aggregate_gbps,consumed_gbps,bottleneck\n");
    for r in rows {
        let _ = writeln!(
            s,
            "{},{},{:e},{:e},{:.4},{:.4},{}",
            r.series,
            r.engines,
            r.predicted_s,
            r.peak_s,
            r.aggregate_gbps,
            r.consumed_gbps,
            r.bottleneck
        );
    }
    s
}

/// Predicted aggregate bandwidth against engines, one line per series.
pub fn sweep_chart(rows: &[SweepRow], device: &str) -> Chart {
    let mut engines: Vec<u32> = rows.iter().map(|r| r.engines).collect();
    engines.sort_unstable();
    engines.dedup();
    let mut names: Vec<&str> = Vec::new();
    for r in rows {
        if !names.contains(&r.series.as_str()) {
            names.push(&r.series);
        }
    }
    let series = names
        .iter()
        .map(|n| Series {
            name: n.to_string(),
            values: engines
                .iter()
                .map(|&e| {
                    rows.iter()
                        .find(|r| r.series == *n && r.engines == e)
                        .map(|r| r.aggregate_gbps)
                })
                .collect(),
        })
        .collect();
    Chart {
        title: format!("predicted aggregate bandwidth on {device}"),
        x_label: "engines".into(),
        y_label: "GB/s (first-order bound)".into(),
        x: engines.iter().map(|e| e.to_string()).collect(),
        series,
        references: Vec::new(),
    }
}
