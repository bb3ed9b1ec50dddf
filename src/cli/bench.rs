//! `weir calibrate` and `weir bench`.

use weir::bench::calibrate::{calibrate as measure, Calibration, CalibrationParams};
use weir::bench::scan::{self as scan_bench, ScanBenchParams};
use weir::report::TextTable;
use weir::{Error, Result};

use super::args::{BenchArgs, BenchKind, BenchScanArgs, CalibrateArgs};
use super::gen::write_file_atomic;
use super::Outcome;

/// Parses a byte count with an optional K, M or G suffix (binary units).
fn parse_bytes(s: &str) -> Result<u64> {
    let t = s.trim();
    let (num, mult) = match t.chars().last() {
        Some('K' | 'k') => (&t[..t.len() - 1], 1u64 << 10),
        Some('M' | 'm') => (&t[..t.len() - 1], 1 << 20),
        Some('G' | 'g') => (&t[..t.len() - 1], 1 << 30),
        _ => (t, 1),
    };
    num.parse::<u64>().map(|n| n * mult).map_err(|_| {
        Error::input(format!(
            "--bytes `{s}`: expected a number with an optional K, M or G suffix"
        ))
    })
}

/// Threads of this host.
pub fn all_threads() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get())
}

fn run_calibration(params: &CalibrationParams) -> Result<Calibration> {
    let pb = super::progress(0, "calibrating");
    let cal = measure(params, &mut |done, total| {
        pb.set_length(total as u64);
        pb.set_position(done as u64);
    })
    .map_err(|e| Error::input(format!("calibration: {e}")))?;
    pb.finish_and_clear();
    Ok(cal)
}

fn calibration_table(cal: &Calibration) -> String {
    let mut t = TextTable::new(&["threads", "read GB/s", "write GB/s", "copy GB/s"]);
    for p in &cal.points {
        t.row(vec![
            p.threads.to_string(),
            format!("{:.2}", p.read_gbps),
            format!("{:.2}", p.write_gbps),
            format!("{:.2}", p.copy_gbps),
        ]);
    }
    t.render()
}

/// `weir calibrate`.
pub fn calibrate(a: CalibrateArgs) -> Result<Outcome> {
    if let Some(out) = &a.out {
        if out.exists() && !a.force {
            return Err(Error::exists(format!(
                "{} exists; add --force to replace it",
                out.display()
            )));
        }
    }
    let params = CalibrationParams {
        max_threads: a.threads.unwrap_or_else(all_threads),
        bytes: parse_bytes(&a.bytes)?,
        runs: a.runs,
    };
    let cal = run_calibration(&params)?;
    say!(
        "streaming bandwidth over {} MiB buffers, best of {} runs ({}; {})",
        cal.bytes >> 20,
        cal.runs,
        cal.isa,
        cal.cpu
    );
    say!("{}", calibration_table(&cal).trim_end());
    if let Some(out) = &a.out {
        let text = cal.to_json().map_err(|e| Error::input(e.to_string()))?;
        write_file_atomic(out, text.as_bytes(), a.force)?;
        say!("saved to {}", out.display());
    }
    Ok(Outcome::Ok)
}

/// `weir bench`.
pub fn bench(a: BenchArgs) -> Result<Outcome> {
    match a.kind {
        BenchKind::Scan(s) => bench_scan(s),
        BenchKind::Join(j) => super::bench_join::bench_join(j),
    }
}

fn bench_scan(a: BenchScanArgs) -> Result<Outcome> {
    let threads = a.threads.clone().unwrap_or_else(|| {
        let n = all_threads();
        if n > 1 {
            vec![1, n]
        } else {
            vec![1]
        }
    });
    if threads.contains(&0) || a.runs == 0 || a.rows == 0 {
        return Err(Error::input(
            "--threads, --runs and --rows must be at least 1",
        ));
    }
    if let Some(s) = a.selectivity.iter().find(|s| !(0.0..=1.0).contains(*s)) {
        return Err(Error::input(format!(
            "--selectivity {s}: must be within 0..=1"
        )));
    }
    let outputs: Vec<std::path::PathBuf> = a
        .out
        .iter()
        .flat_map(|p| ["csv", "json", "svg"].map(|e| p.with_extension(e)))
        .collect();
    if let Some(p) = outputs.iter().find(|p| p.exists() && !a.force) {
        return Err(Error::exists(format!(
            "{} exists; add --force to replace it",
            p.display()
        )));
    }
    let cal = match &a.calibration {
        Some(path) => {
            let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
            Calibration::from_json(&text)
                .map_err(|e| Error::input(format!("{}: {e}", path.display())))?
        }
        None => {
            let max = threads.iter().copied().max().unwrap_or(1);
            // The same buffer size as `weir calibrate`: a short buffer or few runs read
            // low on a host whose bandwidth wanders.
            let params = CalibrationParams {
                max_threads: max,
                ..CalibrationParams::default()
            };
            eprintln!(
                "no --calibration given: measuring read bandwidth now ({} MiB, best of {} runs)",
                params.bytes >> 20,
                params.runs
            );
            run_calibration(&params)?
        }
    };
    let params = ScanBenchParams {
        rows: a.rows,
        threads,
        selectivities: a.selectivity.clone(),
        runs: a.runs,
    };
    let pb = super::progress(
        (params.threads.len() * params.selectivities.len()) as u64,
        "scan bench",
    );
    let mut save_err = None;
    let points = scan_bench::bench_scan(
        &params,
        &|t| cal.best_read_gbps(t),
        &mut |done, _| pb.set_position(done as u64),
        &mut |s, table| {
            if let Some(p) = &a.save_npy {
                let path = if params.selectivities.len() > 1 {
                    p.with_file_name(format!(
                        "{}-{s}.npy",
                        p.file_stem().unwrap_or_default().to_string_lossy()
                    ))
                } else {
                    p.clone()
                };
                let mut bytes = Vec::new();
                let r = weir::table::write_npy_column(&mut bytes, &table.columns[0])
                    .map_err(|e| Error::io(&path, e))
                    .and_then(|_| write_file_atomic(&path, &bytes, a.force));
                if let Err(e) = r {
                    save_err.get_or_insert(e);
                }
            }
        },
    );
    pb.finish_and_clear();
    if let Some(e) = save_err {
        return Err(e);
    }
    say!(
        "scan of {} u32 rows ({} MiB), predicate v >= {} and v < {}, row-id output, {} runs after a warm-up",
        a.rows,
        (a.rows * 4) >> 20,
        scan_bench::LO,
        scan_bench::HI,
        a.runs
    );
    let mut t = TextTable::new(&[
        "threads",
        "selectivity",
        "matches",
        "median ms",
        "min ms",
        "max ms",
        "GB/s",
        "read GB/s",
        "of read",
        "isa",
    ]);
    for p in &points {
        t.row(vec![
            p.threads.to_string(),
            format!("{}", p.selectivity),
            p.matches.to_string(),
            format!("{:.2}", p.time.median_s * 1e3),
            format!("{:.2}", p.time.min_s * 1e3),
            format!("{:.2}", p.time.max_s * 1e3),
            format!("{:.2}", p.gbps),
            format!("{:.2}", p.read_gbps),
            format!("{:.0}%", p.fraction_of_read * 100.0),
            p.isa.to_string(),
        ]);
    }
    say!("{}", t.render().trim_end());
    if let Some(prefix) = &a.out {
        write_file_atomic(
            &prefix.with_extension("csv"),
            scan_bench::to_csv(&points).as_bytes(),
            a.force,
        )?;
        let json = serde_json::json!({ "bench": "scan", "rows": a.rows, "calibration": cal, "points": points });
        let text = serde_json::to_string_pretty(&json).expect("json") + "\n";
        write_file_atomic(&prefix.with_extension("json"), text.as_bytes(), a.force)?;
        let svg = scan_bench::chart(&points, a.rows).to_svg();
        write_file_atomic(&prefix.with_extension("svg"), svg.as_bytes(), a.force)?;
        say!(
            "saved {}, {} and {}",
            prefix.with_extension("csv").display(),
            prefix.with_extension("json").display(),
            prefix.with_extension("svg").display()
        );
    }
    Ok(Outcome::Ok)
}
