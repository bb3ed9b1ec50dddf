//! `weir gen join`: the join's build and probe tables, written as CSV or .npy columns.

use weir::gen::join::{Dup, JoinGen, KeySkew};
use weir::table::{write_csv, write_npy_column, ElemType, Table};
use weir::{Error, Result};

use super::args::GenJoinArgs;
use super::gen::write_file_atomic;
use super::Outcome;

fn join_type(s: &str, what: &str) -> Result<ElemType> {
    match s {
        "u32" => Ok(ElemType::U32),
        "u64" => Ok(ElemType::U64),
        o => Err(Error::input(format!("--{what} `{o}`: expected u32 or u64"))),
    }
}

fn parse_num<T: std::str::FromStr>(s: &str, opt: &str) -> Result<T> {
    s.parse()
        .map_err(|_| Error::input(format!("--{opt} `{s}`: not a number")))
}

/// Parses `--dup`.
fn dup(s: &str) -> Result<Dup> {
    match s.split_once(':') {
        None if s == "unique" => Ok(Dup::Unique),
        Some(("fixed", n)) => Ok(Dup::Fixed(parse_num(n, "dup")?)),
        Some(("geometric", m)) => Ok(Dup::Geometric(parse_num(m, "dup")?)),
        _ => Err(Error::input(format!(
            "--dup `{s}`: expected unique, fixed:N or geometric:MEAN"
        ))),
    }
}

/// Parses `--skew`.
fn skew(s: &str) -> Result<KeySkew> {
    match s.split_once(':') {
        None if s == "uniform" => Ok(KeySkew::Uniform),
        Some(("zipf", t)) => Ok(KeySkew::Zipf(parse_num(t, "skew")?)),
        _ => Err(Error::input(format!(
            "--skew `{s}`: expected uniform or zipf:THETA"
        ))),
    }
}

fn files(
    prefix: &std::path::Path,
    side: &str,
    t: &Table,
    npy: bool,
) -> Result<Vec<(std::path::PathBuf, Vec<u8>)>> {
    let stem = prefix
        .file_name()
        .unwrap_or_default()
        .to_string_lossy()
        .to_string();
    if !npy {
        let path = prefix.with_file_name(format!("{stem}-{side}.csv"));
        let mut v = Vec::new();
        write_csv(&mut v, t).map_err(|e| Error::io(&path, e))?;
        return Ok(vec![(path, v)]);
    }
    t.columns
        .iter()
        .map(|c| {
            let path = prefix.with_file_name(format!("{stem}-{side}-{}.npy", c.name));
            let mut v = Vec::new();
            write_npy_column(&mut v, c).map_err(|e| Error::io(&path, e))?;
            Ok((path, v))
        })
        .collect()
}

/// `weir gen join`.
pub fn gen_join(a: GenJoinArgs) -> Result<Outcome> {
    let g = JoinGen {
        seed: a.seed,
        build_rows: a.build_rows,
        probe_rows: a.probe_rows,
        key_type: join_type(&a.key_type, "key-type")?,
        payload_type: join_type(&a.payload_type, "payload-type")?,
        dup: dup(&a.dup)?,
        match_rate: a.match_rate,
        skew: skew(&a.skew)?,
    };
    let b = g.build().map_err(Error::input)?;
    let l = g.probe(&b, 0..a.probe_rows);
    let mut out = files(&a.out, "build", &b.table, a.npy)?;
    out.extend(files(&a.out, "probe", &l.table, a.npy)?);
    if let Some((p, _)) = out.iter().find(|(p, _)| p.exists() && !a.force) {
        return Err(Error::exists(format!(
            "{} exists; add --force to replace it",
            p.display()
        )));
    }
    for (p, bytes) in &out {
        write_file_atomic(p, bytes, a.force)?;
    }
    say!(
        "wrote |S| = {} ({} distinct keys) and |L| = {} to {}: match rate requested {:.4}, achieved {:.4}; inner-join output {} pairs",
        a.build_rows,
        b.counts.len(),
        a.probe_rows,
        out.iter().map(|(p, _)| p.display().to_string()).collect::<Vec<_>>().join(", "),
        a.match_rate,
        l.matched as f64 / a.probe_rows.max(1) as f64,
        l.pairs
    );
    Ok(Outcome::Ok)
}
