//! `weir run` and `weir demo`.

use std::path::Path;

use weir::job::{self, JobSpec, RunSummary};
use weir::tables::{human_bytes, ledger_report, TextTable};
use weir::{Error, Result};

use super::args::{DemoArgs, RunArgs};
use super::Outcome;

/// The demo's job, built in so the demo runs from any directory.
pub const DEMO_JOB: &str = include_str!("../../data/jobs/demo.toml");

/// The demo's join, built in likewise.
pub const DEMO_JOIN_JOB: &str = include_str!("../../data/jobs/demo-join.toml");
/// The demo's SGD job, built in.
pub const DEMO_SGD_JOB: &str = include_str!("../../data/jobs/demo-sgd.toml");

/// On-chip bytes per engine of the demo's second join: too few for the whole registry.
const DEMO_BLOCKED_ONCHIP: u64 = 512;

fn parse_seeds(s: &str) -> Result<std::ops::Range<u64>> {
    let bad = || Error::input(format!("--seeds `{s}`: expected A..B, for example 1..9"));
    let (a, b) = s.split_once("..").ok_or_else(bad)?;
    Ok(a.trim().parse().map_err(|_| bad())?..b.trim().parse().map_err(|_| bad())?)
}

fn execute(
    spec: &JobSpec,
    job_dir: &Path,
    out: &Path,
    force: bool,
    seeds: Option<std::ops::Range<u64>>,
    protect: &[&Path],
) -> Result<()> {
    let pb = super::progress(0, "engines");
    let done = job::run(
        spec,
        job_dir,
        out,
        force,
        seeds,
        protect,
        &mut |done, total| {
            pb.set_length(total as u64);
            pb.set_position(done as u64);
        },
    )?;
    pb.finish_and_clear();
    for w in &done.warnings {
        eprintln!("weir: warning: {w}");
    }
    for d in &done.stale_removed {
        say!(
            "removed {}, left by an interrupted earlier run",
            d.display()
        );
    }
    for (seed, s) in &done.runs {
        let dir = match seed {
            Some(n) => out.join(format!("seed-{n}")),
            None => out.to_path_buf(),
        };
        print_summary(&dir, s);
    }
    Ok(())
}

/// Prints the short summary of one run.
fn print_summary(dir: &Path, s: &RunSummary) {
    say!("wrote {} files to {}", s.files, dir.display());
    for (column, r) in &s.requested {
        say!(
            "input: column {column}: requested selectivity {:.4}%",
            r * 100.0
        );
    }
    for line in &s.kernel_lines {
        say!("{line}");
    }
    let mut t = TextTable::new(&["engine", "channel", "rows", "results"]);
    for p in &s.parts {
        t.row(vec![
            p.partition.to_string(),
            p.channel.to_string(),
            p.rows.to_string(),
            p.records.to_string(),
        ]);
    }
    say!("\n{}", t.render());
    say!("{}", ledger_report(&s.ledger));
    let gbps = if s.kernel_s > 0.0 {
        s.input_bytes as f64 / s.kernel_s / 1e9
    } else {
        0.0
    };
    say!(
        "host: kernel {:.3} s over {} of device reads ({gbps:.2} GB/s, {}, {} threads); generate {:.3} s; write {:.3} s",
        s.kernel_s,
        human_bytes(s.input_bytes),
        s.isa,
        rayon::current_num_threads(),
        s.gen_s,
        s.write_s
    );
}

/// `weir run`.
pub fn run(a: RunArgs) -> Result<Outcome> {
    super::set_threads(a.threads)?;
    let spec = JobSpec::load(&a.job)?;
    let seeds = a.seeds.as_deref().map(parse_seeds).transpose()?;
    let job_dir = a.job.parent().unwrap_or(Path::new("."));
    execute(&spec, job_dir, &a.out, a.force, seeds, &[a.job.as_path()])?;
    Ok(Outcome::Ok)
}

/// `weir demo`.
pub fn demo(a: DemoArgs) -> Result<Outcome> {
    let spec = JobSpec::from_toml(DEMO_JOB, Path::new("data/jobs/demo.toml"))?;
    say!("weir demo: {}", spec.name);
    execute(&spec, Path::new("."), &a.out, a.force, None, &[])?;
    let mut join = JobSpec::from_toml(DEMO_JOIN_JOB, Path::new("data/jobs/demo-join.toml"))?;
    say!("\nweir demo: {}, the registry on chip", join.name);
    execute(&join, Path::new("."), &a.out.join("join"), false, None, &[])?;
    if let weir::kernels::KernelConfig::Join(k) = &mut join.kernel {
        k.onchip_bytes = DEMO_BLOCKED_ONCHIP;
    }
    say!(
        "\nweir demo: {}, {DEMO_BLOCKED_ONCHIP} bytes on chip, so the registry is built in blocks",
        join.name
    );
    execute(
        &join,
        Path::new("."),
        &a.out.join("join-blocked"),
        false,
        None,
        &[],
    )?;
    let sgd = JobSpec::from_toml(DEMO_SGD_JOB, Path::new("data/jobs/demo-sgd.toml"))?;
    say!("\nweir demo: {}, four averaging engines", sgd.name);
    execute(&sgd, Path::new("."), &a.out.join("sgd"), false, None, &[])?;
    let plan = super::args::PlanArgs {
        run_dir: a.out.clone(),
        sweep: Vec::new(),
        out: None,
        force: false,
        device: "hbm2x2".into(),
        placement: None,
        bench: None,
        measured: None,
    };
    say!("");
    super::plan::plan(plan)?;
    let report = super::report::write_report(&a.out)?;
    say!("\nreport: {}", report.display());
    Ok(Outcome::Ok)
}
