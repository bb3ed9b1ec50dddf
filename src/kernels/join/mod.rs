//! Blocked build/probe hash join: a hardware-shaped table for golden results, per-block
//! build statistics, on-chip images and the byte ledger, and a fast CPU table with the
//! same output for benchmarks.
//!
//! ```text
//!   S (build) ──plan_blocks──► blocks ──► per block: build table ──► probe L partition
//!                                         (mirror: golden + ledger; fast: speed)
//!                                                  │
//!                                     records ──► sink, block by block, in order
//! ```
//!
//! Output order (both tables, and the nested-loop oracle): block, then the engine's probe
//! order, then build order for duplicate keys; so mirror and fast outputs are
//! byte-identical. Inputs are [`Table`]s with named `u32`/`u64` key and payload columns.

mod block;
mod engine;
mod error;
mod fast;
pub mod hash;
mod mirror;
mod naive;
mod params;
mod plan;
mod record;

pub use block::{plan_blocks, BlockPlan, SlotFormat, SLOT_HEADER_BYTES};
pub use engine::CHUNK_ROWS;
pub use error::{bucket_bits_from_count, JoinError};
pub use fast::FastTable;
pub use hash::{BucketPick, HashFn};
pub use mirror::{BlockStats, MirrorTable};
pub use naive::nested_loop_join;
pub use params::{Buckets, JoinIo, JoinParams, OutField, Overflow, Variant};
pub use record::{check_fields, RecordLayout, RecordWriter};

use engine::{drive, BlockTable, Col, Cols};

pub use plan::{JoinConfig, JoinKernel};

use crate::ledger::{Ledger, Traffic};
use crate::table::Table;

/// What one engine's golden join produced.
#[derive(Debug, Clone)]
pub struct JoinEngineResult {
    /// Traffic by phase, region, channel and direction.
    pub ledger: Ledger,
    /// Build statistics per block.
    pub blocks: Vec<BlockStats>,
    /// On-chip table image after each block's build (when `JoinIo::images`).
    pub images: Vec<Vec<u8>>,
    /// Records written to the sink.
    pub records: u64,
    /// Matching (probe row, build row) pairs.
    pub matches: u64,
    /// Field names and types of a record.
    pub layout: RecordLayout,
}

impl BlockTable for MirrorTable {
    #[inline]
    fn probe_rows(
        &self,
        keys: Col<'_>,
        n: usize,
        onchip: &mut Traffic,
        mut hit: impl FnMut(usize, u64),
    ) {
        // Bucket reads prefetched a few rows ahead, as the fast table does: the golden
        // join should never be the slow step.
        const AHEAD: usize = 8;
        for r in 0..keys.len().min(AHEAD) {
            self.prefetch(keys.get(r));
        }
        for r in 0..n {
            if r + AHEAD < keys.len() {
                self.prefetch(keys.get(r + AHEAD));
            }
            self.probe(keys.get(r), onchip, |pay| hit(r, pay));
        }
    }
}

impl BlockTable for FastTable {
    #[inline]
    fn probe_rows(
        &self,
        keys: Col<'_>,
        n: usize,
        _onchip: &mut Traffic,
        hit: impl FnMut(usize, u64),
    ) {
        match keys {
            Col::U8(v) => self.probe_all(v, n, hit),
            Col::U16(v) => self.probe_all(v, n, hit),
            Col::U32(v) => self.probe_all(v, n, hit),
            Col::U64(v) => self.probe_all(v, n, hit),
        }
    }
}

/// One engine's golden join on the mirror table: probes its partition `probe` (whose
/// first row is row `probe_row_start` of the whole probe table) against every block of
/// `build`, streams records to `sink`, counts the ledger.
pub fn join_engine(
    build: &Table,
    probe: &Table,
    probe_row_start: u64,
    p: &JoinParams,
    io: &JoinIo,
    sink: &mut dyn FnMut(&[u8]),
) -> Result<JoinEngineResult, JoinError> {
    let cols = Cols::resolve(build, probe, p)?;
    let plan = plan_blocks(build.rows() as u64, p)?;
    let mut blocks = Vec::new();
    let mut images = Vec::new();
    let make = |b: u32, keys: &[u64], pays: &[u64], r: &mut Traffic, w: &mut Traffic| {
        let mut t = MirrorTable::new(&plan, p, io.word_bytes);
        for (&k, &v) in keys.iter().zip(pays) {
            t.insert(k, v, b, r, w)?;
        }
        blocks.push(t.stats(b, keys.len() as u64, &plan, p.capacity_bytes));
        Ok(t)
    };
    let built = |_: u32, t: &MirrorTable| {
        if io.images {
            images.push(t.image());
        }
    };
    let d = drive(
        &cols,
        probe_row_start,
        p,
        io,
        &plan,
        make,
        built,
        &mut |v| sink(v),
    )?;
    Ok(JoinEngineResult {
        ledger: d.ledger,
        blocks,
        images,
        records: d.records,
        matches: d.matches,
        layout: cols.writer(p)?.layout().clone(),
    })
}

/// The fast CPU join with the same blocks and output bytes as [`join_engine`]; returns
/// the record count. `sink` receives the records run by run, in order, in a vector it may
/// keep (leaving another, ideally with capacity, in its place): materialised output then
/// costs no copy.
pub fn fast_join(
    build: &Table,
    probe: &Table,
    probe_row_start: u64,
    p: &JoinParams,
    sink: &mut dyn FnMut(&mut Vec<u8>),
) -> Result<u64, JoinError> {
    let cols = Cols::resolve(build, probe, p)?;
    let plan = plan_blocks(build.rows() as u64, p)?;
    let make = |_: u32, keys: &[u64], pays: &[u64], _: &mut Traffic, _: &mut Traffic| {
        Ok(FastTable::build(keys, pays))
    };
    let d = drive(
        &cols,
        probe_row_start,
        p,
        &JoinIo::host(),
        &plan,
        make,
        |_, _| {},
        sink,
    )?;
    Ok(d.records)
}

/// Field names and types of the records `p` produces for these tables.
pub fn record_layout(
    build: &Table,
    probe: &Table,
    p: &JoinParams,
) -> Result<RecordLayout, JoinError> {
    Ok(Cols::resolve(build, probe, p)?.writer(p)?.layout().clone())
}
