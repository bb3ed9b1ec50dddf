//! SGD on the kernel seam: its `[kernel]` keys, binding them against the dataset table,
//! and what it declares to the runner.
//!
//! ```text
//!   dataset table (replicated: one row-major record image per engine channel)
//!     record = x0 … x{d−1} then the label, f32 or the data Q format, packed
//!        └─► engine e trains (its sweep entry, or its share with model averaging)
//!              ├─► model   (device region: the final model, read back by the host)
//!              └─► epochs, batches, loss (on-chip history, no device address)
//! ```
//!
//! The runner writes the dataset image from the table, so the table's columns must already
//! be in the type the engines read: `f32` for the float modes, signed integers carrying the
//! data Q format for fixed point (the `samples` generator writes either). The label is the
//! last column and every other column is a feature, in table order, so the runner's record
//! image is exactly the record the trainer counts.

use std::ops::Range;

use serde::{Deserialize, Serialize};

use super::fixed::{self, FixedSpec, Overflow, Rounding};
use super::{
    train, train_engine, validate, EngineMode, Hyper, Loss, Model, ModelElem, Numeric, Order,
    SgdData, SgdEngineResult, SgdIo, SgdParams, Step,
};
use crate::error::{Error, Result};
use crate::kernels::seam::{
    Arrays, EngineCtx, EngineRun, Field, Golden, Kernel, KernelError, MapParam, MapSection,
    RegionNeed, Share, Sizing, TableSchema, TableUse,
};
use crate::ledger::{Cursor, Direction, Key, Phase};
use crate::table::{ElemType, QFormat, Table};

/// A number, or one number per engine (an independent sweep).
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(untagged)]
pub enum PerEngine {
    /// The same value for every engine.
    One(f64),
    /// Engine e takes entry e.
    Each(Vec<f64>),
}

impl PerEngine {
    fn at(&self, e: usize) -> Option<f64> {
        match self {
            PerEngine::One(v) => Some(*v),
            PerEngine::Each(v) => v.get(e).copied(),
        }
    }

    fn len(&self) -> Option<usize> {
        match self {
            PerEngine::One(_) => None,
            PerEngine::Each(v) => Some(v.len()),
        }
    }
}

/// The SGD kernel's `[kernel]` keys.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct SgdConfig {
    /// The dataset table: features, then the label as its last column.
    pub table: String,
    /// Label column (must be the table's last column).
    #[serde(default = "label")]
    pub label: String,
    /// `squared`, `logistic` or `hinge`.
    #[serde(default = "squared")]
    pub loss: String,
    /// Minibatch size B.
    #[serde(default = "one")]
    pub batch: u64,
    /// Step size η (a list: one per engine, independent engines only).
    #[serde(default = "eta")]
    pub step: PerEngine,
    /// Step decay: η_t = η / (1 + t·decay).
    #[serde(default = "zero")]
    pub decay: PerEngine,
    /// L2 strength λ.
    #[serde(default = "zero")]
    pub l2: PerEngine,
    /// The model has an (unregularised) bias.
    #[serde(default = "yes")]
    pub bias: bool,
    /// Epochs.
    #[serde(default = "one_u32")]
    pub epochs: u32,
    /// Shuffle the samples every pass with this seed (absent: input order).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shuffle_seed: Option<u64>,
    /// Stop once the loss changes by at most this much between epochs.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub stop_tolerance: Option<f64>,
    /// `f32`, `f64` or `fixed`.
    #[serde(default = "f32_name")]
    pub numeric: String,
    /// Adder-tree lanes of the dot product (float modes; 1 = sequential).
    #[serde(default = "sixteen")]
    pub lanes: u32,
    /// Flush subnormals to zero (`f32`).
    #[serde(default)]
    pub ftz: bool,
    /// Data and label format (fixed point).
    #[serde(default = "data_q")]
    pub data_q: String,
    /// Model format (fixed point).
    #[serde(default = "model_q")]
    pub model_q: String,
    /// Accumulator format (fixed point).
    #[serde(default = "acc_q")]
    pub acc_q: String,
    /// `truncate`, `nearest-even` or `stochastic` (fixed point).
    #[serde(default = "nearest_even")]
    pub rounding: String,
    /// `saturate` or `wrap` (fixed point).
    #[serde(default = "saturate")]
    pub overflow: String,
    /// LFSR start state for stochastic rounding.
    #[serde(default = "one_u32")]
    pub lfsr_seed: u32,
    /// The logistic loss's sigmoid table has 2^k entries (fixed point).
    #[serde(default = "eight")]
    pub sigmoid_bits: u32,
    /// `independent` (each engine its own sweep entry) or `averaging` (data-parallel,
    /// models averaged after every epoch).
    #[serde(default = "independent")]
    pub engines: String,
    /// Device bytes for the dataset image; a larger dataset is trained block by block.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub device_bytes: Option<u64>,
    /// Passes over each block before the next (block-wise training).
    #[serde(default = "one_u32")]
    pub block_epochs: u32,
    /// Keep the model after each of the first M minibatches.
    #[serde(default)]
    pub snapshots: u64,
}

fn label() -> String {
    "y".into()
}
fn squared() -> String {
    "squared".into()
}
fn one() -> u64 {
    1
}
fn one_u32() -> u32 {
    1
}
fn eta() -> PerEngine {
    PerEngine::One(0.01)
}
fn zero() -> PerEngine {
    PerEngine::One(0.0)
}
fn yes() -> bool {
    true
}
fn f32_name() -> String {
    "f32".into()
}
fn sixteen() -> u32 {
    16
}
fn data_q() -> String {
    "Q3.12".into()
}
fn model_q() -> String {
    "Q7.24".into()
}
fn acc_q() -> String {
    "Q15.40".into()
}
fn nearest_even() -> String {
    "nearest-even".into()
}
fn saturate() -> String {
    "saturate".into()
}
fn eight() -> u32 {
    8
}
fn independent() -> String {
    "independent".into()
}

/// Longest snapshot list a job may ask for.
const MAX_SNAPSHOTS: u64 = 1 << 16;
/// Most epochs a job may ask for.
const MAX_EPOCHS: u32 = 1 << 16;

/// SGD bound to its dataset table.
#[derive(Debug, Clone)]
pub struct SgdKernel {
    table: TableSchema,
    params: SgdParams,
    config: SgdConfig,
}

fn bad(key: &str, what: impl std::fmt::Display) -> Error {
    Error::input(format!("kernel.{key}: {what}"))
}

fn q_key(key: &str, text: &str) -> Result<QFormat> {
    crate::table::parse_q(text).map_err(|e| bad(key, e))
}

impl SgdConfig {
    fn numeric(&self) -> Result<Numeric> {
        Ok(match self.numeric.as_str() {
            "f32" => Numeric::F32 {
                lanes: self.lanes,
                ftz: self.ftz,
            },
            "f64" => Numeric::F64 { lanes: self.lanes },
            "fixed" => Numeric::Fixed(FixedSpec {
                data: q_key("data_q", &self.data_q)?,
                model: q_key("model_q", &self.model_q)?,
                acc: q_key("acc_q", &self.acc_q)?,
                rounding: match self.rounding.as_str() {
                    "truncate" => Rounding::Truncate,
                    "nearest-even" => Rounding::NearestEven,
                    "stochastic" => Rounding::Stochastic,
                    o => {
                        return Err(bad(
                            "rounding",
                            format!("`{o}` (expected truncate, nearest-even or stochastic)"),
                        ))
                    }
                },
                overflow: match self.overflow.as_str() {
                    "saturate" => Overflow::Saturate,
                    "wrap" => Overflow::Wrap,
                    o => {
                        return Err(bad(
                            "overflow",
                            format!("`{o}` (expected saturate or wrap)"),
                        ))
                    }
                },
                lfsr_seed: self.lfsr_seed,
                sigmoid_bits: self.sigmoid_bits,
            }),
            o => {
                return Err(bad(
                    "numeric",
                    format!("`{o}` (expected f32, f64 or fixed)"),
                ))
            }
        })
    }

    /// The hyperparameters of engine `e`.
    fn hyper(&self, e: usize) -> Option<Hyper> {
        Some(Hyper {
            step: Step {
                eta: self.step.at(e)?,
                decay: self.decay.at(e)?,
            },
            l2: self.l2.at(e)?,
        })
    }

    /// Binds the keys against the dataset table.
    pub fn bind(&self, tables: &[TableSchema]) -> Result<SgdKernel> {
        let table = tables
            .iter()
            .find(|t| t.name == self.table)
            .cloned()
            .ok_or_else(|| bad("table", format!("no input table is named `{}`", self.table)))?;
        let last = table.columns.last().map(|c| c.0.as_str());
        if last != Some(self.label.as_str()) || table.columns.len() < 2 {
            return Err(bad(
                "label",
                format!(
                    "`{}` must be the last of at least two columns of table `{}` (features come first, as in the record image)",
                    self.label, table.name
                ),
            ));
        }
        let numeric = self.numeric()?;
        for (i, (name, ty)) in table.columns.iter().enumerate() {
            let q = table.q.get(i).copied().flatten();
            let ok = match &numeric {
                Numeric::Fixed(f) => {
                    q == Some(f.data)
                        && ty.is_signed_int()
                        && ty.bits() == fixed::storage_bits(f.data)
                }
                _ => *ty == ElemType::F32 && q.is_none(),
            };
            if !ok {
                let want = match &numeric {
                    Numeric::Fixed(f) => format!(
                        "i{} with q = \"{}\" (the data format)",
                        fixed::storage_bits(f.data),
                        self.data_q
                    ),
                    _ => "f32".into(),
                };
                return Err(bad(
                    "table",
                    format!(
                        "column `{name}` is {ty}; the {} mode reads {want}",
                        self.numeric
                    ),
                ));
            }
        }
        if let Numeric::Fixed(f) = &numeric {
            if fixed::width(f.data) > 24 {
                return Err(bad(
                    "data_q",
                    format!("{} has more than 24 bits with the sign", self.data_q),
                ));
            }
        }
        let mode = match self.engines.as_str() {
            "independent" => EngineMode::Independent { sweep: Vec::new() },
            "averaging" => {
                if [&self.step, &self.decay, &self.l2]
                    .iter()
                    .any(|v| v.len().is_some())
                {
                    return Err(bad(
                        "engines",
                        "averaging engines share one step, decay and l2: give numbers, not lists",
                    ));
                }
                EngineMode::Averaging { engines: 1 }
            }
            o => {
                return Err(bad(
                    "engines",
                    format!("`{o}` (expected independent or averaging)"),
                ))
            }
        };
        if self.loss != "squared" && self.loss != "logistic" && self.loss != "hinge" {
            return Err(bad(
                "loss",
                format!("`{}` (expected squared, logistic or hinge)", self.loss),
            ));
        }
        if self.epochs > MAX_EPOCHS || self.snapshots > MAX_SNAPSHOTS {
            return Err(bad(
                "epochs",
                format!("at most {MAX_EPOCHS} epochs and {MAX_SNAPSHOTS} snapshots"),
            ));
        }
        if self.sigmoid_bits > 20 {
            return Err(bad(
                "sigmoid_bits",
                format!("{}: at most 20", self.sigmoid_bits),
            ));
        }
        let rows = table.rows as usize;
        let params = SgdParams {
            loss: match self.loss.as_str() {
                "logistic" => Loss::Logistic,
                "hinge" => Loss::Hinge,
                _ => Loss::Squared,
            },
            batch: usize::try_from(self.batch).unwrap_or(usize::MAX),
            hyper: self.hyper(0).unwrap_or(Hyper {
                step: Step {
                    eta: 0.0,
                    decay: 0.0,
                },
                l2: 0.0,
            }),
            bias: self.bias,
            epochs: self.epochs,
            order: self
                .shuffle_seed
                .map_or(Order::Input, |seed| Order::Shuffle { seed }),
            tol: self.stop_tolerance,
            numeric,
            engines: mode,
            capacity: self.device_bytes,
            block_epochs: self.block_epochs,
            snapshots: self.snapshots as usize,
            pad_records: false,
        };
        // Everything but the data's values can be checked now, on a stand-in of zeros.
        let probe = SgdData {
            features: ndarray::Array2::zeros((rows, table.columns.len() - 1)),
            labels: ndarray::Array1::from_elem(rows, 1.0),
        };
        let mut check = params.clone();
        if let Some(h) = self.hyper(0) {
            check.engines = match check.engines {
                EngineMode::Independent { .. } => EngineMode::Independent { sweep: vec![h] },
                m => m,
            };
        }
        validate(&probe, &check, None).map_err(|e| Error::input(format!("kernel: {e}")))?;
        Ok(SgdKernel {
            table,
            params,
            config: self.clone(),
        })
    }
}

/// The record field type and NumPy dtype of a model element.
fn elem_of(e: ModelElem) -> (ElemType, &'static str) {
    match e {
        ModelElem::F32 => (ElemType::F32, "<f4"),
        ModelElem::F64 => (ElemType::F64, "<f8"),
        ModelElem::Fixed { bits: 8, .. } => (ElemType::I8, "|i1"),
        ModelElem::Fixed { bits: 16, .. } => (ElemType::I16, "<i2"),
        ModelElem::Fixed { bits: 32, .. } => (ElemType::I32, "<i4"),
        ModelElem::Fixed { .. } => (ElemType::I64, "<i8"),
    }
}

impl SgdKernel {
    fn dims(&self) -> usize {
        self.table.columns.len() - 1
    }

    /// Weights then bias, as record fields.
    fn model_fields(&self, ty: ElemType) -> Vec<Field> {
        (0..self.dims())
            .map(|j| format!("w{j}"))
            .chain(self.params.bias.then(|| "b".to_string()))
            .map(|name| Field { name, ty })
            .collect()
    }

    fn model_elem_bytes(&self) -> u64 {
        match &self.params.numeric {
            Numeric::F32 { .. } => 4,
            Numeric::F64 { .. } => 8,
            Numeric::Fixed(f) => u64::from(fixed::storage_bits(f.model) / 8),
        }
    }

    fn model_bytes(&self) -> u64 {
        (self.dims() as u64 + u64::from(self.params.bias)) * self.model_elem_bytes()
    }

    /// Models in one output: `records` models, one record each.
    fn models(&self, name: &str, region: Option<usize>, models: &[Model]) -> Golden {
        let elem = models.first().map_or(ModelElem::F32, Model::elem);
        let (ty, descr) = elem_of(elem);
        let bytes: Vec<u8> = models.iter().flat_map(Model::to_bytes).collect();
        Golden {
            name: name.into(),
            region,
            records: models.len() as u64,
            record_bytes: self.model_bytes(),
            elem: ty.to_string(),
            fields: self.model_fields(ty),
            arrays: Arrays::Whole {
                descr,
                len: bytes.len() as u64 / u64::from(ty.bits() / 8),
            },
            bytes,
        }
    }

    /// Trains engine `ctx.engine`.
    fn train_one(
        &self,
        data: &SgdData,
        ctx: &EngineCtx<'_>,
    ) -> std::result::Result<SgdEngineResult, String> {
        let t = &ctx.tables[0];
        let base = t.row_base.ok_or(
            "SGD engines stream row-major records: use layout.order = \"row\"".to_string(),
        )?;
        let io = |engine| SgdIo {
            engine,
            word_bytes: ctx.word_bytes,
            channel: t.channel,
            data_base: base,
            model_base: ctx.region_bases[0],
        };
        let mut p = self.params.clone();
        match &mut p.engines {
            EngineMode::Independent { sweep } => {
                let c = &self.config;
                for (key, v) in [("step", &c.step), ("decay", &c.decay), ("l2", &c.l2)] {
                    if let Some(n) = v.len().filter(|&n| n != ctx.engines as usize) {
                        return Err(format!(
                            "kernel.{key} lists {n} values for {} engines",
                            ctx.engines
                        ));
                    }
                }
                *sweep = (0..ctx.engines as usize)
                    .map(|e| c.hyper(e).expect("lists match the engines"))
                    .collect();
                train_engine(data, &p, &io(ctx.engine)).map_err(|e| e.to_string())
            }
            EngineMode::Averaging { engines } => {
                // Averaging couples the engines: train all of them with this engine's
                // placement and keep this engine's result (its ledger names its channel).
                *engines = ctx.engines;
                let ios: Vec<SgdIo> = (0..ctx.engines).map(io).collect();
                let mut all = train(data, &p, &ios).map_err(|e| e.to_string())?;
                Ok(all.swap_remove(ctx.engine as usize))
            }
        }
    }
}

impl Kernel for SgdKernel {
    fn name(&self) -> &'static str {
        "sgd"
    }

    fn inputs(&self) -> Vec<TableUse> {
        vec![TableUse {
            table: self.table.name.clone(),
            share: Share::Replicated,
        }]
    }

    fn regions(
        &self,
        _engine: u32,
        _rows: &[Range<u64>],
        _whole: &[Option<&Table>],
    ) -> Vec<RegionNeed> {
        vec![RegionNeed {
            name: "model".into(),
            sizing: Sizing::Exact(self.model_bytes()),
        }]
    }

    fn run(&self, ctx: &EngineCtx<'_>) -> std::result::Result<EngineRun, KernelError> {
        let rows = ctx.tables[0].rows;
        let features: Vec<usize> = (0..self.dims()).collect();
        let data = SgdData::from_table(rows, &features, self.dims(), &self.table.q)
            .map_err(|e| KernelError(e.to_string()))?;
        let r = self.train_one(&data, ctx).map_err(KernelError)?;
        let mut ledger = r.ledger;
        let mut cw = Cursor::new(ctx.region_bases[0], ctx.word_bytes);
        cw.touch(self.model_bytes(), 0);
        ledger.add(
            Key::device(
                ctx.engine,
                Phase::single("copyback"),
                ctx.channel,
                Direction::Write,
            ),
            cw.traffic,
        );
        let epochs = r.losses.len();
        let averaging = matches!(self.params.engines, EngineMode::Averaging { .. });
        let mut outputs = vec![
            self.models("model", Some(0), std::slice::from_ref(&r.model)),
            self.models("epochs", None, &r.epoch_models),
        ];
        if !r.snapshots.is_empty() {
            outputs.push(self.models("batches", None, &r.snapshots));
        }
        outputs.push(Golden {
            name: "loss".into(),
            region: None,
            records: epochs as u64,
            record_bytes: 8,
            elem: "f64".into(),
            fields: vec![Field {
                name: "loss".into(),
                ty: ElemType::F64,
            }],
            arrays: Arrays::Whole {
                descr: "<f8",
                len: epochs as u64,
            },
            bytes: r.losses.iter().flat_map(|l| l.to_le_bytes()).collect(),
        });
        let o = r.overflow;
        let mut note = format!(
            "engine {}: loss {:.6e} after epoch 1, {:.6e} after epoch {epochs}",
            ctx.engine,
            r.losses.first().copied().unwrap_or(f64::NAN),
            r.losses.last().copied().unwrap_or(f64::NAN),
        );
        if matches!(self.params.numeric, Numeric::Fixed(_)) {
            note.push_str(&format!(
                "; overflow events: data {}, dot {}, gradient {}, model {}",
                o.data, o.dot, o.grad, o.model
            ));
        }
        Ok(EngineRun {
            outputs,
            ledger,
            rows_in: rows.rows() as u64,
            rows_out: epochs as u64,
            // Averaged engines end every epoch with one model: engine 0 speaks for all.
            notes: if averaging && ctx.engine > 0 {
                Vec::new()
            } else {
                vec![note]
            },
        })
    }

    fn map_section(&self) -> Option<MapSection> {
        let elem = match &self.params.numeric {
            Numeric::Fixed(f) => fixed::storage_bits(f.data) / 8,
            _ => 4,
        };
        let p = |name: &str, value: u64| MapParam {
            name: name.into(),
            bits: 32,
            signed: false,
            value: i128::from(value),
        };
        let d = self.dims() as u64;
        Some(MapSection {
            comment: "SGD: features per record, record and model bytes, minibatch size, epochs"
                .into(),
            params: vec![
                p("SGD_FEATURES", d),
                p("SGD_RECORD_BYTES", (d + 1) * u64::from(elem)),
                p("SGD_MODEL_BYTES", self.model_bytes()),
                p("SGD_BATCH", self.config.batch),
                p("SGD_EPOCHS", u64::from(self.params.epochs)),
            ],
            json: vec![(
                "sgd".into(),
                serde_json::json!({
                    "features": d,
                    "bias": self.params.bias,
                    "numeric": self.config.numeric,
                    "loss": self.config.loss,
                    "engines": self.config.engines,
                }),
            )],
        })
    }

    fn summary(&self, runs: &[(u64, u64)]) -> Vec<String> {
        let epochs = runs.iter().map(|r| r.1).max().unwrap_or(0);
        vec![format!(
            "sgd: {} engines trained up to {epochs} epochs over {} samples of {} features ({} loss, {})",
            runs.len(),
            self.table.rows,
            self.dims(),
            self.config.loss,
            self.config.numeric
        )]
    }
}
