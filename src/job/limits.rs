//! The largest value every job key may take, checked before anything is generated or
//! written. Each covers real accelerator cards with room to spare; beyond them a typo is
//! far likelier than a design, and an unchecked value could ask for terabytes or hours.

use crate::error::{Error, Result};
use crate::job::spec::JobSpec;

/// Engines (= partitions).
pub const MAX_ENGINES: u32 = 1024;
/// Device channels.
pub const MAX_CHANNELS: u32 = 1024;
/// Size of one channel, in MiB (1 TiB).
pub const MAX_CHANNEL_MIB: u64 = 1 << 20;
/// Rows of one input table (2^40).
pub const MAX_ROWS: u64 = 1 << 40;
/// Columns of one input table.
pub const MAX_COLUMNS: usize = 256;
/// Input tables of one job.
pub const MAX_TABLES: usize = 16;
/// Characters of a kernel expression (a predicate).
pub const MAX_EXPRESSION: usize = 64 * 1024;
/// Entries of any list in a job (projected columns, formats).
pub const MAX_LIST: usize = 4096;

/// Every limit, as (key, maximum) for the README table and error messages.
pub const LIMITS: [(&str, u64); 8] = [
    ("layout.partitions", MAX_ENGINES as u64),
    ("layout.channels", MAX_CHANNELS as u64),
    ("layout.channel_mib", MAX_CHANNEL_MIB),
    ("rows of a table", MAX_ROWS),
    ("columns of a table", MAX_COLUMNS as u64),
    ("tables of a job", MAX_TABLES as u64),
    ("characters of a predicate", MAX_EXPRESSION as u64),
    ("entries of a list", MAX_LIST as u64),
];

fn within(key: &str, v: u64, lo: u64, hi: u64) -> Result<()> {
    if (lo..=hi).contains(&v) {
        Ok(())
    } else {
        Err(Error::input(format!(
            "{key} = {v}: must be within {lo}..={hi}"
        )))
    }
}

/// Checks every size-like value of `spec` against its limit.
pub fn check(spec: &JobSpec) -> Result<()> {
    let l = &spec.layout;
    within(
        "layout.partitions",
        l.partitions.into(),
        1,
        MAX_ENGINES.into(),
    )?;
    within("layout.channels", l.channels.into(), 1, MAX_CHANNELS.into())?;
    within("layout.channel_mib", l.channel_mib, 1, MAX_CHANNEL_MIB)?;
    if let Some(p) = &l.partition_rows {
        within(
            "layout.partition_rows (entries)",
            p.len() as u64,
            0,
            MAX_ENGINES.into(),
        )?;
        for (i, &n) in p.iter().enumerate() {
            within(&format!("layout.partition_rows[{i}]"), n, 0, MAX_ROWS)?;
        }
    }
    if let crate::job::spec::PlacementSpec::List(v) = &l.placement {
        within(
            "layout.placement (entries)",
            v.len() as u64,
            0,
            MAX_ENGINES.into(),
        )?;
    }
    within(
        "output.formats (entries)",
        spec.output.formats.len() as u64,
        0,
        3,
    )?;
    let tables = spec.table_specs()?;
    within("tables", tables.len() as u64, 1, MAX_TABLES as u64)?;
    for (name, t) in tables {
        if let Some(r) = t.rows {
            within(&format!("table `{name}`: rows"), r, 0, MAX_ROWS)?;
        }
        within(
            &format!("table `{name}`: columns"),
            t.columns.len() as u64,
            0,
            MAX_COLUMNS as u64,
        )?;
        if let Some(s) = &t.samples {
            within(
                &format!("table `{name}`: samples.features"),
                s.features.into(),
                1,
                MAX_COLUMNS as u64 - 1,
            )?;
            within(
                &format!("table `{name}`: samples.scale (entries)"),
                s.scale.len() as u64,
                1,
                MAX_LIST as u64,
            )?;
        }
        if let Some(n) = t.turbines {
            within(&format!("table `{name}`: turbines"), n.into(), 1, 1 << 20)?;
        }
    }
    kernel_keys(
        "kernel",
        &serde_json::to_value(&spec.kernel).unwrap_or_default(),
    )
}

/// Checks the strings and lists of the kernel table `v` (named `at`) and of its
/// sub-tables.
fn kernel_keys(at: &str, v: &serde_json::Value) -> Result<()> {
    for (k, v) in v.as_object().into_iter().flatten() {
        match v {
            serde_json::Value::String(s) => within(
                &format!("{at}.{k} (characters)"),
                s.len() as u64,
                0,
                MAX_EXPRESSION as u64,
            )?,
            serde_json::Value::Array(a) => within(
                &format!("{at}.{k} (entries)"),
                a.len() as u64,
                0,
                MAX_LIST as u64,
            )?,
            serde_json::Value::Object(_) => kernel_keys(&format!("{at}.{k}"), v)?,
            _ => {}
        }
    }
    Ok(())
}
