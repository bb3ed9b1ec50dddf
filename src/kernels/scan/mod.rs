//! Predicate scan: for each partition, the rows matching a predicate, as row ids, a packed
//! bitmap, or the projected columns of the matching rows, plus the match count.
//!
//! ```text
//!   column chunks ──► leaf masks (64 rows/word, vector compares) ──► and/or/not
//!        │                                                            │
//!        └─ device reads counted per chunk            compaction ◄────┘
//!                                                       │
//!                                 output region + count word (device writes)
//! ```
//!
//! Work is split into chunks of [`CHUNK_ROWS`] rows handled by rayon; chunk results are
//! joined in chunk order, so the output is byte-identical for any thread count. Chunks
//! start on word boundaries of every column image, so per-chunk word counts add up to
//! the whole partition's.

#[cfg(target_arch = "x86_64")]
mod avx2;
#[cfg(target_arch = "x86_64")]
mod avx512;
mod compact;
mod mask;
mod plan;
#[cfg(target_arch = "x86_64")]
mod stream;

pub use crate::kernels::isa::Isa;
pub use mask::for_each_match;
pub use plan::{ScanConfig, ScanKernel};

use rayon::prelude::*;

use crate::kernels::predicate::{Bound, Scalar, Test};
use crate::ledger::{Cursor, Direction, Key, Ledger, Phase, Traffic};
use crate::table::{byte_len, column_bytes, ElemType, Table};

/// The most rows in one chunk of work (before rounding to whole words, see
/// `chunk_rows`): long enough (4 MiB of `u32`) that each interleaved run of a mask visit
/// streams for a while. Smaller partitions use smaller chunks so every thread has work.
pub const CHUNK_ROWS: usize = 1 << 20;

/// The fewest rows in one chunk, so that per-chunk work stays small beside the scan.
pub const MIN_CHUNK_ROWS: usize = 1 << 16;

/// The scan's phase name in the ledger.
pub const PHASE: Phase = Phase::single("scan");

/// What the scan writes for the matching rows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ScanOutput {
    /// Row ids, `u32` (or `u64` when `wide_ids`), ascending.
    RowIds,
    /// One bit per partition row, LSB-first, `ceil(rows/8)` bytes.
    Bitmap,
    /// The listed columns (table indices) of each matching row, as packed
    /// little-endian records in column-list order.
    Project(Vec<usize>),
}

/// Scan parameters shared by every partition.
#[derive(Debug, Clone)]
pub struct ScanParams {
    /// The bound predicate.
    pub predicate: Bound,
    /// Output kind.
    pub output: ScanOutput,
    /// Row ids count from the table's first row (`true`) or the partition's.
    pub global_ids: bool,
    /// Row ids are `u64` rather than `u32`.
    pub wide_ids: bool,
}

impl ScanParams {
    /// Bytes of one output record (a row id, a projected record; 0 for bitmaps), for a
    /// table whose columns have the element types `types`.
    pub fn record_bytes(&self, types: &[ElemType]) -> u64 {
        match &self.output {
            ScanOutput::RowIds => {
                if self.wide_ids {
                    8
                } else {
                    4
                }
            }
            ScanOutput::Bitmap => 0,
            ScanOutput::Project(cols) => cols.iter().map(|&c| u64::from(types[c].bits() / 8)).sum(),
        }
    }

    /// Worst-case output bytes for a partition of `rows` rows (every row matches).
    pub fn capacity_bytes(&self, types: &[ElemType], rows: u64) -> u64 {
        match self.output {
            ScanOutput::Bitmap => rows.div_ceil(8),
            _ => rows * self.record_bytes(types),
        }
    }
}

/// Where one engine's data lives, for the ledger.
#[derive(Debug, Clone)]
pub struct EngineIo {
    /// Engine index (= partition index).
    pub engine: u32,
    /// The partition's channel.
    pub channel: u32,
    /// Bytes per memory word.
    pub word_bytes: u64,
    /// Base byte address of each table column's partition image (by column index), for
    /// column-major inputs.
    pub column_bases: Vec<u64>,
    /// Base byte address of the partition's record image, for row-major inputs (the
    /// engine then streams whole records).
    pub row_base: Option<u64>,
    /// Base byte address of the output region.
    pub out_base: u64,
    /// Byte address of the count word.
    pub count_base: u64,
}

impl EngineIo {
    /// An engine whose regions all start at address 0 of channel 0, for host benchmarks
    /// where no device layout exists (word counts then assume 512-bit words).
    pub fn host(columns: usize) -> EngineIo {
        EngineIo {
            engine: 0,
            channel: 0,
            word_bytes: 64,
            column_bases: vec![0; columns],
            row_base: None,
            out_base: 0,
            count_base: 0,
        }
    }
}

/// Bytes of the count word's payload (a little-endian `u64`).
pub const COUNT_BYTES: u64 = 8;

/// One partition's results.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ScanResult {
    /// Output region bytes.
    pub out: Vec<u8>,
    /// Matching rows.
    pub count: u64,
    /// What the engine read and wrote.
    pub ledger: Ledger,
}

/// The most bytes of ids a piece keeps in its own buffer (see [`Piece`]): its whole share
/// of a chunk at a few percent selectivity, and little enough to stay in cache until it
/// is copied into the output.
const PIECE_BYTES: usize = 32 << 10;

/// A piece defers once more than one row in this many has matched (and
/// [`DENSE_SLACK_IDS`] more, so a dense start of a sparse run does not): denser pieces
/// cost less to compact later from their masks (1 bit a row) than to write now and copy
/// (32 bits a match, twice).
const DENSE_ROWS_PER_ID: usize = 32;

/// See [`DENSE_ROWS_PER_ID`].
const DENSE_SLACK_IDS: usize = 256;

/// The output of one bucket of a chunk's mask visit: `u32` row ids of sparse rows are
/// written as the masks arrive, while the next data is in flight; once the bucket is
/// dense (see [`DENSE_ROWS_PER_ID`], [`PIECE_BYTES`]), the rest of its words are kept as
/// masks (in [`ScanBuffers`]) and their ids written later straight into the output
/// region, so each is written once. Other outputs never defer.
#[derive(Debug, Default)]
struct Piece {
    /// The bytes written during the visit.
    bytes: Vec<u8>,
    /// Mask words visited.
    words: usize,
    /// The chunk's word indices whose ids follow `bytes`, once the piece defers.
    deferred: Option<std::ops::Range<usize>>,
    /// Set bits of the deferred words.
    deferred_ids: usize,
}

impl Piece {
    fn clear(&mut self) {
        self.bytes.clear();
        self.words = 0;
        self.deferred = None;
        self.deferred_ids = 0;
    }

    /// Output bytes of the piece.
    fn len(&self) -> usize {
        self.bytes.len() + 4 * self.deferred_ids
    }

    /// Takes `u32` row id word `i` of the chunk (mask `m`, first id `base`): writes its
    /// ids while the piece is sparse, else keeps the word in the chunk's `masks`.
    #[inline(always)]
    fn put_ids_u32(&mut self, masks: &mut [u64], i: usize, base: u32, m: u64) {
        self.words += 1;
        let ids = self.bytes.len() / 4;
        let sparse = ids <= 64 * self.words / DENSE_ROWS_PER_ID + DENSE_SLACK_IDS;
        if self.deferred.is_none() && sparse && self.bytes.len() < PIECE_BYTES {
            return compact::push_ids_u32(&mut self.bytes, base, m);
        }
        let d = self.deferred.get_or_insert(i..i);
        d.end = i + 1;
        masks[i] = m;
        self.deferred_ids += m.count_ones() as usize;
    }
}

/// Reusable buffers of a scan. A caller that scans repeatedly (a benchmark, a service)
/// keeps one, so the outputs' memory is not fresh (and page-faulted) on every scan.
#[derive(Debug, Default)]
pub struct ScanBuffers {
    /// One output per (chunk, bucket of the mask visit), in row order.
    pieces: Vec<[Piece; mask::BUCKETS]>,
    /// The deferred mask words, at their word index in the partition.
    masks: Vec<u64>,
    /// The last scan's output region bytes.
    pub out: Vec<u8>,
}

/// Scans one partition (`table` holds just its rows; `row_start` is its first global row).
pub fn scan_partition(
    isa: Isa,
    table: &Table,
    row_start: u64,
    params: &ScanParams,
    io: &EngineIo,
) -> ScanResult {
    let mut bufs = ScanBuffers::default();
    let (count, ledger) = scan_partition_into(isa, table, row_start, params, io, &mut bufs);
    ScanResult {
        out: bufs.out,
        count,
        ledger,
    }
}

/// How an output takes one mask word into its piece: `put(piece, word index in chunk,
/// mask word)`. A closure is one; [`U32Ids`], the hot output, is a type whose method the
/// vector walk inlines (see `mask::Words`).
trait PutWord {
    /// Takes word `i` (mask `m`) into piece `p`.
    fn put(&mut self, p: &mut Piece, i: usize, m: u64);
}

impl<F: FnMut(&mut Piece, usize, u64)> PutWord for F {
    #[inline(always)]
    fn put(&mut self, p: &mut Piece, i: usize, m: u64) {
        self(p, i, m)
    }
}

/// `u32` row ids (see [`Piece::put_ids_u32`]): deferred words go to `masks`; `base` is
/// the id of the chunk's first row.
struct U32Ids<'a> {
    masks: &'a mut [u64],
    base: u64,
}

impl PutWord for U32Ids<'_> {
    #[inline(always)]
    fn put(&mut self, p: &mut Piece, i: usize, m: u64) {
        p.put_ids_u32(self.masks, i, (self.base + 64 * i as u64) as u32, m)
    }
}

/// Counts each word's matches and hands the word to its bucket's piece.
struct Tally<'a, P> {
    count: u64,
    pieces: &'a mut [Piece; mask::BUCKETS],
    put: P,
}

impl<P: PutWord> mask::Words for Tally<'_, P> {
    #[inline(always)]
    fn word(&mut self, bucket: usize, i: usize, m: u64) {
        self.count += u64::from(m.count_ones());
        self.put.put(&mut self.pieces[bucket], i, m);
    }
}

/// Visits the mask words of rows `r` and hands every word to `put`; returns the match
/// count.
#[inline(always)]
fn visit_words(
    isa: Isa,
    table: &Table,
    params: &ScanParams,
    r: std::ops::Range<usize>,
    (masks, scratch): &mut (Vec<u64>, mask::Scratch),
    pieces: &mut [Piece; mask::BUCKETS],
    put: impl PutWord,
) -> u64 {
    let mut tally = Tally {
        count: 0,
        pieces,
        put,
    };
    mask::visit(isa, &params.predicate, table, r, masks, scratch, &mut tally);
    tally.count
}

/// Like [`visit_words`], calling `put(piece bytes, row in chunk)` for every matching row.
#[inline(always)]
fn visit_matches(
    isa: Isa,
    table: &Table,
    params: &ScanParams,
    r: std::ops::Range<usize>,
    worker: &mut (Vec<u64>, mask::Scratch),
    pieces: &mut [Piece; mask::BUCKETS],
    mut put: impl FnMut(&mut Vec<u8>, usize),
) -> u64 {
    let put_word = |p: &mut Piece, i: usize, m: u64| {
        for_each_match(&[m], |j| put(&mut p.bytes, 64 * i + j as usize))
    };
    visit_words(isa, table, params, r, worker, pieces, put_word)
}

/// Scans rows `r` (one chunk, whose deferred words go to `masks`) into its pieces;
/// returns the match count. Matches are written as the mask words arrive, while the next
/// data is in flight, until a piece of `u32` ids turns dense (see [`Piece`]).
#[allow(clippy::too_many_arguments)]
fn scan_chunk(
    isa: Isa,
    table: &Table,
    params: &ScanParams,
    r: std::ops::Range<usize>,
    id_base: u64,
    worker: &mut (Vec<u64>, mask::Scratch),
    pieces: &mut [Piece; mask::BUCKETS],
    masks: &mut [u64],
) -> u64 {
    pieces.iter_mut().for_each(Piece::clear);
    let base = id_base + r.start as u64;
    match &params.output {
        ScanOutput::Bitmap => {
            let bytes = r.len().div_ceil(8);
            let put = |_: &mut Piece, i: usize, m: u64| masks[i] = m;
            let count = visit_words(isa, table, params, r, worker, pieces, put);
            let words = masks.iter().flat_map(|m| m.to_le_bytes());
            pieces[0].bytes.extend(words.take(bytes));
            count
        }
        ScanOutput::RowIds if params.wide_ids => {
            let put = |out: &mut Vec<u8>, row: usize| {
                out.extend_from_slice(&(base + row as u64).to_le_bytes())
            };
            visit_matches(isa, table, params, r, worker, pieces, put)
        }
        ScanOutput::RowIds => {
            // The job chooses u32 ids only when every row id fits (and a chunk is whole
            // mask words, so the last word's ids fit too).
            let put = U32Ids { masks, base };
            visit_words(isa, table, params, r, worker, pieces, put)
        }
        ScanOutput::Project(cols) => {
            let start = r.start;
            let put = |out: &mut Vec<u8>, row: usize| {
                for &c in cols {
                    column_bytes(&table.columns[c], start + row..start + row + 1, out);
                }
            };
            visit_matches(isa, table, params, r, worker, pieces, put)
        }
    }
}

/// Writes a chunk's output into `out` (exactly its length): each piece's bytes, then the
/// ids of its deferred words (`masks` is the chunk's, `base` the id of its first row).
fn place_chunk(isa: Isa, pieces: &[Piece], masks: &[u64], base: u64, mut out: &mut [u8]) {
    for p in pieces {
        let (head, tail) = std::mem::take(&mut out).split_at_mut(p.len());
        let (bytes, ids) = head.split_at_mut(p.bytes.len());
        bytes.copy_from_slice(&p.bytes);
        if let Some(d) = &p.deferred {
            let first = (base + 64 * d.start as u64) as u32;
            compact::write_ids_u32(isa, &masks[d.clone()], first, ids);
        }
        out = tail;
    }
}

/// Scans the chunks of one group (the first starting at row `r.start`, none past
/// `r.end`) in parallel; returns each chunk's match count and reads.
#[allow(clippy::too_many_arguments)]
fn scan_group(
    isa: Isa,
    table: &Table,
    params: &ScanParams,
    io: &EngineIo,
    cols: &[usize],
    chunk: usize,
    r: std::ops::Range<usize>,
    id_base: u64,
    pieces: &mut [[Piece; mask::BUCKETS]],
    masks: &mut [u64],
) -> Vec<(u64, Traffic)> {
    pieces
        .par_iter_mut()
        .zip(masks.par_chunks_mut(chunk / 64))
        .enumerate()
        .map_init(Default::default, |worker, (c, (pieces, masks))| {
            let rc = r.start + c * chunk..(r.start + (c + 1) * chunk).min(r.end);
            let count = scan_chunk(
                isa,
                table,
                params,
                rc.clone(),
                id_base,
                worker,
                pieces,
                masks,
            );
            (count, chunk_reads(table, cols, io, rc))
        })
        .collect()
}

/// Places the chunks of one group (the first is chunk `first`) into `out`, exactly
/// their output, in parallel.
fn place_group(
    isa: Isa,
    chunk: usize,
    id_base: u64,
    first: usize,
    pieces: &[[Piece; mask::BUCKETS]],
    masks: &[u64],
    out: &mut [u8],
) {
    let mut places = Vec::with_capacity(pieces.len());
    let mut rest = out;
    for ps in pieces {
        let len = ps.iter().map(Piece::len).sum();
        let (head, tail) = std::mem::take(&mut rest).split_at_mut(len);
        places.push(head);
        rest = tail;
    }
    places
        .into_par_iter()
        .zip(pieces.par_iter())
        .zip(masks.par_chunks(chunk / 64))
        .enumerate()
        .for_each(|(c, ((out, pieces), masks))| {
            let base = id_base + ((first + c) * chunk) as u64;
            place_chunk(isa, pieces, masks, base, out)
        });
}

/// A scanned group of chunks waiting to be placed: its first chunk, pieces and masks.
type Scanned<'a> = (usize, &'a mut [[Piece; mask::BUCKETS]], &'a mut [u64]);

/// Groups of chunks the scan of a partition is pipelined in (see
/// [`scan_partition_into`]): with more, less of the last group's placing is left
/// without a scan beside it.
pub const GROUPS: usize = 8;

/// Scans one partition into `bufs.out`; returns the match count and the ledger.
///
/// Chunks of rows are scanned in parallel, each into its own pieces (kept in `bufs`
/// between scans); then each chunk, in parallel, copies its pieces and writes its
/// deferred ids into its place in `bufs.out`, known from the lengths of the pieces before
/// it. When ids are deferred, the chunks go in [`GROUPS`] groups, and a group is placed
/// while the next one is scanned, so the compaction of deferred ids runs while the next
/// rows stream in. Both steps keep chunk order.
pub fn scan_partition_into(
    isa: Isa,
    table: &Table,
    row_start: u64,
    params: &ScanParams,
    io: &EngineIo,
    bufs: &mut ScanBuffers,
) -> (u64, Ledger) {
    let rows = table.rows();
    let cols = touched_columns(params);
    let id_base = if params.global_ids { row_start } else { 0 };
    let chunk = chunk_rows(table, &cols, io);
    let n = rows.div_ceil(chunk);
    if bufs.pieces.len() < n {
        bufs.pieces.resize_with(n, Default::default);
    }
    let words = rows.div_ceil(64);
    if bufs.masks.len() < words {
        // Zeroed fresh memory, so pages no chunk defers to are never touched.
        bufs.masks = vec![0; words];
    }
    let group = n.div_ceil(GROUPS).max(1);
    let mut rest_pieces = &mut bufs.pieces[..n];
    let mut rest_masks = &mut bufs.masks[..words];
    let out = &mut bufs.out;
    let mut passes: Vec<(u64, Traffic)> = Vec::with_capacity(n);
    let mut placed = 0;
    let mut scanned: Option<Scanned> = None;
    loop {
        let first = passes.len();
        // Groups only pay when there are deferred ids to place beside the scan; each
        // group ends in a wait for its slowest chunk, so a sparse start takes the rest
        // in one group.
        let dense = scanned
            .as_ref()
            .is_none_or(|(_, ps, _)| ps.iter().flatten().any(|p| p.deferred.is_some()));
        let take = if dense { group } else { n - first };
        let (pieces, tail) = std::mem::take(&mut rest_pieces).split_at_mut(take.min(n - first));
        rest_pieces = tail;
        let mask_words = (pieces.len() * chunk / 64).min(rest_masks.len());
        let (masks, tail) = std::mem::take(&mut rest_masks).split_at_mut(mask_words);
        rest_masks = tail;
        let place = scanned.take().map(|(at, pieces, masks)| {
            let len: usize = pieces.iter().flatten().map(Piece::len).sum();
            if out.len() < placed + len {
                out.resize(placed + len, 0);
            }
            let dst = &mut out[placed..placed + len];
            placed += len;
            (at, pieces, masks, dst)
        });
        if place.is_none() && pieces.is_empty() {
            break;
        }
        let (_, counts) = rayon::join(
            || {
                if let Some((at, pieces, masks, dst)) = place {
                    place_group(isa, chunk, id_base, at, pieces, masks, dst)
                }
            },
            || {
                let r = first * chunk..rows;
                scan_group(
                    isa, table, params, io, &cols, chunk, r, id_base, pieces, masks,
                )
            },
        );
        if !pieces.is_empty() {
            passes.extend(counts);
            scanned = Some((first, pieces, masks));
        }
    }
    out.truncate(placed);
    let count: u64 = passes.iter().map(|p| p.0).sum();
    let mut ledger = Ledger::new();
    let mut read = Traffic::default();
    for (_, t) in &passes {
        read += *t;
    }
    ledger.add(
        Key::device(io.engine, PHASE, io.channel, Direction::Read),
        read,
    );
    let mut w = Cursor::new(io.out_base, io.word_bytes);
    w.touch(placed as u64, count);
    let mut cw = Cursor::new(io.count_base, io.word_bytes);
    cw.touch(COUNT_BYTES, 0);
    let write_key = Key::device(io.engine, PHASE, io.channel, Direction::Write);
    ledger.add(write_key, w.traffic);
    ledger.add(write_key, cw.traffic);
    (count, ledger)
}

/// The device reads of rows `r`: every streamed column (or the whole records of a
/// row-major image), counted from their bases; rows are logical, counted once. A chunk
/// after the first continues its column's stream, so when a base is not word-aligned the
/// word it shares with the previous chunk is counted by that chunk only.
fn chunk_reads(table: &Table, cols: &[usize], io: &EngineIo, r: std::ops::Range<usize>) -> Traffic {
    let mut read = Traffic::default();
    let (start, len) = (r.start as u64, r.len() as u64);
    let cursor = |addr: u64| match start {
        0 => Cursor::new(addr, io.word_bytes),
        _ => Cursor::continuing(addr, io.word_bytes),
    };
    if let Some(base) = io.row_base {
        let rec: u64 = table
            .columns
            .iter()
            .map(|c| u64::from(c.ty.bits() / 8))
            .sum();
        let mut cur = cursor(base + start * rec);
        cur.touch(len * rec, len);
        read += cur.traffic;
    } else {
        for (k, &ci) in cols.iter().enumerate() {
            let ty = table.columns[ci].ty;
            let mut cur = cursor(io.column_bases[ci] + byte_len(ty, start));
            cur.touch(byte_len(ty, len), if k == 0 { len } else { 0 });
            read += cur.traffic;
        }
    }
    read
}

/// Rows per chunk: between [`MIN_CHUNK_ROWS`] and [`CHUNK_ROWS`], rounded up to a multiple of 64 (one mask word) and of
/// the rows that fill whole memory words of every image streamed, so every chunk starts on
/// a word boundary and per-chunk word counts add up to the partition's.
fn chunk_rows(table: &Table, cols: &[usize], io: &EngineIo) -> usize {
    let word_bits = (io.word_bytes * 8) as u32;
    let g = if io.row_base.is_some() {
        let bits: Vec<u32> = table.columns.iter().map(|c| c.ty.bits()).collect();
        crate::layout::granule(word_bits, &bits, true)
    } else {
        let bits: Vec<u32> = cols.iter().map(|&c| table.columns[c].ty.bits()).collect();
        crate::layout::granule(word_bits, &bits, false)
    } as usize;
    // lcm(64, g): 64 is a power of two, so the gcd is the common power of two.
    let unit = g * 64 / (1usize << g.trailing_zeros().min(6));
    // Eight chunks per thread balance the load; the result does not depend on the size.
    let target =
        (table.rows() / (8 * rayon::current_num_threads())).clamp(MIN_CHUNK_ROWS, CHUNK_ROWS);
    target.div_ceil(unit) * unit
}

/// The columns an engine streams: those the predicate reads and those it projects
/// (projected columns are streamed whole, as a column engine reads them; sorted, unique).
pub fn touched_columns(params: &ScanParams) -> Vec<usize> {
    let mut cols = params.predicate.columns();
    if let ScanOutput::Project(p) = &params.output {
        cols.extend(p);
    }
    cols.sort_unstable();
    cols.dedup();
    cols
}

/// Rewrites a conjunction of range terms on integer columns as one `between` test per
/// column (the intersection of its terms), so each column is compared once per row.
/// Other predicates are returned unchanged. Exact: an integer range is its intersection.
pub fn fuse_ranges(pred: &Bound, schema: &[(String, ElemType)]) -> Bound {
    let Some(ranges) = pred.ranges(schema) else {
        return pred.clone();
    };
    let leaf = |r: &crate::kernels::predicate::ColumnRange| {
        let ty = schema[r.col].1;
        let (min, max) = ty.int_range();
        // A range outside the type matches nothing: an inverted between.
        let (lo, hi) = if r.lo > max || r.hi < min || r.lo > r.hi {
            (max, min)
        } else {
            (r.lo.max(min), r.hi.min(max))
        };
        let s = |v: i128| {
            if ty.is_signed_int() {
                Scalar::I(v as i64)
            } else {
                Scalar::U(v as u64)
            }
        };
        Bound::Leaf {
            col: r.col,
            test: Test::Between(s(lo), s(hi)),
        }
    };
    ranges
        .iter()
        .map(leaf)
        .reduce(|a, b| Bound::And(Box::new(a), Box::new(b)))
        .unwrap_or_else(|| pred.clone())
}

/// The obviously-correct oracle: partition-local ids of matching rows, one row at a time.
pub fn naive_scan(table: &Table, pred: &Bound) -> Vec<u64> {
    (0..table.rows())
        .filter(|&r| pred.eval(&|c| crate::kernels::value_at(&table.columns[c], r)))
        .map(|r| r as u64)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernels::predicate::compile;
    use crate::table::{Column, ColumnData};

    fn table(rows: u32, mul: u32) -> Table {
        let v = (0..rows).map(|i| i.wrapping_mul(mul) % 1000).collect();
        Table::new(
            "t",
            vec![Column::new("v", ElemType::U32, ColumnData::U32(v)).unwrap()],
        )
        .unwrap()
    }

    #[test]
    fn dense_and_sparse_row_ids_equal_the_oracle_on_every_instruction_set() {
        // Rows whose density changes along the partition, so pieces defer at different
        // words, in chunks spread over several groups.
        let rows = 40 * MIN_CHUNK_ROWS as u32 + 77;
        let v = (0..rows)
            .map(|i| i.wrapping_mul(2_654_435_761) % 1000 + (i / 150_000) * 100)
            .collect();
        let t = Table::new(
            "t",
            vec![Column::new("v", ElemType::U32, ColumnData::U32(v)).unwrap()],
        )
        .unwrap();
        for pred in ["v < 2", "v < 30", "v < 100", "v < 500", "v < 990", "v >= 0"] {
            let predicate = compile(pred, &t.schema()).unwrap();
            let want: Vec<u8> = naive_scan(&t, &predicate)
                .iter()
                .flat_map(|&r| (r as u32 + 64).to_le_bytes())
                .collect();
            let params = ScanParams {
                predicate,
                output: ScanOutput::RowIds,
                global_ids: true,
                wide_ids: false,
            };
            for isa in Isa::available() {
                let got = scan_partition(isa, &t, 64, &params, &EngineIo::host(1));
                assert!(got.out == want, "{pred} on {}", isa.name());
                assert_eq!(got.count as usize, want.len() / 4);
            }
        }
    }

    #[test]
    fn reused_buffers_give_the_same_bytes_as_fresh_ones() {
        let big = table(300_000, 7919);
        let small = table(1_000, 104_729);
        let mut bufs = ScanBuffers::default();
        for output in [
            ScanOutput::RowIds,
            ScanOutput::Bitmap,
            ScanOutput::Project(vec![0]),
        ] {
            let params = ScanParams {
                predicate: compile("v < 100 or v = 999", &big.schema()).unwrap(),
                output,
                global_ids: true,
                wide_ids: false,
            };
            let io = EngineIo::host(1);
            for t in [&big, &small, &big] {
                let (count, ledger) =
                    scan_partition_into(Isa::detect(), t, 5, &params, &io, &mut bufs);
                let fresh = scan_partition(Isa::portable(), t, 5, &params, &io);
                assert_eq!(
                    (count, &ledger, &bufs.out),
                    (fresh.count, &fresh.ledger, &fresh.out)
                );
            }
        }
    }
}
