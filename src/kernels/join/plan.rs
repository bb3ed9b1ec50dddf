//! The join on the kernel seam: its `[kernel]` keys, binding them against the build and
//! probe tables, and what it declares to the runner.
//!
//! ```text
//!   build table S (replicated: a copy on every engine channel) ─► on-chip table per block
//!   probe table L (partitioned) ─► engine p probes its partition ─► out  (pairs)
//!                                                              └► count (one u64 word)
//!   on-chip contents after each block's build ─► golden table_b{b} (no device address)
//! ```

use std::collections::HashMap;
use std::ops::Range;

use serde::{Deserialize, Serialize};

use super::BucketPick;
use super::{
    check_fields, join_engine, plan_blocks, Buckets, HashFn, JoinIo, JoinParams, OutField,
    Overflow, RecordWriter, Variant,
};
use crate::error::{Error, Result};
use crate::kernels::seam::{
    Arrays, EngineCtx, EngineRun, Field, Golden, Kernel, KernelError, RegionNeed, Share, Sizing,
    TableSchema, TableUse,
};
use crate::table::{ElemType, Table};

/// The join's `[kernel]` keys.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct JoinConfig {
    /// The build table S (kept on chip, replicated per engine).
    pub build: String,
    /// The probe table L (partitioned over the engines).
    pub probe: String,
    /// Key column of S.
    #[serde(default = "key")]
    pub build_key: String,
    /// Payload column of S.
    #[serde(default = "payload")]
    pub build_payload: String,
    /// Key column of L.
    #[serde(default = "key")]
    pub probe_key: String,
    /// Payload column of L.
    #[serde(default = "payload")]
    pub probe_payload: String,
    /// `fibonacci`, `murmur`, `crc32c` or `identity`.
    #[serde(default = "fibonacci")]
    pub hash: String,
    /// Bucket index from the hash's `top` or `bottom` bits.
    #[serde(default = "top")]
    pub bucket_pick: String,
    /// 2^k buckets; default: the fewest buckets keeping a block at `load_factor`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub bucket_bits: Option<u32>,
    /// Tuples per slot when `bucket_bits` is not given.
    #[serde(default = "half")]
    pub load_factor: f64,
    /// Slots per bucket.
    #[serde(default = "four")]
    pub slots: u32,
    /// Overflow area slots; 0 = linear probing into the next bucket.
    #[serde(default)]
    pub overflow_slots: u32,
    /// On-chip bytes per engine for the table (S is cut into blocks that fit).
    #[serde(default = "four_mib")]
    pub onchip_bytes: u64,
    /// `inner`, `semi` or `count`.
    #[serde(default = "inner")]
    pub output: String,
    /// Inner-join record fields: `probe_row`, `key`, `probe_payload`, `build_payload`.
    #[serde(default = "fields")]
    pub fields: Vec<String>,
    /// S is read once and broadcast to every engine (else each engine reads its copy).
    #[serde(default)]
    pub broadcast: bool,
    /// L arrives over the host link (a `load` phase).
    #[serde(default)]
    pub probe_from_host: bool,
    /// Results go back over the host link (a `copyback` phase).
    #[serde(default)]
    pub copyback: bool,
}

fn key() -> String {
    "key".into()
}
fn payload() -> String {
    "payload".into()
}
fn fibonacci() -> String {
    "fibonacci".into()
}
fn top() -> String {
    "top".into()
}
fn half() -> f64 {
    0.5
}
fn four() -> u32 {
    4
}
fn four_mib() -> u64 {
    4 << 20
}
fn inner() -> String {
    "inner".into()
}
fn fields() -> Vec<String> {
    vec!["probe_row".into(), "build_payload".into()]
}

/// A join bound to its tables.
#[derive(Debug, Clone)]
pub struct JoinKernel {
    build: TableSchema,
    probe: TableSchema,
    params: JoinParams,
}

/// The type the join computes with: narrower unsigned columns are widened to `u32`.
fn widened(t: ElemType) -> ElemType {
    match t {
        ElemType::U64 => ElemType::U64,
        _ => ElemType::U32,
    }
}

fn column(t: &TableSchema, key: &str, name: &str) -> Result<(usize, ElemType)> {
    t.columns
        .iter()
        .position(|(n, _)| n == name)
        .map(|i| (i, t.columns[i].1))
        .ok_or_else(|| {
            Error::input(format!(
                "kernel.{key}: table `{}` has no column `{name}`",
                t.name
            ))
        })
}

impl JoinConfig {
    /// Binds the keys against the build and probe tables.
    pub fn bind(&self, tables: &[TableSchema]) -> Result<JoinKernel> {
        let find = |key: &str, name: &str| {
            tables
                .iter()
                .find(|t| t.name == name)
                .cloned()
                .ok_or_else(|| {
                    Error::input(format!("kernel.{key}: no input table is named `{name}`"))
                })
        };
        if self.build == self.probe {
            return Err(Error::input(
                "kernel.build and kernel.probe name the same table",
            ));
        }
        let (build, probe) = (find("build", &self.build)?, find("probe", &self.probe)?);
        let (_, bk) = column(&build, "build_key", &self.build_key)?;
        let (_, bp) = column(&build, "build_payload", &self.build_payload)?;
        let (_, lk) = column(&probe, "probe_key", &self.probe_key)?;
        let (_, lp) = column(&probe, "probe_payload", &self.probe_payload)?;
        for (k, t) in [
            ("build_key", bk),
            ("build_payload", bp),
            ("probe_key", lk),
            ("probe_payload", lp),
        ] {
            if !matches!(
                t,
                ElemType::U8 | ElemType::U16 | ElemType::U32 | ElemType::U64
            ) {
                return Err(Error::input(format!(
                    "kernel.{k}: the join takes u8, u16, u32 or u64 columns, not {t}"
                )));
            }
        }
        if widened(bk) != widened(lk) {
            return Err(Error::input(format!(
                "kernel: build key `{}` is {bk} but probe key `{}` is {lk}; join keys must both be u64 or both at most 32 bits",
                self.build_key, self.probe_key
            )));
        }
        let mut p = JoinParams::new(widened(bk), widened(bp));
        p.hash = HashFn::parse(&self.hash).ok_or_else(|| {
            Error::input(format!(
                "kernel.hash: `{}` (expected fibonacci, murmur, crc32c or identity)",
                self.hash
            ))
        })?;
        p.pick = match self.bucket_pick.as_str() {
            "top" => BucketPick::Top,
            "bottom" => BucketPick::Bottom,
            o => {
                return Err(Error::input(format!(
                    "kernel.bucket_pick: `{o}` (expected top or bottom)"
                )))
            }
        };
        p.buckets = match self.bucket_bits {
            Some(k) if k > 40 => {
                return Err(Error::input(format!(
                    "kernel.bucket_bits = {k}: at most 40"
                )))
            }
            Some(k) => Buckets::Bits(k),
            None if self.load_factor > 0.0 && self.load_factor <= 1.0 => {
                Buckets::LoadFactor(self.load_factor)
            }
            None => {
                return Err(Error::input(format!(
                    "kernel.load_factor = {}: must be within (0, 1]",
                    self.load_factor
                )))
            }
        };
        if !(1..=64).contains(&self.slots) {
            return Err(Error::input(format!(
                "kernel.slots = {}: must be within 1..=64",
                self.slots
            )));
        }
        p.slots_per_bucket = self.slots;
        p.overflow = match self.overflow_slots {
            0 => Overflow::Linear,
            n => Overflow::Area(n),
        };
        p.capacity_bytes = self.onchip_bytes;
        p.variant = match self.output.as_str() {
            "inner" => Variant::Inner(
                self.fields
                    .iter()
                    .map(|f| match f.as_str() {
                        "probe_row" => Ok(OutField::ProbeRowId),
                        "key" => Ok(OutField::Key),
                        "probe_payload" => Ok(OutField::ProbePayload),
                        "build_payload" => Ok(OutField::BuildPayload),
                        o => Err(Error::input(format!(
                            "kernel.fields: `{o}` (expected probe_row, key, probe_payload or build_payload)"
                        ))),
                    })
                    .collect::<Result<Vec<_>>>()
                    .and_then(|f| {
                        check_fields(&f).map_err(|e| Error::input(format!("kernel.fields: {e}")))?;
                        Ok(f)
                    })?,
            ),
            "semi" => Variant::Semi,
            "count" => Variant::Count,
            o => return Err(Error::input(format!("kernel.output: `{o}` (expected inner, semi or count)"))),
        };
        p.broadcast_build = self.broadcast;
        p.probe_from_host = self.probe_from_host;
        p.copyback = self.copyback;
        p.build_key = self.build_key.clone();
        p.build_payload = self.build_payload.clone();
        p.probe_key = self.probe_key.clone();
        p.probe_payload = self.probe_payload.clone();
        plan_blocks(build.rows, &p).map_err(|e| Error::input(format!("kernel: {e}")))?;
        Ok(JoinKernel {
            build,
            probe,
            params: p,
        })
    }
}

impl JoinKernel {
    /// The record layout, from the writer that packs the records.
    fn record_fields(&self) -> Vec<Field> {
        let pay = self
            .probe
            .columns
            .iter()
            .find(|(n, _)| *n == self.params.probe_payload)
            .map_or(ElemType::U64, |c| widened(c.1));
        let p = &self.params;
        // Bound parameters always make a writer (the fields were checked at bind time).
        RecordWriter::new(&p.variant, p.key_type, pay, p.build_payload_type)
            .map(|w| w.layout().clone())
            .unwrap_or_default()
            .into_iter()
            .map(|(name, ty)| Field { name, ty })
            .collect()
    }

    fn record_bytes(&self) -> u64 {
        self.record_fields()
            .iter()
            .map(|f| u64::from(f.ty.bits() / 8))
            .sum()
    }
}

/// The most times one key occurs in `t`'s column `col`.
fn max_duplicates(t: &Table, col: &str) -> u64 {
    let Some(c) = t.column(col) else { return 0 };
    let mut counts: HashMap<u64, u64> = HashMap::new();
    for r in 0..c.len() {
        let k = match crate::kernels::value_at(c, r) {
            crate::kernels::predicate::Value::U(v) => v,
            _ => 0,
        };
        *counts.entry(k).or_default() += 1;
    }
    counts.values().copied().max().unwrap_or(0)
}

impl Kernel for JoinKernel {
    fn name(&self) -> &'static str {
        "join"
    }

    fn inputs(&self) -> Vec<TableUse> {
        vec![
            TableUse {
                table: self.build.name.clone(),
                share: Share::Replicated,
            },
            TableUse {
                table: self.probe.name.clone(),
                share: Share::Partitioned,
            },
        ]
    }

    fn regions(
        &self,
        _engine: u32,
        rows: &[Range<u64>],
        whole: &[Option<&Table>],
    ) -> Vec<RegionNeed> {
        let probe_rows = rows[1].end - rows[1].start;
        let worst = match &self.params.variant {
            Variant::Count => self.record_bytes(),
            Variant::Semi => probe_rows * self.record_bytes(),
            Variant::Inner(_) => {
                let dup = whole[0].map_or(0, |s| max_duplicates(s, &self.params.build_key));
                probe_rows
                    .saturating_mul(dup)
                    .saturating_mul(self.record_bytes())
            }
        };
        vec![
            RegionNeed {
                name: "out".into(),
                sizing: Sizing::Capacity(worst),
            },
            RegionNeed {
                name: "count".into(),
                sizing: Sizing::Exact(8),
            },
        ]
    }

    fn run(&self, ctx: &EngineCtx<'_>) -> std::result::Result<EngineRun, KernelError> {
        let (s, l) = (&ctx.tables[0], &ctx.tables[1]);
        if s.row_base.is_some() || l.row_base.is_some() {
            return Err(KernelError(
                "the join reads column images; use layout.order = \"column\"".into(),
            ));
        }
        let base = |t: &crate::kernels::seam::EngineTable<'_>, name: &str| {
            t.rows
                .columns
                .iter()
                .position(|c| c.name == name)
                .map_or(0, |i| t.column_bases[i])
        };
        let p = &self.params;
        let io = JoinIo {
            engine: ctx.engine,
            word_bytes: ctx.word_bytes,
            build_channel: s.channel,
            build_key_base: base(s, &p.build_key),
            build_payload_base: base(s, &p.build_payload),
            probe_channel: l.channel,
            probe_key_base: base(l, &p.probe_key),
            probe_payload_base: base(l, &p.probe_payload),
            out_channel: ctx.channel,
            out_base: ctx.region_bases[0],
            images: true,
        };
        let mut out = Vec::new();
        let res = join_engine(s.rows, l.rows, l.row_start, p, &io, &mut |b| {
            out.extend_from_slice(b)
        })
        .map_err(|e| KernelError(e.to_string()))?;
        let mut ledger = res.ledger;
        let mut cw = crate::ledger::Cursor::new(ctx.region_bases[1], ctx.word_bytes);
        cw.touch(8, 0);
        let probe_phase =
            crate::ledger::Phase::nth("probe", res.blocks.len().saturating_sub(1) as u32);
        ledger.add(
            crate::ledger::Key::device(
                ctx.engine,
                probe_phase,
                ctx.channel,
                crate::ledger::Direction::Write,
            ),
            cw.traffic,
        );
        let fields = self.record_fields();
        let mut outputs = vec![
            Golden {
                name: "out".into(),
                region: Some(0),
                records: res.records,
                record_bytes: self.record_bytes(),
                elem: "record".into(),
                arrays: Arrays::PerField,
                bytes: out,
                fields,
            },
            Golden {
                name: "count".into(),
                region: Some(1),
                bytes: res.records.to_le_bytes().to_vec(),
                records: 1,
                record_bytes: 8,
                elem: "u64".into(),
                fields: vec![Field {
                    name: "count".into(),
                    ty: ElemType::U64,
                }],
                arrays: Arrays::None,
            },
        ];
        let slot = plan_blocks(s.rows.rows() as u64, p)
            .map(|b| b.slot.slot_bytes())
            .unwrap_or(0);
        for (b, img) in res.images.into_iter().enumerate() {
            outputs.push(Golden {
                name: format!("table_b{b}"),
                region: None,
                records: (img.len() as u64).checked_div(slot).unwrap_or(0),
                record_bytes: slot,
                elem: "slot".into(),
                fields: Vec::new(),
                arrays: Arrays::None,
                bytes: img,
            });
        }
        let notes = if ctx.engine == 0 {
            res.blocks
                .iter()
                .map(|b| {
                    format!(
                        "block {}: {} tuples in 2^{} buckets, load {:.3}, longest probe {}, {} overflowed, {} bytes on chip{}",
                        b.block,
                        b.rows,
                        b.bucket_bits,
                        b.load_factor,
                        b.longest_probe,
                        b.overflowed,
                        b.footprint_bytes,
                        if b.fits { "" } else { " (does not fit)" }
                    )
                })
                .collect()
        } else {
            Vec::new()
        };
        Ok(EngineRun {
            outputs,
            ledger,
            rows_in: l.rows.rows() as u64,
            rows_out: res.records,
            notes,
        })
    }

    fn summary(&self, runs: &[(u64, u64)]) -> Vec<String> {
        let rows: u64 = runs.iter().map(|r| r.0).sum();
        let out: u64 = runs.iter().map(|r| r.1).sum();
        vec![format!("join: {rows} probe rows gave {out} records")]
    }
}
