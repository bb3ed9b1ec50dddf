//! The nested-loop oracle: every probe row against every build row of each block, in the
//! deterministic order (block, probe row, build row). Quadratic; for tests only.

use super::block::BlockPlan;
use super::engine::Cols;
use super::error::JoinError;
use super::params::{JoinParams, Variant};
use crate::table::Table;

/// The join's records, byte for byte in the deterministic order, and the record count.
pub fn nested_loop_join(
    build: &Table,
    probe: &Table,
    probe_row_start: u64,
    p: &JoinParams,
    plan: &BlockPlan,
) -> Result<(Vec<u8>, u64), JoinError> {
    let c = Cols::resolve(build, probe, p)?;
    let w = c.writer(p)?;
    let mut out = Vec::new();
    let mut records = 0u64;
    let mut pairs = 0u64;
    let mut seen = vec![false; probe.rows()];
    for block in &plan.blocks {
        #[allow(clippy::needless_range_loop)] // `l` indexes the key column and `seen`
        for l in 0..probe.rows() {
            for s in block.start as usize..block.end as usize {
                if c.bkey.get(s) != c.pkey.get(l) {
                    continue;
                }
                pairs += 1;
                let row = probe_row_start + l as u64;
                match p.variant {
                    Variant::Inner(_) => {
                        w.write(&mut out, row, c.pkey.get(l), c.ppay.get(l), c.bpay.get(s));
                        records += 1;
                    }
                    Variant::Semi if !seen[l] => {
                        seen[l] = true;
                        out.extend_from_slice(&row.to_le_bytes());
                        records += 1;
                    }
                    _ => {}
                }
            }
        }
    }
    if matches!(p.variant, Variant::Count) {
        out.extend_from_slice(&pairs.to_le_bytes());
        records = 1;
    }
    Ok((out, records))
}
