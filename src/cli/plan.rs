//! `weir plan`: a run's ledger on a device — predicted time per phase and in total, the
//! bottleneck, the speed-up over the host baseline, and a device's counters beside both.

use std::path::Path;

use weir::memsys::ledger_file::read_ledger_json;
use weir::memsys::measured::{counter_diffs, phase_diffs, read_counters};
use weir::memsys::placement::{parse_placement, remap};
use weir::memsys::{evaluate, Device, Plan, BOUND_NOTE};
use weir::tables::TextTable;
use weir::{Error, Result};

use super::args::PlanArgs;
use super::gen::write_file_atomic;
use super::Outcome;

fn read(path: &Path) -> Result<String> {
    std::fs::read_to_string(path).map_err(|e| Error::read(path, e))
}

/// The host's time for the run: from a bench result (best GB/s over its points, applied
/// to the run's device read bytes) or from the run's `timing.json`. Returns (source, s).
fn baseline(dir: &Path, bench: Option<&Path>, read_bytes: u64) -> Result<Option<(String, f64)>> {
    if let Some(b) = bench {
        let v: serde_json::Value = serde_json::from_str(&read(b)?)
            .map_err(|e| Error::input(format!("{}: {e}", b.display())))?;
        let best = v
            .get("points")
            .and_then(|p| p.as_array())
            .into_iter()
            .flatten()
            .filter_map(|p| p.get("gbps").and_then(|g| g.as_f64()))
            .fold(0.0f64, f64::max);
        if best <= 0.0 {
            return Err(Error::input(format!(
                "{}: no bench point with a GB/s figure",
                b.display()
            )));
        }
        let s = read_bytes as f64 / (best * 1e9);
        return Ok(Some((
            format!("{} at its best {best:.2} GB/s", b.display()),
            s,
        )));
    }
    let t = dir.join("timing.json");
    let Ok(text) = std::fs::read_to_string(&t) else {
        return Ok(None);
    };
    let v: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| Error::input(format!("{}: {e}", t.display())))?;
    Ok(v.get("kernel_s")
        .and_then(|k| k.as_f64())
        .filter(|k| *k > 0.0)
        .map(|k| (format!("{} kernel_s", t.display()), k)))
}

/// The second-busiest resource of a phase and its utilisation.
fn next_busiest(p: &weir::memsys::model::PhasePlan) -> String {
    p.resources
        .iter()
        .filter(|u| u.resource != p.bottleneck)
        .max_by(|a, b| a.utilisation.total_cmp(&b.utilisation))
        .map_or("-".into(), |u| {
            format!("{} {:.0}%", u.resource, u.utilisation * 100.0)
        })
}

fn plan_table(plan: &Plan) -> String {
    let mut t = TextTable::new(&[
        "phase",
        "predicted ms",
        "peak ms",
        "bottleneck",
        "next resource",
        "read GB/s",
    ]);
    for p in &plan.phases {
        t.row(vec![
            p.phase.clone(),
            format!("{:.4}", p.time_s * 1e3),
            format!("{:.4}", p.peak_time_s * 1e3),
            p.bottleneck.to_string(),
            next_busiest(p),
            format!("{:.2}", p.consumed_gbps),
        ]);
    }
    t.render()
}

/// Refuses to replace a `plan.json` that weir did not write.
fn check_own(path: &Path) -> Result<()> {
    if let Ok(text) = std::fs::read_to_string(path) {
        let ours = serde_json::from_str::<serde_json::Value>(&text)
            .ok()
            .and_then(|v| {
                v.get("note")
                    .and_then(|n| n.as_str())
                    .map(|n| n == BOUND_NOTE)
            })
            .unwrap_or(false);
        if !ours {
            return Err(Error::exists(format!(
                "{} exists and was not written by weir plan; not replacing it",
                path.display()
            )));
        }
    }
    Ok(())
}

/// Plans `dir` on `device` and writes `dir/plan.json`; returns the plan and the JSON.
pub fn plan_dir(a: &PlanArgs) -> Result<(Plan, serde_json::Value)> {
    let dir = &a.run_dir;
    let lp = dir.join("ledger.json");
    let (golden, word_bits) = read_ledger_json(&read(&lp)?, &lp.display().to_string())?;
    let device = Device::load(&a.device)?;
    let ledger = match &a.placement {
        Some(p) => remap(&golden, &parse_placement(p)?, device.channels.count)?,
        None => golden.clone(),
    };
    let plan = evaluate(&device, &ledger, word_bits)?;
    let base = baseline(dir, a.bench.as_deref(), plan.read_bytes)?;
    let mut json = serde_json::to_value(&plan).expect("plan json");
    json["placement"] = serde_json::json!(a.placement.as_deref().unwrap_or("as run"));
    json["baseline"] = match &base {
        Some((src, s)) => serde_json::json!({
            "source": src, "host_s": s,
            "speedup": if plan.total_s > 0.0 { s / plan.total_s } else { 0.0 },
        }),
        None => serde_json::Value::Null,
    };
    if let Some(m) = &a.measured {
        let counters = read_counters(
            &read(m)?,
            word_bits,
            device.ports.clock_mhz,
            &m.display().to_string(),
        )?;
        json["measured"] = serde_json::json!({
            "file": m.display().to_string(),
            "phases": phase_diffs(&plan, &counters),
            "counters": counter_diffs(&golden, &counters.ledger),
        });
    }
    let out = dir.join("plan.json");
    check_own(&out)?;
    let text = serde_json::to_string_pretty(&json).expect("json") + "\n";
    write_file_atomic(&out, text.as_bytes(), true)?;
    Ok((plan, json))
}

/// One point of a sweep: its series label, engines, placement and the selectivity its
/// generated `select` columns ask for (`None`: as the job says).
struct Point {
    series: String,
    engines: u32,
    placement: String,
    selectivity: Option<f64>,
}

/// The points of `--sweep` axes: every placement × selectivity is a series over engines.
fn sweep_points(axes: &[String]) -> Result<Vec<Point>> {
    let mut engines: Vec<u32> = Vec::new();
    let mut placements: Vec<String> = Vec::new();
    let mut selectivities: Vec<f64> = Vec::new();
    for axis in axes {
        let bad = || {
            Error::input(format!(
                "--sweep `{axis}`: expected engines=A..B, placement=spread,packed or selectivity=0.01,0.5"
            ))
        };
        let (k, v) = axis.split_once('=').ok_or_else(bad)?;
        match k {
            "engines" => {
                let (a, b) = v.split_once("..").ok_or_else(bad)?;
                let (a, b): (u32, u32) =
                    (a.parse().map_err(|_| bad())?, b.parse().map_err(|_| bad())?);
                if a == 0 || a > b || b > weir::job::limits::MAX_ENGINES {
                    return Err(bad());
                }
                engines.extend(a..=b);
            }
            "placement" => placements.extend(v.split(',').map(str::to_string)),
            "selectivity" => {
                for x in v.split(',') {
                    let s: f64 = x.trim().parse().map_err(|_| bad())?;
                    if !(0.0..=1.0).contains(&s) {
                        return Err(bad());
                    }
                    selectivities.push(s);
                }
            }
            _ => return Err(bad()),
        }
    }
    if engines.is_empty() || placements.is_empty() {
        return Err(Error::input(
            "--sweep needs both an engines=A..B and a placement=… axis",
        ));
    }
    let sels: Vec<Option<f64>> = if selectivities.is_empty() {
        vec![None]
    } else {
        selectivities.into_iter().map(Some).collect()
    };
    let mut points = Vec::new();
    for p in &placements {
        for &sel in &sels {
            let series = match sel {
                Some(s) => format!("{p} selectivity={s}"),
                None => p.clone(),
            };
            for &e in &engines {
                points.push(Point {
                    series: series.clone(),
                    engines: e,
                    placement: p.clone(),
                    selectivity: sel,
                });
            }
        }
    }
    Ok(points)
}

/// Sets the requested selectivity of every generated `select` column of `spec`; an error
/// when there is none (the axis would change nothing).
fn set_selectivity(spec: &mut weir::job::JobSpec, s: f64) -> Result<()> {
    let mut any = false;
    for t in spec.table_specs_mut() {
        for c in &mut t.columns {
            if c.dist.as_deref() == Some("select") {
                c.selectivity = Some(s);
                any = true;
            }
        }
    }
    if any {
        Ok(())
    } else {
        Err(Error::input(
            "--sweep selectivity: the job has no generated `select` column to set",
        ))
    }
}

/// `weir plan JOB.toml --sweep …`: the job run ledger-only at every point, each ledger
/// on the device, written as sweep.csv and sweep.svg into `--out`.
fn plan_sweep(a: &PlanArgs) -> Result<Outcome> {
    let out = a
        .out
        .as_ref()
        .ok_or_else(|| Error::input("--sweep writes sweep.csv and sweep.svg: give --out DIR"))?;
    let spec = weir::job::JobSpec::load(&a.run_dir)?;
    let job_dir = a.run_dir.parent().unwrap_or(Path::new("."));
    let device = Device::load(&a.device)?;
    let mut points = Vec::new();
    let axes = sweep_points(&a.sweep)?;
    // Generated rows do not depend on the partitioning, so each table is generated once
    // and every point slices the same rows.
    let mut generated: std::collections::HashMap<String, weir::table::Table> = Default::default();
    let pb = super::progress(axes.len() as u64, "points");
    for Point {
        series,
        engines,
        placement,
        selectivity,
    } in axes
    {
        let mut s = spec.clone();
        if let Some(sel) = selectivity {
            set_selectivity(&mut s, sel)?;
        }
        s.layout.partitions = engines;
        // The device decides how many channels there are to spread over.
        s.layout.channels = device.channels.count;
        s.layout.placement = weir::job::spec::PlacementSpec::Name(placement);
        s.layout.partition_rows = None;
        let mut prep = weir::job::prepare(&s, job_dir)
            .map_err(|e| e.context(format!("sweep point {series}, {engines} engines")))?;
        for t in &mut prep.tables {
            if let weir::job::prepare::Source::Gen(g) = &t.source {
                let rows = generated
                    .entry(format!("{} {selectivity:?}", t.name))
                    .or_insert_with(|| g.generate(0..g.rows));
                t.source = weir::job::prepare::Source::Loaded(rows.clone());
            }
        }
        let ledger = weir::job::ledger_only(&prep)?;
        points.push(weir::memsys::sweep::SweepPoint {
            series,
            engines,
            ledger,
        });
        pb.inc(1);
    }
    pb.finish_and_clear();
    let rows = weir::memsys::sweep::sweep(&device, &points, spec.layout.word_bits)?;
    let mut t = TextTable::new(&["placement", "engines", "predicted ms", "GB/s", "bottleneck"]);
    for r in &rows {
        t.row(vec![
            r.series.clone(),
            r.engines.to_string(),
            format!("{:.4}", r.predicted_s * 1e3),
            format!("{:.2}", r.aggregate_gbps),
            r.bottleneck.clone(),
        ]);
    }
    say!(
        "sweep of {} on {} ({BOUND_NOTE})",
        a.run_dir.display(),
        device.name
    );
    say!("{}", t.render().trim_end());
    let dir = weir::job::OutDir::create(out, a.force, &[a.run_dir.as_path()])?;
    let csv = weir::memsys::sweep::sweep_csv(&rows);
    let svg = weir::memsys::sweep::sweep_chart(&rows, &device.name).to_svg();
    let mut files = Vec::new();
    for (name, text) in [("sweep.csv", csv.as_bytes()), ("sweep.svg", svg.as_bytes())] {
        let (bytes, sha256) = dir.write_all(name, text)?;
        files.push(weir::manifest::FileEntry {
            path: name.into(),
            format: name.rsplit('.').next().unwrap_or("").into(),
            bytes,
            sha256,
            ..Default::default()
        });
    }
    let manifest = weir::manifest::Manifest {
        format_version: weir::manifest::MANIFEST_FORMAT_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").into(),
        job: serde_json::to_value(&spec).unwrap_or_default(),
        word_bits: spec.layout.word_bits,
        files,
    };
    dir.write_all(weir::manifest::MANIFEST_FILE, manifest.to_json().as_bytes())?;
    dir.commit()?;
    say!("wrote {}/sweep.csv and sweep.svg", out.display());
    Ok(Outcome::Ok)
}

/// `weir plan`.
pub fn plan(a: PlanArgs) -> Result<Outcome> {
    if !a.sweep.is_empty() || a.run_dir.is_file() {
        return plan_sweep(&a);
    }
    let (plan, json) = plan_dir(&a)?;
    say!(
        "plan of {} on {} ({BOUND_NOTE})",
        a.run_dir.display(),
        plan.device
    );
    say!("{}", plan_table(&plan).trim_end());
    say!(
        "total: predicted {:.4} ms (peak bound {:.4} ms), {:.2} GB/s aggregate{}",
        plan.total_s * 1e3,
        plan.peak_total_s * 1e3,
        plan.aggregate_gbps,
        if plan.host_overlap {
            ", host transfers overlapped"
        } else {
            ""
        }
    );
    match json.get("baseline").filter(|b| !b.is_null()) {
        Some(b) => say!(
            "host baseline ({}): {:.4} ms; predicted speed-up {:.2}x",
            b["source"].as_str().unwrap_or(""),
            b["host_s"].as_f64().unwrap_or(0.0) * 1e3,
            b["speedup"].as_f64().unwrap_or(0.0)
        ),
        None => say!("host baseline: none (no timing.json and no --bench)"),
    }
    if let Some(m) = json.get("measured") {
        let mut t = TextTable::new(&["phase", "predicted ms", "measured ms", "measured/predicted"]);
        for p in m["phases"].as_array().into_iter().flatten() {
            let ms = |k: &str| {
                p[k].as_f64()
                    .map_or("-".to_string(), |x| format!("{:.4}", x * 1e3))
            };
            t.row(vec![
                p["phase"].as_str().unwrap_or("").to_string(),
                ms("predicted_s"),
                ms("measured_s"),
                p["ratio"]
                    .as_f64()
                    .map_or("-".to_string(), |r| format!("{r:.3}")),
            ]);
        }
        say!("\n{}", t.render().trim_end());
        let mut c = TextTable::new(&["counter", "golden words", "measured words", "difference"]);
        for d in m["counters"].as_array().into_iter().flatten() {
            c.row(vec![
                d["key"].as_str().unwrap_or("").to_string(),
                d["golden_words"].to_string(),
                d["measured_words"].to_string(),
                d["diff_words"].to_string(),
            ]);
        }
        say!("\n{}", c.render().trim_end());
    }
    say!("wrote {}", a.run_dir.join("plan.json").display());
    Ok(Outcome::Ok)
}
