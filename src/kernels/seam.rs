//! The kernel seam: what a kernel declares to the runner, and what it hands back.
//!
//! ```text
//!   [kernel] in the job ─► KernelConfig::bind(table schemas) ─► Box<dyn Kernel>
//!
//!   Kernel::inputs()    tables the engines read: partitioned (engine p gets partition p)
//!                       or replicated (every engine reads the whole table)
//!   Kernel::regions(e)  device regions engine e needs beside its inputs: output regions
//!                       with their worst-case capacity, fixed-size words (a count)
//!   Kernel::run(e)      one engine on its share of the inputs ─► EngineRun
//!                         ├─ golden outputs as typed records (bytes + record layout)
//!                         └─ the ledger it counted while touching memory
//!   Kernel::record_form(t)  the kernel's own record bytes for t's row-major image
//!                       (packed codes), in place of the columns' byte forms
//!   Kernel::map_section() / summary()   extra memory-map parameters, terminal lines
//! ```
//!
//! The runner, the image writers, the memory map, the manifest and the checker work only
//! from these declarations: none of them names a kernel. Adding a kernel means a module
//! under `kernels/`, one variant of [`KernelConfig`](super::KernelConfig), its generator
//! and its bench.

use std::ops::Range;

use crate::ledger::Ledger;
use crate::table::{ElemType, QFormat, Table};

/// How the engines share an input table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Share {
    /// Cut into contiguous row ranges; engine p reads partition p from its channel.
    Partitioned,
    /// Read whole by every engine; one copy on every channel that hosts an engine.
    Replicated,
}

/// One input table a kernel reads.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TableUse {
    /// The job's name for the table.
    pub table: String,
    /// How engines share it.
    pub share: Share,
}

/// The schema of one table the job offers a kernel to bind against.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TableSchema {
    /// Table name.
    pub name: String,
    /// (column name, type), in table order.
    pub columns: Vec<(String, ElemType)>,
    /// Rows in the table.
    pub rows: u64,
    /// Fixed-point format of each column, in table order (`None` for plain numbers).
    pub q: Vec<Option<QFormat>>,
}

/// How big a declared region is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sizing {
    /// Exactly this many bytes (a count word, a model).
    Exact(u64),
    /// Room for the worst case; the golden output says how much was used.
    Capacity(u64),
}

impl Sizing {
    /// Bytes to reserve.
    pub fn bytes(self) -> u64 {
        match self {
            Sizing::Exact(b) | Sizing::Capacity(b) => b,
        }
    }
}

/// A device region one engine needs besides its inputs, placed on the engine's channel
/// after every input image there.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RegionNeed {
    /// Name within the engine (`out`, `count`); unique per engine.
    pub name: String,
    /// Size.
    pub sizing: Sizing,
}

/// Where one input table of one engine lives, with its rows.
#[derive(Debug, Clone)]
pub struct EngineTable<'a> {
    /// The rows this engine reads (its partition, or the whole replicated table).
    pub rows: &'a Table,
    /// Global row index of `rows`' first row.
    pub row_start: u64,
    /// Channel of the image the engine reads.
    pub channel: u32,
    /// Base byte address of each column's image, by column index (column-major inputs).
    pub column_bases: Vec<u64>,
    /// Base byte address of the record image (row-major inputs).
    pub row_base: Option<u64>,
}

/// Everything one engine's run needs: its inputs in [`Kernel::inputs`] order and the
/// bases of its declared regions in [`Kernel::regions`] order.
#[derive(Debug, Clone)]
pub struct EngineCtx<'a> {
    /// Engine index.
    pub engine: u32,
    /// Engines in the job (coupled engines, such as SGD's model averaging, need all).
    pub engines: u32,
    /// The engine's channel (where its regions live).
    pub channel: u32,
    /// Bytes per memory word.
    pub word_bytes: u64,
    /// Input tables.
    pub tables: Vec<EngineTable<'a>>,
    /// Base byte address of each declared region.
    pub region_bases: Vec<u64>,
}

/// One named field of a golden record.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Field {
    /// Field name (a projected column, a join pair member).
    pub name: String,
    /// Element type.
    pub ty: ElemType,
}

/// How a golden output is also written as typed `.npy` arrays for Python testbenches.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Arrays {
    /// No typed array.
    None,
    /// One 1-D array of the whole output with this dtype (`<u4`, `|u1`, …).
    Whole {
        /// NumPy dtype string.
        descr: &'static str,
        /// Elements.
        len: u64,
    },
    /// One 1-D array per record field, cut from the records.
    PerField,
}

/// One golden output of one engine: the exact bytes its region must hold.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Golden {
    /// Output name (`out`, `count`); files are `golden/{kernel}.p{engine}.{name}.*`.
    pub name: String,
    /// Index of the declared device region it lives in (its base address); `None` for
    /// on-chip contents (a hash table, a model) that have no device address.
    pub region: Option<usize>,
    /// The bytes, in device order.
    pub bytes: Vec<u8>,
    /// Records (matches, rows of a bitmap, pairs).
    pub records: u64,
    /// Bytes per record; 0 for a bitmap (one bit per record).
    pub record_bytes: u64,
    /// Element label for the manifest (`u32`, `record`, `bits`).
    pub elem: String,
    /// The fields of a record, in byte order.
    pub fields: Vec<Field>,
    /// Typed arrays to write beside the image.
    pub arrays: Arrays,
}

/// What one engine's run produced.
#[derive(Debug, Clone)]
pub struct EngineRun {
    /// Golden outputs, in writing order.
    pub outputs: Vec<Golden>,
    /// Everything it read and wrote.
    pub ledger: Ledger,
    /// Rows it consumed from its partitioned inputs.
    pub rows_in: u64,
    /// Result rows (matching rows, joined pairs), for the terminal summary.
    pub rows_out: u64,
    /// Lines for the terminal about what the engine found (hash-table statistics); a
    /// kernel whose findings are the same on every engine reports them on engine 0.
    pub notes: Vec<String>,
}

/// A Verilog parameter a kernel publishes in the memory map (for example a predicate
/// bound that hardware evaluates directly).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct MapParam {
    /// Parameter name.
    pub name: String,
    /// Width in bits.
    pub bits: u32,
    /// Signed.
    pub signed: bool,
    /// Value.
    pub value: i128,
}

/// A kernel's own part of the memory map.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct MapSection {
    /// Comment line before the parameters.
    pub comment: String,
    /// Verilog parameters.
    pub params: Vec<MapParam>,
    /// Keys added to `memory_map.json`.
    pub json: Vec<(String, serde_json::Value)>,
}

/// A kernel's own form of the records of a row-major image, in place of the columns'
/// byte forms back to back (SGD's k-bit feature codes).
pub trait RecordForm {
    /// Bytes of one record in memory words of `word_bytes` bytes.
    fn record_bytes(&self, word_bytes: u64) -> u64;

    /// The image of `rows`: one record per row, in row order.
    fn encode(&self, rows: &Table, word_bytes: u64) -> Result<Vec<u8>, KernelError>;
}

/// An error a kernel reports while running: the runner adds which engine.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{0}")]
pub struct KernelError(pub String);

/// A bound kernel: declarations for the runner, and the run of one engine.
pub trait Kernel: Send + Sync + std::fmt::Debug {
    /// Name used in region, file and ledger names (`scan`).
    fn name(&self) -> &'static str;

    /// The tables the engines read, in the order [`EngineCtx::tables`] holds them.
    fn inputs(&self) -> Vec<TableUse>;

    /// Generator hints: inclusive integer ranges `(column, lo, hi)` a generated `select`
    /// column of `table` should aim at when the job leaves its bounds out.
    fn select_ranges(&self, _table: &str) -> Vec<(String, i128, i128)> {
        Vec::new()
    }

    /// The regions engine `engine` needs, given the rows of each of its inputs and the
    /// replicated tables whole (`None` for partitioned ones), in input order.
    fn regions(
        &self,
        engine: u32,
        rows: &[Range<u64>],
        whole: &[Option<&Table>],
    ) -> Vec<RegionNeed>;

    /// Runs one engine.
    fn run(&self, ctx: &EngineCtx<'_>) -> Result<EngineRun, KernelError>;

    /// The record form of table `table`'s row-major image, when the kernel lays its
    /// records out itself.
    fn record_form(&self, _table: &str) -> Option<&dyn RecordForm> {
        None
    }

    /// Extra memory-map parameters.
    fn map_section(&self) -> Option<MapSection> {
        None
    }

    /// Lines for the terminal summary of a run, from every engine's counts.
    fn summary(&self, runs: &[(u64, u64)]) -> Vec<String>;

    /// The instruction set or variant the host run used, for `timing.json`.
    fn host_variant(&self) -> &'static str {
        "portable"
    }

    /// Doubts about the job that do not stop it (a predicate that can never match), one
    /// line each, naming the key.
    fn warnings(&self) -> Vec<String> {
        Vec::new()
    }
}
