//! `weir calibrate` and `weir bench`.

use weir::bench::calibrate::{calibrate as measure, Calibration, CalibrationParams};
use weir::bench::scan::{self as scan_bench, ScanBenchParams};
use weir::tables::TextTable;
use weir::{Error, Result};

use super::args::{BenchArgs, BenchKind, BenchScanArgs, BenchSgdArgs, CalibrateArgs};
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

fn all_threads() -> usize {
    weir::bench::host::threads()
}

/// Refuses thread counts above the host's: they would time the same cores and label the
/// result with a count that never ran in parallel.
fn check_threads(flag: &str, threads: &[usize]) -> Result<()> {
    let host = all_threads();
    match threads.iter().find(|&&t| t > host) {
        Some(t) => Err(Error::input(format!(
            "{flag} {t}: this host runs {host} hardware thread{}; ask for at most {host}",
            if host == 1 { "" } else { "s" }
        ))),
        None => Ok(()),
    }
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
    let mut t = TextTable::new(&[
        "threads",
        "read GB/s",
        "read IQR",
        "write GB/s",
        "write IQR",
        "copy GB/s",
        "copy IQR",
        "best read",
    ]);
    let iqr = |r: &weir::bench::calibrate::Rate| format!("{:.2}–{:.2}", r.q1_gbps, r.q3_gbps);
    for p in &cal.points {
        t.row(vec![
            p.threads.to_string(),
            format!("{:.2}", p.read.median_gbps),
            iqr(&p.read),
            format!("{:.2}", p.write.median_gbps),
            iqr(&p.write),
            format!("{:.2}", p.copy.median_gbps),
            iqr(&p.copy),
            format!("{:.2}", p.read.best_gbps),
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
    if let Some(t) = a.threads {
        check_threads("--threads", &[t])?;
    }
    let params = CalibrationParams {
        max_threads: a.threads.unwrap_or_else(all_threads),
        bytes: parse_bytes(&a.bytes)?,
        runs: a.runs,
    };
    let cal = run_calibration(&params)?;
    say!(
        "streaming bandwidth over {} MiB buffers, median and interquartile range of {} runs after a warm-up ({}; {})",
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
/// The files `--out PREFIX` names (`PREFIX.csv`, `.json`, `.svg`), refused when one
/// exists and `force` is not given.
pub fn bench_outputs(
    prefix: Option<&std::path::Path>,
    force: bool,
) -> Result<Vec<std::path::PathBuf>> {
    let outputs: Vec<std::path::PathBuf> = prefix
        .iter()
        .flat_map(|p| ["csv", "json", "svg"].map(|e| p.with_extension(e)))
        .collect();
    if let Some(p) = outputs.iter().find(|p| p.exists() && !force) {
        return Err(Error::exists(format!(
            "{} exists; add --force to replace it",
            p.display()
        )));
    }
    Ok(outputs)
}

/// Writes a bench's results as `PREFIX.csv`, `PREFIX.json` and the plot `PREFIX.svg`.
pub fn save_bench(
    prefix: &std::path::Path,
    force: bool,
    csv: &str,
    json: &serde_json::Value,
    svg: &str,
) -> Result<()> {
    let text = serde_json::to_string_pretty(json).expect("json") + "\n";
    for (ext, bytes) in [
        ("csv", csv.as_bytes()),
        ("json", text.as_bytes()),
        ("svg", svg.as_bytes()),
    ] {
        write_file_atomic(&prefix.with_extension(ext), bytes, force)?;
    }
    say!(
        "saved {}, {} and {}",
        prefix.with_extension("csv").display(),
        prefix.with_extension("json").display(),
        prefix.with_extension("svg").display()
    );
    Ok(())
}

pub fn bench(a: BenchArgs) -> Result<Outcome> {
    match a.kind {
        BenchKind::Scan(s) => bench_scan(s),
        BenchKind::Sgd(s) => bench_sgd(s),
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
    check_threads("--threads", &threads)?;
    if let Some(s) = a.selectivity.iter().find(|s| !(0.0..=1.0).contains(*s)) {
        return Err(Error::input(format!(
            "--selectivity {s}: must be within 0..=1"
        )));
    }
    bench_outputs(a.out.as_deref(), a.force)?;
    // A saved calibration is kept in the JSON for context only: the fraction comes from
    // the read reference interleaved with the scan's own runs.
    let cal = match &a.calibration {
        Some(path) => {
            let text = std::fs::read_to_string(path).map_err(|e| Error::read(path, e))?;
            Some(
                Calibration::from_json(&text)
                    .map_err(|e| Error::input(format!("{}: {e}", path.display())))?,
            )
        }
        None => None,
    };
    let llc = weir::bench::host::llc_bytes();
    let params = ScanBenchParams {
        rows: a.rows,
        threads,
        selectivities: a.selectivity.clone(),
        runs: a.runs,
        llc_bytes: llc,
    };
    let pb = super::progress(
        (params.threads.len() * params.selectivities.len()) as u64,
        "scan bench",
    );
    let mut save_err = None;
    let points = scan_bench::bench_scan(
        &params,
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
    )
    .map_err(|e| Error::input(format!("scan bench: {e}")))?;
    pb.finish_and_clear();
    if let Some(e) = save_err {
        return Err(e);
    }
    say!(
        "scan of {} u32 rows ({} MiB), predicate v >= {} and v < {}, row-id output; {} runs after a warm-up, each after a streaming read of as many bytes",
        a.rows,
        (a.rows * 4) >> 20,
        scan_bench::LO,
        scan_bench::HI,
        a.runs
    );
    let llc_text = llc.map_or("unknown".to_string(), |b| format!("{} MiB", b >> 20));
    if points.iter().any(|p| p.in_cache) {
        say!("the column fits in the last-level cache ({llc_text}): cache speed, not compared with memory");
    } else {
        say!("last-level cache {llc_text}; of read = ratio of median times (read / scan), IQR of the per-pair ratios");
    }
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
        "IQR",
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
            match p.fraction_of_read {
                None => "in LLC".to_string(),
                Some(f) if p.disturbed => format!("{:.0}% !", f * 100.0),
                Some(f) => format!("{:.0}%", f * 100.0),
            },
            format!("{:.0}–{:.0}%", p.fraction_q1 * 100.0, p.fraction_q3 * 100.0),
            p.isa.to_string(),
        ]);
    }
    say!("{}", t.render().trim_end());
    if points.iter().any(|p| p.disturbed) {
        say!(
            "! above {:.0}% of read: the read reference was disturbed (other work on the host), not outrun",
            scan_bench::DISTURBED_ABOVE * 100.0
        );
    }
    if let Some(prefix) = &a.out {
        let json = serde_json::json!({ "bench": "scan", "rows": a.rows, "calibration": cal, "points": points });
        let svg = scan_bench::chart(&points, a.rows).to_svg();
        save_bench(prefix, a.force, &scan_bench::to_csv(&points), &json, &svg)?;
    }
    Ok(Outcome::Ok)
}

fn sgd_mode(name: &str) -> Result<weir::kernels::sgd::Numeric> {
    use weir::kernels::sgd::{FixedSpec, Numeric, Overflow, Rounding};
    use weir::table::QFormat;
    let q = |int_bits, frac_bits| QFormat {
        int_bits,
        frac_bits,
    };
    Ok(match name {
        "f32" => Numeric::F32 {
            lanes: 16,
            ftz: false,
        },
        "f32-seq" => Numeric::F32 {
            lanes: 1,
            ftz: false,
        },
        "f64" => Numeric::F64 { lanes: 16 },
        "fixed" => Numeric::Fixed(FixedSpec {
            data: q(7, 8),
            model: q(7, 24),
            acc: q(15, 24),
            rounding: Rounding::NearestEven,
            overflow: Overflow::Saturate,
            lfsr_seed: 1,
            sigmoid_bits: 8,
        }),
        o => {
            return Err(Error::input(format!(
                "--modes `{o}`: expected f32, f32-seq, f64 or fixed"
            )))
        }
    })
}

fn bench_sgd(a: BenchSgdArgs) -> Result<Outcome> {
    use weir::bench::sgd as sgd_bench;
    let threads = a.threads.clone().unwrap_or_else(|| {
        if all_threads() > 1 {
            vec![1, all_threads()]
        } else {
            vec![1]
        }
    });
    if threads.contains(&0)
        || a.runs == 0
        || a.rows == 0
        || a.dims.contains(&0)
        || a.batch.contains(&0)
    {
        return Err(Error::input(
            "--threads, --runs, --rows, --dims and --batch must be at least 1",
        ));
    }
    bench_outputs(a.out.as_deref(), a.force)?;
    let params = sgd_bench::SgdBenchParams {
        dims: a.dims.clone(),
        batches: a.batch.clone(),
        rows: a.rows,
        max_bytes: a.max_mib << 20,
        threads,
        modes: a.modes.iter().map(|m| sgd_mode(m)).collect::<Result<_>>()?,
        runs: a.runs,
    };
    let total =
        params.dims.len() * params.batches.len() * params.threads.len() * params.modes.len();
    let pb = super::progress(total as u64, "sgd bench");
    let mut save_err = None;
    let points = sgd_bench::bench_sgd(
        &params,
        &mut |done, _| pb.set_position(done as u64),
        &mut |d, data| {
            if let Some(p) = &a.save_npy {
                let prefix = p.with_file_name(format!(
                    "{}-d{d}",
                    p.file_name().unwrap_or_default().to_string_lossy()
                ));
                if let Err(e) = super::gen::sgd_npy(&prefix, data, a.force) {
                    save_err.get_or_insert(e);
                }
            }
        },
    )
    .map_err(|e| Error::input(e.to_string()))?;
    pb.finish_and_clear();
    if let Some(e) = save_err {
        return Err(e);
    }
    say!("one epoch of squared-loss SGD per engine (one per thread, each over its own copy of the dataset), {} runs each after a read pass over the same copies", a.runs);
    let mut t = TextTable::new(&[
        "d",
        "B",
        "rows",
        "threads",
        "mode",
        "median ms",
        "Msamples/s",
        "GB/s",
        "read GB/s",
        "of read",
        "spread",
    ]);
    for p in &points {
        t.row(vec![
            p.dims.to_string(),
            p.batch.to_string(),
            p.rows.to_string(),
            p.threads.to_string(),
            p.mode.clone(),
            format!("{:.2}", p.time.median_s * 1e3),
            format!("{:.1}", p.samples_per_s / 1e6),
            format!("{:.2}", p.gbps),
            format!("{:.2}", p.read_gbps),
            format!("{:.0}%", p.ratio * 100.0),
            format!("{:.0}–{:.0}%", p.ratio_min * 100.0, p.ratio_max * 100.0),
        ]);
    }
    say!("{}", t.render().trim_end());
    if let Some(prefix) = &a.out {
        let json = serde_json::json!({ "bench": "sgd", "points": points });
        let svg = sgd_bench::chart(&points).to_svg();
        save_bench(prefix, a.force, &sgd_bench::to_csv(&points), &json, &svg)?;
    }
    Ok(Outcome::Ok)
}
