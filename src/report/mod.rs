//! The HTML report of a run: one self-contained page (inline SVG and CSS, one small inline
//! script, no external assets) with the ledger per channel as a bar chart, the plan when
//! `plan.json` is present, and every SVG figure found in the run directory (sweep plots,
//! bench figures).
//!
//! ```text
//!   RUN_DIR/ledger.json ─► bar chart ─┐
//!   RUN_DIR/plan.json  ─► plan table ─┼─► page ─► RUN_DIR/report.html
//!   RUN_DIR/*.svg      ─► figures ────┘
//! ```
//!
//! Invariants: every chart sits in a `<figure class="chart" data-series="a|b">` naming its
//! series; the page's script marks each figure `data-rendered="yes"` once the browser has
//! laid out its SVG with drawn shapes, and records script errors in `body[data-errors]`, so
//! a headless browser's DOM dump tells whether the page rendered.

mod page;

pub use page::{render, ReportInput};

use std::path::Path;

use crate::ledger::{Ledger, Region};
use crate::memsys::ledger_file::read_ledger_json;
use crate::plot::{BarChart, Series};
use crate::{Error, Result};

/// The ledger's device traffic per channel, reads and writes stacked, in MiB.
pub fn ledger_chart(ledger: &Ledger) -> BarChart {
    let per = ledger.totals_by(|k| match k.region {
        Region::Device => k.channel,
        _ => None,
    });
    let per: Vec<_> = per
        .into_iter()
        .filter_map(|(c, t)| c.map(|c| (c, t)))
        .collect();
    let mib = |b: u64| Some(b as f64 / f64::from(1u32 << 20));
    BarChart {
        title: "ledger: device bytes per channel".into(),
        x_label: "channel".into(),
        y_label: "MiB".into(),
        x: per.iter().map(|(c, _)| c.to_string()).collect(),
        series: vec![
            Series {
                name: "read".into(),
                values: per.iter().map(|(_, t)| mib(t.read.bytes)).collect(),
            },
            Series {
                name: "written".into(),
                values: per.iter().map(|(_, t)| mib(t.write.bytes)).collect(),
            },
        ],
    }
}

/// Everything the page shows, read from `dir`: `ledger.json` (required), `plan.json` and
/// every `*.svg` at the top level (optional).
pub fn gather(dir: &Path) -> Result<ReportInput> {
    let read = |name: &str| {
        let p = dir.join(name);
        std::fs::read_to_string(&p).map_err(|e| Error::read(&p, e))
    };
    let lp = dir.join("ledger.json");
    let (ledger, word_bits) = read_ledger_json(&read("ledger.json")?, &lp.display().to_string())?;
    let plan = match read("plan.json") {
        Ok(t) => Some(
            serde_json::from_str(&t)
                .map_err(|e| Error::input(format!("{}: {e}", dir.join("plan.json").display())))?,
        ),
        Err(_) => None,
    };
    let mut figures = Vec::new();
    let entries = std::fs::read_dir(dir).map_err(|e| Error::io(dir, e))?;
    let mut paths: Vec<_> = entries
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "svg"))
        .collect();
    paths.sort();
    for p in paths {
        let text = std::fs::read_to_string(&p).map_err(|e| Error::read(&p, e))?;
        let name = p
            .file_name()
            .unwrap_or_default()
            .to_string_lossy()
            .into_owned();
        figures.push((name, text));
    }
    Ok(ReportInput {
        title: dir
            .file_name()
            .unwrap_or_default()
            .to_string_lossy()
            .into_owned(),
        ledger,
        word_bits,
        plan,
        figures,
    })
}
