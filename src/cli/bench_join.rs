//! `weir bench join`: the fast join's probe rate per thread count beside interleaved read
//! passes over the same bytes, and the mirror join's probe rate.

use weir::bench::join::{self as jb, JoinBenchParams};
use weir::table::write_npy_column;
use weir::tables::TextTable;
use weir::{Error, Result};

use super::args::BenchJoinArgs;
use super::gen::write_file_atomic;
use super::Outcome;

/// `weir bench join`.
pub fn bench_join(a: BenchJoinArgs) -> Result<Outcome> {
    let (s, l) = match a.shape.as_str() {
        "a" => (1u64 << 20, 1u64 << 24),
        "b" => (1 << 24, 1 << 26),
        o => return Err(Error::input(format!("--shape `{o}`: expected a or b"))),
    };
    let build_rows = a.build_rows.unwrap_or(s);
    let probe_rows = a.probe_rows.unwrap_or(l);
    let threads = a.threads.clone().unwrap_or_else(|| {
        let n = weir::bench::host::threads();
        if n > 1 {
            vec![1, n]
        } else {
            vec![1]
        }
    });
    if threads.contains(&0) || a.runs == 0 || build_rows == 0 || probe_rows == 0 {
        return Err(Error::input(
            "--threads, --runs and the row counts must be at least 1",
        ));
    }
    super::bench::bench_outputs(a.out.as_deref(), a.force)?;
    let tables = jb::bench_tables(build_rows, probe_rows);
    if let Some(prefix) = &a.save_npy {
        let stem = prefix
            .file_name()
            .unwrap_or_default()
            .to_string_lossy()
            .to_string();
        for (side, t) in [("build", &tables.0), ("probe", &tables.1)] {
            for c in &t.columns {
                let path = prefix.with_file_name(format!("{stem}-{side}-{}.npy", c.name));
                let mut v = Vec::new();
                write_npy_column(&mut v, c).map_err(|e| Error::io(&path, e))?;
                write_file_atomic(&path, &v, a.force)?;
            }
        }
    }
    let params = JoinBenchParams {
        build_rows,
        probe_rows,
        threads,
        runs: a.runs,
    };
    let pb = super::progress(params.threads.len() as u64, "join bench");
    let points = jb::bench_join(&params, &tables, &mut |d, _| pb.set_position(d as u64));
    pb.finish_and_clear();
    say!(
        "hash join, |S| = {build_rows} unique u64 keys, |L| = {probe_rows}, u64 key + payload, (probe payload, build payload) pairs materialised; {} runs after a warm-up, each between read passes over L",
        a.runs
    );
    let mut t = TextTable::new(&[
        "threads",
        "pairs",
        "median ms",
        "min ms",
        "max ms",
        "M probes/s",
        "GB/s of L",
        "read GB/s",
        "of read (min..max)",
        "mirror M probes/s",
    ]);
    for p in &points {
        t.row(vec![
            p.threads.to_string(),
            p.pairs.to_string(),
            format!("{:.1}", p.fast.median_s * 1e3),
            format!("{:.1}", p.fast.min_s * 1e3),
            format!("{:.1}", p.fast.max_s * 1e3),
            format!("{:.1}", p.mprobes),
            format!("{:.2}", p.gbps),
            format!("{:.2}", p.read_gbps),
            format!(
                "{:.0}% ({:.0}..{:.0}%)",
                p.ratio * 100.0,
                p.ratio_min * 100.0,
                p.ratio_max * 100.0
            ),
            format!("{:.1}", p.mirror_mprobes),
        ]);
    }
    say!("{}", t.render().trim_end());
    if let Some(prefix) = &a.out {
        let json = serde_json::json!({ "bench": "join", "build_rows": build_rows, "probe_rows": probe_rows, "points": points });
        let svg = jb::chart(&points, build_rows, probe_rows).to_svg();
        super::bench::save_bench(prefix, a.force, &jb::to_csv(&points), &json, &svg)?;
    }
    Ok(Outcome::Ok)
}
