//! The scan on the kernel seam: its `[kernel]` keys, binding them against the input
//! table, and what it declares to the runner.
//!
//! ```text
//!   one partitioned table ─► engine p: scan_partition ─► out  (capacity: every row matches)
//!                                                     └► count (one u64 word)
//! ```

use std::ops::Range;

use serde::{Deserialize, Serialize};

use super::{fuse_ranges, scan_partition, EngineIo, Isa, ScanOutput, ScanParams, COUNT_BYTES};
use crate::error::{Error, Result};
use crate::kernels::predicate;
use crate::kernels::seam::{
    Arrays, EngineCtx, EngineRun, Field, Golden, Kernel, KernelError, MapParam, MapSection,
    RegionNeed, Share, Sizing, TableSchema, TableUse,
};
use crate::table::{ElemType, Table};

/// The scan's `[kernel]` keys.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct ScanConfig {
    /// The predicate text.
    pub predicate: String,
    /// `row_ids`, `bitmap` or `project`.
    #[serde(default = "default_output")]
    pub output: String,
    /// Columns to project (output = project).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub project: Vec<String>,
    /// `global` (from the table's first row) or `local` (from the partition's).
    #[serde(default = "default_row_ids")]
    pub row_ids: String,
    /// The table to scan, when the job has several.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub table: Option<String>,
}

fn default_output() -> String {
    "row_ids".into()
}

fn default_row_ids() -> String {
    "global".into()
}

/// A scan bound to its table.
#[derive(Debug, Clone)]
pub struct ScanKernel {
    table: String,
    schema: Vec<(String, ElemType)>,
    params: ScanParams,
    isa: Isa,
    warnings: Vec<String>,
}

impl ScanConfig {
    /// Binds the predicate and output against the scanned table.
    pub fn bind(&self, tables: &[TableSchema]) -> Result<ScanKernel> {
        let t = match (&self.table, tables) {
            (Some(name), _) => tables.iter().find(|t| &t.name == name).ok_or_else(|| {
                Error::input(format!("kernel.table: no input table is named `{name}`"))
            })?,
            (None, [one]) => one,
            (None, _) => {
                return Err(Error::input(
                    "kernel.table: the job has several tables; name the one to scan",
                ))
            }
        };
        let schema = t.columns.clone();
        let pred = predicate::compile(&self.predicate, &schema)
            .map_err(|e| Error::input(format!("kernel.predicate: {e}\n{}", e.caret())))?;
        let warnings = pred
            .never_matches(&schema)
            .map(|why| format!("kernel.predicate can never match: {why}"))
            .into_iter()
            .collect();
        let params = ScanParams {
            predicate: fuse_ranges(&pred, &schema),
            output: self.output_kind(&schema)?,
            global_ids: match self.row_ids.as_str() {
                "global" => true,
                "local" => false,
                o => {
                    return Err(Error::input(format!(
                        "kernel.row_ids: `{o}` (expected global or local)"
                    )))
                }
            },
            wide_ids: t.rows > u64::from(u32::MAX),
        };
        Ok(ScanKernel {
            table: t.name.clone(),
            schema,
            params,
            isa: Isa::detect(),
            warnings,
        })
    }

    fn output_kind(&self, schema: &[(String, ElemType)]) -> Result<ScanOutput> {
        match self.output.as_str() {
            "row_ids" => Ok(ScanOutput::RowIds),
            "bitmap" => Ok(ScanOutput::Bitmap),
            "project" => {
                if self.project.is_empty() {
                    return Err(Error::input("kernel.project: list the columns to project"));
                }
                let cols = self
                    .project
                    .iter()
                    .map(|name| {
                        schema.iter().position(|(n, _)| n == name).ok_or_else(|| {
                            Error::input(format!("kernel.project: unknown column `{name}`"))
                        })
                    })
                    .collect::<Result<Vec<_>>>()?;
                if let Some(&c) = cols.iter().find(|&&c| schema[c].1.is_sub_byte()) {
                    return Err(Error::input(format!(
                        "kernel.project: sub-byte column `{}` cannot be projected into records",
                        schema[c].0
                    )));
                }
                Ok(ScanOutput::Project(cols))
            }
            o => Err(Error::input(format!(
                "kernel.output: `{o}` (expected row_ids, bitmap or project)"
            ))),
        }
    }
}

impl ScanKernel {
    /// The bound parameters.
    pub fn params(&self) -> &ScanParams {
        &self.params
    }

    fn types(&self) -> Vec<ElemType> {
        self.schema.iter().map(|(_, t)| *t).collect()
    }

    /// The output region's golden record description.
    fn out_golden(&self, bytes: Vec<u8>, count: u64, rows: u64) -> Golden {
        let p = &self.params;
        let record_bytes = p.record_bytes(&self.types());
        let (elem, records, fields, arrays) = match &p.output {
            ScanOutput::RowIds => {
                let (ty, descr) = if p.wide_ids {
                    (ElemType::U64, "<u8")
                } else {
                    (ElemType::U32, "<u4")
                };
                let f = Field {
                    name: "row_id".into(),
                    ty,
                };
                let arrays = Arrays::Whole { descr, len: count };
                (ty.to_string(), count, vec![f], arrays)
            }
            ScanOutput::Bitmap => {
                let len = bytes.len() as u64;
                let arrays = Arrays::Whole { descr: "|u1", len };
                ("bits".to_string(), rows, Vec::new(), arrays)
            }
            ScanOutput::Project(cols) => {
                let fields = cols
                    .iter()
                    .map(|&c| Field {
                        name: self.schema[c].0.clone(),
                        ty: self.schema[c].1,
                    })
                    .collect();
                ("record".to_string(), count, fields, Arrays::PerField)
            }
        };
        Golden {
            name: "out".into(),
            region: Some(0),
            bytes,
            records,
            record_bytes,
            elem,
            fields,
            arrays,
        }
    }
}

impl Kernel for ScanKernel {
    fn name(&self) -> &'static str {
        "scan"
    }

    fn warnings(&self) -> Vec<String> {
        self.warnings.clone()
    }

    fn inputs(&self) -> Vec<TableUse> {
        vec![TableUse {
            table: self.table.clone(),
            share: Share::Partitioned,
        }]
    }

    fn select_ranges(&self, table: &str) -> Vec<(String, i128, i128)> {
        if table != self.table {
            return Vec::new();
        }
        self.params
            .predicate
            .ranges(&self.schema)
            .unwrap_or_default()
            .iter()
            .map(|r| (self.schema[r.col].0.clone(), r.lo, r.hi))
            .collect()
    }

    fn regions(
        &self,
        _engine: u32,
        rows: &[Range<u64>],
        _whole: &[Option<&Table>],
    ) -> Vec<RegionNeed> {
        let n = rows[0].end - rows[0].start;
        vec![
            RegionNeed {
                name: "out".into(),
                sizing: Sizing::Capacity(self.params.capacity_bytes(&self.types(), n)),
            },
            RegionNeed {
                name: "count".into(),
                sizing: Sizing::Exact(COUNT_BYTES),
            },
        ]
    }

    fn run(&self, ctx: &EngineCtx<'_>) -> std::result::Result<EngineRun, KernelError> {
        let t = &ctx.tables[0];
        let io = EngineIo {
            engine: ctx.engine,
            channel: t.channel,
            word_bytes: ctx.word_bytes,
            column_bases: t.column_bases.clone(),
            row_base: t.row_base,
            out_base: ctx.region_bases[0],
            count_base: ctx.region_bases[1],
        };
        let res = scan_partition(self.isa, t.rows, t.row_start, &self.params, &io);
        let rows = t.rows.rows() as u64;
        let count = Golden {
            name: "count".into(),
            region: Some(1),
            bytes: res.count.to_le_bytes().to_vec(),
            records: 1,
            record_bytes: COUNT_BYTES,
            elem: "u64".into(),
            fields: vec![Field {
                name: "count".into(),
                ty: ElemType::U64,
            }],
            arrays: Arrays::None,
        };
        Ok(EngineRun {
            outputs: vec![self.out_golden(res.out, res.count, rows), count],
            ledger: res.ledger,
            rows_in: rows,
            rows_out: res.count,
            notes: Vec::new(),
        })
    }

    fn map_section(&self) -> Option<MapSection> {
        let ranges = self.params.predicate.ranges(&self.schema);
        let json = ranges.as_ref().map_or(serde_json::Value::Null, |rs| {
            rs.iter()
                .map(|r| serde_json::json!({"column": self.schema[r.col].0, "lo": r.lo.to_string(), "hi_exclusive": r.hi_excl().to_string()}))
                .collect()
        });
        let mut params = Vec::new();
        for r in ranges.iter().flatten() {
            let (name, ty) = &self.schema[r.col];
            let (bits, signed) = (ty.bits() + 1, ty.is_signed_int());
            let (min, max) = ty.int_range();
            let up = name.to_uppercase();
            for (suffix, v) in [("LO", r.lo), ("HI", r.hi_excl())] {
                params.push(MapParam {
                    name: format!("PRED_{up}_{suffix}"),
                    bits,
                    signed,
                    value: v.clamp(min, max + 1),
                });
            }
        }
        Some(MapSection {
            comment: "predicate bounds (a conjunction of range terms on integer columns): lo inclusive, hi exclusive".into(),
            params,
            json: vec![("predicate_ranges".into(), json)],
        })
    }

    fn summary(&self, runs: &[(u64, u64)]) -> Vec<String> {
        let rows: u64 = runs.iter().map(|r| r.0).sum();
        let matches: u64 = runs.iter().map(|r| r.1).sum();
        let frac = if rows > 0 {
            matches as f64 / rows as f64
        } else {
            0.0
        };
        vec![format!(
            "predicate selected {:.4}% ({matches} of {rows} rows)",
            frac * 100.0
        )]
    }

    fn host_variant(&self) -> &'static str {
        self.isa.name()
    }
}
