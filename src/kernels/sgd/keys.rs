//! The SGD kernel's `[kernel]` keys and binding them against the dataset table: the
//! label must be the last column, every other column a feature, all in the type the
//! numeric mode reads; everything but the data's values is validated here, before any
//! image is written. The `[kernel.quant]` keys choose k-bit feature codes and their ranges.

use std::sync::Mutex;

use serde::{Deserialize, Serialize};

use super::fixed::{self, FixedSpec, Overflow, Rounding};
use super::quant::{Outside, Quant};
use super::{
    validate, EngineMode, Hyper, Loss, Numeric, Order, SgdData, SgdEngineResult, SgdIo, SgdParams,
    Step,
};
use crate::error::{Error, Result};
use crate::kernels::seam::TableSchema;
use crate::table::{ElemType, QFormat};

/// A number, or one number per engine (an independent sweep) or per feature (a code
/// range).
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(untagged)]
pub enum OneOrEach {
    /// The same value for every engine or feature.
    One(f64),
    /// Engine or feature i takes entry i.
    Each(Vec<f64>),
}

impl OneOrEach {
    pub(super) fn at(&self, e: usize) -> Option<f64> {
        match self {
            OneOrEach::One(v) => Some(*v),
            OneOrEach::Each(v) => v.get(e).copied(),
        }
    }

    pub(super) fn len(&self) -> Option<usize> {
        match self {
            OneOrEach::One(_) => None,
            OneOrEach::Each(v) => Some(v.len()),
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
    pub step: OneOrEach,
    /// Step decay: η_t = η / (1 + t·decay).
    #[serde(default = "zero")]
    pub decay: OneOrEach,
    /// L2 strength λ.
    #[serde(default = "zero")]
    pub l2: OneOrEach,
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
    /// Stream the features as k-bit codes (absent: in the numeric mode's type).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub quant: Option<QuantKeys>,
}

/// The `[kernel.quant]` keys: features stream as k-bit codes of a stated range and
/// training reads their dequantised values.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct QuantKeys {
    /// k: 1, 2, 4 or 8 bits per code.
    pub bits: u32,
    /// Low end of the range, rounded to `f32`: one for every feature, or one per feature.
    pub lo: OneOrEach,
    /// High end of the range, as `lo`.
    pub hi: OneOrEach,
    /// A value outside its range: `clamp` (to the end code, counted) or `refuse` (an error).
    #[serde(default = "clamp")]
    pub outside: String,
}

impl QuantKeys {
    /// The scaling of `d` features.
    fn bind(&self, d: usize) -> Result<Quant> {
        let ends = |key: &str, v: &OneOrEach| -> Result<Vec<f32>> {
            if let Some(n) = v.len().filter(|&n| n != d) {
                return Err(bad(
                    &format!("quant.{key}"),
                    format!("lists {n} values for {d} features"),
                ));
            }
            // Rounded to f32 by nearest-even: the range the device stores.
            Ok((0..d)
                .map(|j| v.at(j).expect("length checked") as f32)
                .collect())
        };
        let outside = match self.outside.as_str() {
            "clamp" => Outside::Clamp,
            "refuse" => Outside::Refuse,
            o => {
                return Err(bad(
                    "quant.outside",
                    format!("`{o}` (expected clamp or refuse)"),
                ))
            }
        };
        Quant::new(
            self.bits,
            &ends("lo", &self.lo)?,
            &ends("hi", &self.hi)?,
            outside,
        )
        .map_err(|e| bad("quant", e))
    }
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
fn eta() -> OneOrEach {
    OneOrEach::One(0.01)
}
fn zero() -> OneOrEach {
    OneOrEach::One(0.0)
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
fn clamp() -> String {
    "clamp".into()
}

/// The last training of a job's coupled (averaging) engines: the placement it counted
/// with and every engine's result. Averaging couples the engines, so one training gives
/// all their results; models and losses do not depend on placement, and the ledger
/// depends on it only through the channel and the bases' offsets within a word. So the
/// first engine's run trains every engine with its own placement, and each later engine
/// whose bases sit at the same offsets takes its result with the channel renamed (any
/// other trains again). All engines of a job read the same replicated table. A cloned
/// kernel starts with no training.
#[derive(Debug, Default)]
pub(super) struct Coupled(pub(super) Mutex<Option<(SgdIo, Vec<SgdEngineResult>)>>);

impl Clone for Coupled {
    fn clone(&self) -> Coupled {
        Coupled::default()
    }
}

/// SGD bound to its dataset table.
#[derive(Debug, Clone)]
pub struct SgdKernel {
    pub(super) table: TableSchema,
    pub(super) params: SgdParams,
    pub(super) config: SgdConfig,
    /// The last coupled training (see [`Coupled`]).
    pub(super) coupled: Coupled,
}

/// Longest snapshot list a job may ask for.
const MAX_SNAPSHOTS: u64 = 1 << 16;
/// Most epochs a job may ask for.
const MAX_EPOCHS: u32 = 1 << 16;

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
    pub(super) fn hyper(&self, e: usize) -> Option<Hyper> {
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
        let dims = table.columns.len() - 1;
        let quant = match &self.quant {
            Some(_) if matches!(numeric, Numeric::Fixed(_)) => {
                return Err(bad(
                    "quant",
                    "k-bit codes dequantise to f32; numeric = \"fixed\" reads Q-format data instead (use f32 or f64)",
                ))
            }
            Some(k) => Some(k.bind(dims)?),
            None => None,
        };
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
            quant,
        };
        if rows == 0 || params.batch == 0 || params.batch > rows {
            return Err(bad(
                "batch",
                format!("minibatch size {} must be within 1..={rows}", self.batch),
            ));
        }
        // Everything else but the data's values is checked now, on a one-row stand-in
        // (with a minibatch of one row) so no memory is spent on the table's size.
        let probe = SgdData {
            features: ndarray::Array2::zeros((1, dims)),
            labels: ndarray::Array1::from_elem(1, 1.0),
        };
        let mut check = params.clone();
        check.batch = 1;
        // The stand-in's zeros need not be code values; the codes were checked above.
        check.quant = None;
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
            coupled: Coupled::default(),
        })
    }
}
