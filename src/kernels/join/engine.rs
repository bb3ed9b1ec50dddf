//! One engine's blocked join, shared by the mirror and the fast table: per block, read
//! the build block (counting device reads), build the table, then probe the engine's
//! partition in chunks and stream the records to the sink in order.
//!
//! ```text
//!   for block b:   S rows ──► table.build      ledger build[b]: device read, on-chip r/w
//!                  L chunks ─► probe (rayon) ─► records ─► sink (chunk order)
//!                                              ledger probe[b]: device read/write, on-chip read
//! ```
//!
//! Chunks are [`CHUNK_ROWS`] rows and start on word boundaries of word-aligned images, so
//! per-chunk word counts add up exactly; chunk results are emitted in chunk order, a wave
//! of chunks at a time, so output and ledger do not depend on the thread count and no
//! more than a wave of output is held at once. Inner-join matches wait in a batch of
//! [`BATCH`] and are written in probe order, so batching changes no byte.

use rayon::prelude::*;

use super::block::BlockPlan;
use super::error::JoinError;
use super::params::{JoinIo, JoinParams, OutField, Variant};
use super::record::{RecordWriter, BATCH};
use crate::ledger::{Cursor, Direction, Key, Ledger, Phase, Region, Traffic};
use crate::table::{Column, ColumnData, ElemType, Table};

/// Probe rows per chunk of work.
pub const CHUNK_ROWS: usize = 1 << 14;

/// The most probe rows between checks of a chunk's output size.
const SUB_ROWS: usize = 1 << 10;

/// Output bytes after which a chunk hands its records to the sink before going on.
const OUT_LIMIT: usize = 8 << 20;

/// A key or payload column, borrowed. `u8` and `u16` columns are widened to 32 bits:
/// the hash, the table's slots and the records see a `u32`, while the ledger counts the
/// column's own bytes.
#[derive(Clone, Copy)]
pub(crate) enum Col<'a> {
    U8(&'a [u8]),
    U16(&'a [u16]),
    U32(&'a [u32]),
    U64(&'a [u64]),
}

impl<'a> Col<'a> {
    #[inline(always)]
    pub(crate) fn get(&self, i: usize) -> u64 {
        match self {
            Col::U8(v) => u64::from(v[i]),
            Col::U16(v) => u64::from(v[i]),
            Col::U32(v) => u64::from(v[i]),
            Col::U64(v) => v[i],
        }
    }
    pub(crate) fn len(&self) -> usize {
        match self {
            Col::U8(v) => v.len(),
            Col::U16(v) => v.len(),
            Col::U32(v) => v.len(),
            Col::U64(v) => v.len(),
        }
    }
    /// `out[i] = self.get(offset + rows[i])`, with one dispatch on the type for them all.
    fn gather(&self, offset: usize, rows: &[u32], out: &mut [u64]) {
        fn each<T: Copy + Into<u64>>(v: &[T], rows: &[u32], out: &mut [u64]) {
            for (o, &r) in out.iter_mut().zip(rows) {
                *o = v[r as usize].into();
            }
        }
        match self {
            Col::U8(v) => each(&v[offset..], rows, out),
            Col::U16(v) => each(&v[offset..], rows, out),
            Col::U32(v) => each(&v[offset..], rows, out),
            Col::U64(v) => each(&v[offset..], rows, out),
        }
    }
    fn slice(&self, r: std::ops::Range<usize>) -> Col<'a> {
        match *self {
            Col::U8(v) => Col::U8(&v[r]),
            Col::U16(v) => Col::U16(&v[r]),
            Col::U32(v) => Col::U32(&v[r]),
            Col::U64(v) => Col::U64(&v[r]),
        }
    }
    fn bytes(&self) -> u64 {
        match self {
            Col::U8(_) => 1,
            Col::U16(_) => 2,
            Col::U32(_) => 4,
            Col::U64(_) => 8,
        }
    }
    /// The type the join computes with: `u64`, or `u32` for narrower columns.
    fn ty(&self) -> ElemType {
        match self {
            Col::U64(_) => ElemType::U64,
            _ => ElemType::U32,
        }
    }
}

/// The four columns of a join, checked against the parameters.
pub(crate) struct Cols<'a> {
    pub bkey: Col<'a>,
    pub bpay: Col<'a>,
    pub pkey: Col<'a>,
    pub ppay: Col<'a>,
}

fn col<'a>(t: &'a Table, name: &str, side: &'static str) -> Result<Col<'a>, JoinError> {
    let c: &Column = t.column(name).ok_or_else(|| JoinError::MissingColumn {
        side,
        table: t.name.clone(),
        column: name.to_string(),
    })?;
    match &c.data {
        ColumnData::U8(v) if c.ty == ElemType::U8 => Ok(Col::U8(v)),
        ColumnData::U16(v) => Ok(Col::U16(v)),
        ColumnData::U32(v) if c.ty == ElemType::U32 => Ok(Col::U32(v)),
        ColumnData::U64(v) => Ok(Col::U64(v)),
        _ => Err(JoinError::BadType {
            side,
            column: name.to_string(),
            ty: c.ty,
        }),
    }
}

impl<'a> Cols<'a> {
    pub(crate) fn resolve(b: &'a Table, l: &'a Table, p: &JoinParams) -> Result<Self, JoinError> {
        let cols = Cols {
            bkey: col(b, &p.build_key, "build")?,
            bpay: col(b, &p.build_payload, "build")?,
            pkey: col(l, &p.probe_key, "probe")?,
            ppay: col(l, &p.probe_payload, "probe")?,
        };
        if cols.bkey.ty() != cols.pkey.ty() {
            return Err(JoinError::KeyTypes {
                build_column: p.build_key.clone(),
                build: cols.bkey.ty(),
                probe_column: p.probe_key.clone(),
                probe: cols.pkey.ty(),
            });
        }
        for (side, column, found, planned) in [
            ("build", &p.build_key, cols.bkey.ty(), p.key_type),
            (
                "build",
                &p.build_payload,
                cols.bpay.ty(),
                p.build_payload_type,
            ),
        ] {
            if found != planned {
                return Err(JoinError::PlannedType {
                    side,
                    column: column.clone(),
                    found,
                    planned,
                });
            }
        }
        Ok(cols)
    }

    pub(crate) fn writer(&self, p: &JoinParams) -> Result<RecordWriter, JoinError> {
        RecordWriter::new(&p.variant, self.pkey.ty(), self.ppay.ty(), self.bpay.ty())
    }
}

/// A built block table the driver can probe.
pub(crate) trait BlockTable: Sync {
    /// Probes the first `n` of `keys`, calling `hit(row, build payload)` per match, rows
    /// in order, a row's matches in build order; counts on-chip reads into `onchip`. The
    /// keys after `n` are the ones probed next, for prefetching only.
    fn probe_rows(
        &self,
        keys: Col<'_>,
        n: usize,
        onchip: &mut Traffic,
        hit: impl FnMut(usize, u64),
    );
}

/// What the driver returns.
pub(crate) struct Driven {
    pub ledger: Ledger,
    pub records: u64,
    pub matches: u64,
}

#[derive(Default)]
struct ChunkOut {
    buf: Vec<u8>,
    next: usize,
    records: u64,
    matches: u64,
    onchip: Traffic,
    key: Traffic,
    pay: Traffic,
}

fn put(ledger: &mut Ledger, key: Key, t: Traffic) {
    if t != Traffic::default() {
        ledger.add(key, t);
    }
}

fn on(engine: u32, phase: Phase, region: Region, direction: Direction) -> Key {
    Key {
        engine,
        phase,
        region,
        channel: None,
        direction,
    }
}

/// Checks the engine's addresses are word-aligned.
pub(crate) fn check_io(io: &JoinIo) -> Result<(), JoinError> {
    if io.word_bytes == 0 || !io.word_bytes.is_power_of_two() || io.word_bytes > CHUNK_ROWS as u64 {
        return Err(JoinError::Shape(format!(
            "word of {} bytes: must be a power of two up to {CHUNK_ROWS}",
            io.word_bytes
        )));
    }
    for (what, addr) in [
        ("build key", io.build_key_base),
        ("build payload", io.build_payload_base),
        ("probe key", io.probe_key_base),
        ("probe payload", io.probe_payload_base),
        ("output", io.out_base),
    ] {
        if addr % io.word_bytes != 0 {
            return Err(JoinError::Unaligned {
                what,
                addr,
                word_bytes: io.word_bytes,
            });
        }
    }
    Ok(())
}

/// Runs every block: `make(b, keys, payloads, onchip_read, onchip_write)` builds block
/// `b`'s table, `built(b, &table)` sees it before the probe. `sink` receives each run of
/// records in order; it may take the vector, leaving another in its place.
#[allow(clippy::too_many_arguments)]
pub(crate) fn drive<T: BlockTable>(
    cols: &Cols<'_>,
    probe_row_start: u64,
    p: &JoinParams,
    io: &JoinIo,
    plan: &BlockPlan,
    mut make: impl FnMut(u32, &[u64], &[u64], &mut Traffic, &mut Traffic) -> Result<T, JoinError>,
    mut built: impl FnMut(u32, &T),
    sink: &mut dyn FnMut(&mut Vec<u8>),
) -> Result<Driven, JoinError> {
    check_io(io)?;
    let writer = cols.writer(p)?;
    let e = io.engine;
    let wb = io.word_bytes;
    let reads_pay = p.reads_probe_payload();
    let mut ledger = Ledger::new();
    let mut out = Cursor::new(io.out_base, wb);
    let (mut records, mut matches) = (0u64, 0u64);
    let l_rows = cols.pkey.len();
    let chunks = l_rows.div_ceil(CHUNK_ROWS);
    let wave = rayon::current_num_threads() * 4;
    let mut outs: Vec<ChunkOut> = (0..wave.min(chunks)).map(|_| ChunkOut::default()).collect();
    let (mut keys, mut pays) = (Vec::new(), Vec::new());
    // A semi-join emits a probe row in the first block where it matches: one bit per
    // probe row (engine-side state, not memory traffic of the ledger).
    let semi = matches!(p.variant, Variant::Semi);
    let mut seen = vec![0u64; if semi { l_rows.div_ceil(64) } else { 0 }];
    for (b, range) in plan.blocks.iter().enumerate() {
        let b = b as u32;
        let (bp, pp) = (Phase::nth("build", b), Phase::nth("probe", b));
        let (kb, pb) = (cols.bkey.bytes(), cols.bpay.bytes());
        let mut sk = Cursor::new(io.build_key_base + range.start * kb, wb);
        let mut sp = Cursor::new(io.build_payload_base + range.start * pb, wb);
        keys.clear();
        pays.clear();
        for r in range.start as usize..range.end as usize {
            keys.push(cols.bkey.get(r));
            pays.push(cols.bpay.get(r));
            sk.touch(kb, 1);
            sp.touch(pb, 1);
        }
        let (mut ocr, mut ocw) = (Traffic::default(), Traffic::default());
        let table = make(b, &keys, &pays, &mut ocr, &mut ocw)?;
        built(b, &table);
        if !p.broadcast_build || e == 0 {
            put(
                &mut ledger,
                Key::device(e, bp, io.build_channel, Direction::Read),
                sk.traffic,
            );
            put(
                &mut ledger,
                Key::device(e, bp, io.build_channel, Direction::Read),
                sp.traffic,
            );
        }
        put(
            &mut ledger,
            on(e, bp, Region::OnChip, Direction::Write),
            ocw,
        );
        put(&mut ledger, on(e, bp, Region::OnChip, Direction::Read), ocr);
        for first in (0..chunks).step_by(wave.max(1)) {
            let n = wave.min(chunks - first);
            let pieces: Vec<&mut [u64]> = if semi {
                seen.chunks_mut(CHUNK_ROWS / 64)
                    .skip(first)
                    .take(n)
                    .collect()
            } else {
                (0..n).map(|_| &mut [][..]).collect()
            };
            let work = outs[..n].par_iter_mut().zip(pieces).enumerate();
            work.for_each(|(i, (o, seen))| {
                let rows = chunk_rows(first + i, l_rows);
                let at = (probe_row_start, rows.clone());
                probe_chunk(cols, &table, &writer, p, io, at, rows.start, seen, o);
            });
            for (i, o) in outs[..n].iter_mut().enumerate() {
                let c = first + i;
                let rows = chunk_rows(c, l_rows);
                loop {
                    out.touch(o.buf.len() as u64, o.records);
                    sink(&mut o.buf);
                    records += o.records;
                    matches += o.matches;
                    put(
                        &mut ledger,
                        on(e, pp, Region::OnChip, Direction::Read),
                        o.onchip,
                    );
                    let lk = Key::device(e, pp, io.probe_channel, Direction::Read);
                    put(&mut ledger, lk, o.key);
                    if reads_pay {
                        put(&mut ledger, lk, o.pay);
                    }
                    if o.next == rows.end {
                        break;
                    }
                    // A chunk whose output outgrew the limit goes on where it stopped.
                    let cw = CHUNK_ROWS / 64;
                    let words = seen.len();
                    let piece: &mut [u64] = if semi {
                        &mut seen[c * cw..((c + 1) * cw).min(words)]
                    } else {
                        &mut []
                    };
                    let at = (probe_row_start, rows.clone());
                    probe_chunk(cols, &table, &writer, p, io, at, o.next, piece, o);
                }
            }
        }
        let written = std::mem::take(&mut out.traffic);
        put(
            &mut ledger,
            Key::device(e, pp, io.out_channel, Direction::Write),
            written,
        );
    }
    if matches!(p.variant, Variant::Count) {
        let phase = Phase::nth("probe", plan.blocks.len().saturating_sub(1) as u32);
        sink(&mut matches.to_le_bytes().to_vec());
        out.touch(8, 1);
        records = 1;
        let written = std::mem::take(&mut out.traffic);
        put(
            &mut ledger,
            Key::device(e, phase, io.out_channel, Direction::Write),
            written,
        );
    }
    let out_bytes = records * writer.record_bytes();
    host_link(
        &mut ledger,
        cols,
        p,
        io,
        l_rows as u64,
        reads_pay,
        (records, out_bytes),
    );
    Ok(Driven {
        ledger,
        records,
        matches,
    })
}

fn host_link(
    ledger: &mut Ledger,
    cols: &Cols<'_>,
    p: &JoinParams,
    io: &JoinIo,
    rows: u64,
    reads_pay: bool,
    (records, out_bytes): (u64, u64),
) {
    let e = io.engine;
    if p.probe_from_host {
        let load = on(e, Phase::single("load"), Region::HostLink, Direction::Read);
        let mut k = Cursor::new(io.probe_key_base, io.word_bytes);
        k.touch(rows * cols.pkey.bytes(), rows);
        put(ledger, load, k.traffic);
        if reads_pay {
            let mut c = Cursor::new(io.probe_payload_base, io.word_bytes);
            c.touch(rows * cols.ppay.bytes(), rows);
            put(ledger, load, c.traffic);
        }
    }
    if p.copyback {
        let back = on(
            e,
            Phase::single("copyback"),
            Region::HostLink,
            Direction::Write,
        );
        let mut c = Cursor::new(io.out_base, io.word_bytes);
        c.touch(out_bytes, records);
        put(ledger, back, c.traffic);
    }
}

fn chunk_rows(c: usize, l_rows: usize) -> std::ops::Range<usize> {
    c * CHUNK_ROWS..((c + 1) * CHUNK_ROWS).min(l_rows)
}

/// Probes rows `from..` of chunk `rows` into `o`, stopping after the sub-slice at which
/// the output passes [`OUT_LIMIT`] bytes (`o.next` says where). The chunk's probe reads are
/// counted on its first call.
#[allow(clippy::too_many_arguments)]
fn probe_chunk<T: BlockTable>(
    cols: &Cols<'_>,
    table: &T,
    writer: &RecordWriter,
    p: &JoinParams,
    io: &JoinIo,
    (start, chunk): (u64, std::ops::Range<usize>),
    from: usize,
    seen: &mut [u64],
    o: &mut ChunkOut,
) {
    o.buf.clear();
    // Room for one record per probe row up front (the sink may have taken the buffer).
    let expect = (chunk.end - from) * writer.record_bytes() as usize;
    o.buf.reserve(expect.min(OUT_LIMIT));
    let (kb, pb) = (cols.pkey.bytes(), cols.ppay.bytes());
    let n = if from == chunk.start {
        chunk.len() as u64
    } else {
        0
    };
    let mut kc = Cursor::new(io.probe_key_base + chunk.start as u64 * kb, io.word_bytes);
    kc.touch(n * kb, n);
    let mut pc = Cursor::new(
        io.probe_payload_base + chunk.start as u64 * pb,
        io.word_bytes,
    );
    pc.touch(n * pb, n);
    let mut onchip = Traffic::default();
    let (mut records, mut matches) = (0u64, 0u64);
    let mut at = from;
    // Sub-slices start small and double while their output stays small, so one row with
    // a large fan-out cannot push a chunk far past the limit.
    let mut step = 16;
    while at < chunk.end && o.buf.len() < OUT_LIMIT {
        let rows = at..(at + step).min(chunk.end);
        let before = o.buf.len();
        let (r, m) = probe_rows(
            cols,
            table,
            writer,
            p,
            start,
            (rows.clone(), &chunk),
            seen,
            &mut o.buf,
            &mut onchip,
        );
        records += r;
        matches += m;
        at = rows.end;
        if o.buf.len() - before < OUT_LIMIT / 16 {
            step = (step * 2).min(SUB_ROWS);
        } else {
            step = (step / 2).max(1);
        }
    }
    o.next = at;
    o.records = records;
    o.matches = matches;
    o.onchip = onchip;
    o.key = kc.traffic;
    o.pay = pc.traffic;
}

/// Inner-join matches waiting for their records: rows (from `base`) and build payloads.
struct Pending<'c, 'a> {
    cols: &'c Cols<'a>,
    writer: &'c RecordWriter,
    /// Probe row id of partition row 0, and the partition row of row 0 here.
    start: u64,
    base: usize,
    rows: [u32; BATCH],
    pays: [u64; BATCH],
    n: usize,
}

impl Pending<'_, '_> {
    #[inline(always)]
    fn push(&mut self, row: usize, pay: u64, buf: &mut Vec<u8>) {
        self.rows[self.n] = row as u32;
        self.pays[self.n] = pay;
        self.n += 1;
        if self.n == BATCH {
            self.write(buf);
        }
    }

    /// Writes the pending records. Out of line, so the probe loop that pushes stays small
    /// enough to keep its prefetches and compares in registers.
    #[inline(never)]
    fn write(&mut self, buf: &mut Vec<u8>) {
        let (rows, pays) = (&self.rows[..self.n], &self.pays[..self.n]);
        let (start, base, cols) = (self.start, self.base, self.cols);
        self.writer.write_batch(buf, self.n, |f, v| match f {
            OutField::ProbeRowId => {
                for (v, &r) in v.iter_mut().zip(rows) {
                    *v = start + (base + r as usize) as u64;
                }
            }
            OutField::Key => cols.pkey.gather(base, rows, v),
            OutField::ProbePayload => cols.ppay.gather(base, rows, v),
            OutField::BuildPayload => v.copy_from_slice(pays),
        });
        self.n = 0;
    }
}

/// Probes `rows` of `chunk`; returns (records, matches).
#[allow(clippy::too_many_arguments)]
fn probe_rows<T: BlockTable>(
    cols: &Cols<'_>,
    table: &T,
    writer: &RecordWriter,
    p: &JoinParams,
    start: u64,
    (rows, chunk): (std::ops::Range<usize>, &std::ops::Range<usize>),
    seen: &mut [u64],
    buf: &mut Vec<u8>,
    onchip: &mut Traffic,
) -> (u64, u64) {
    // The rest of the chunk rides along, so prefetches run ahead across sub-slices.
    let keys = cols.pkey.slice(rows.start..chunk.end);
    let n = rows.len();
    let (mut records, mut matches) = (0u64, 0u64);
    let base = rows.start;
    let seen_off = base - chunk.start;
    match p.variant {
        Variant::Inner(_) => {
            let mut pending = Pending {
                cols,
                writer,
                start,
                base,
                rows: [0; BATCH],
                pays: [0; BATCH],
                n: 0,
            };
            table.probe_rows(keys, n, onchip, |r, spay| {
                pending.push(r, spay, buf);
                matches += 1;
            });
            pending.write(buf);
        }
        Variant::Semi => table.probe_rows(keys, n, onchip, |r, _| {
            matches += 1;
            let (w, bit) = ((seen_off + r) / 64, 1u64 << ((seen_off + r) % 64));
            if seen[w] & bit == 0 {
                seen[w] |= bit;
                buf.extend_from_slice(&(start + (base + r) as u64).to_le_bytes());
                records += 1;
            }
        }),
        Variant::Count => table.probe_rows(keys, n, onchip, |_, _| matches += 1),
    }
    if matches!(p.variant, Variant::Inner(_)) {
        records = matches;
    }
    (records, matches)
}
