//! The SGD kernel's plain-data interface: dataset, parameters, engine placement, results
//! and errors. Checking (`validate`) happens before any training, so a bad job fails
//! before anything is computed or written.

use ndarray::{Array1, Array2};

use super::fixed::FixedSpec;
use super::loss::Loss;
use super::quant::Quant;
use crate::kernels::predicate::Value;
use crate::ledger::Ledger;
use crate::table::{ColumnData, QFormat, Table};

/// A dense dataset: `features` is n × d row-major, `labels` has n entries.
#[derive(Debug, Clone, PartialEq)]
pub struct SgdData {
    /// Features, one row per sample.
    pub features: Array2<f32>,
    /// Labels: any real (squared), {0, 1} (logistic) or {−1, +1} (hinge).
    pub labels: Array1<f32>,
}

impl SgdData {
    /// Samples.
    pub fn rows(&self) -> usize {
        self.features.nrows()
    }

    /// Features per sample.
    pub fn dims(&self) -> usize {
        self.features.ncols()
    }

    /// Builds the dataset from columns `features` (by index, in order) and column `label`
    /// of `table`: `f32` columns as they are, signed integer columns with a Q format in `q`
    /// (by column index) as their exact value v/2^f, which must be exact in `f32`.
    pub fn from_table(
        table: &Table,
        features: &[usize],
        label: usize,
        q: &[Option<QFormat>],
    ) -> Result<SgdData, SgdError> {
        let n = table.rows();
        let read = |c: usize, out: &mut dyn FnMut(usize, f32)| -> Result<(), SgdError> {
            let col = table.columns.get(c).ok_or_else(|| {
                SgdError::Column(format!("no column {c} in table `{}`", table.name))
            })?;
            if let ColumnData::F32(v) = &col.data {
                v.iter().enumerate().for_each(|(r, &x)| out(r, x));
                return Ok(());
            }
            let f = q
                .get(c)
                .copied()
                .flatten()
                .filter(|_| col.ty.is_signed_int())
                .ok_or_else(|| {
                    SgdError::Column(format!(
                        "column `{}` is {}: expected f32, or a signed integer with a Q format",
                        col.name, col.ty
                    ))
                })?;
            let scale = libm::exp2(-f64::from(f.frac_bits));
            for r in 0..n {
                let Value::I(i) = crate::kernels::value_at(col, r) else {
                    unreachable!("signed integer columns hold signed values")
                };
                let x = i as f64 * scale;
                if f64::from(x as f32) != x {
                    return Err(SgdError::Column(format!(
                        "column `{}`, row {r}: {x} is not exact in f32",
                        col.name
                    )));
                }
                out(r, x as f32);
            }
            Ok(())
        };
        let mut x = Array2::<f32>::zeros((n, features.len()));
        for (j, &c) in features.iter().enumerate() {
            read(c, &mut |r, v| x[[r, j]] = v)?;
        }
        let mut y = Array1::<f32>::zeros(n);
        read(label, &mut |r, v| y[r] = v)?;
        Ok(SgdData {
            features: x,
            labels: y,
        })
    }
}

/// Step size: η_t = η / (1 + t·decay), t the number of updates made before this one
/// (counted across epochs); `decay = 0` is a constant step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Step {
    /// η.
    pub eta: f64,
    /// Decay per update.
    pub decay: f64,
}

impl Step {
    /// η_t for update `t`, in `f64`.
    pub fn at(&self, t: u64) -> f64 {
        self.eta / (1.0 + t as f64 * self.decay)
    }
}

/// The hyperparameters one engine trains with (one entry of a sweep).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Hyper {
    /// Step size.
    pub step: Step,
    /// L2 strength λ (the bias is never regularised).
    pub l2: f64,
}

/// Sample order within an epoch.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Order {
    /// Input order, as hardware streams the image.
    Input,
    /// A Fisher–Yates shuffle per pass, from `gen::rng::Stream(seed, "sgd", "order", pass)`.
    Shuffle {
        /// Seed.
        seed: u64,
    },
}

/// How the engines relate.
#[derive(Debug, Clone, PartialEq)]
pub enum EngineMode {
    /// Engine e trains alone with `sweep[e]` over the whole dataset.
    Independent {
        /// One entry per engine.
        sweep: Vec<Hyper>,
    },
    /// `engines` engines each train on their contiguous share of every pass's sample
    /// order with the shared hyperparameters, and the models are averaged after every epoch.
    Averaging {
        /// Engine count E ≥ 1.
        engines: u32,
    },
}

impl EngineMode {
    /// Number of engines.
    pub fn engines(&self) -> usize {
        match self {
            EngineMode::Independent { sweep } => sweep.len(),
            EngineMode::Averaging { engines } => *engines as usize,
        }
    }
}

/// The arithmetic.
#[derive(Debug, Clone, PartialEq)]
pub enum Numeric {
    /// `f64` throughout; the dot product in `lanes` lanes summed by an adder tree.
    F64 {
        /// Adder-tree width L (a power of two, 1 = sequential).
        lanes: u32,
    },
    /// `f32` throughout; `lanes` as for `F64`; `ftz` flushes subnormal inputs and results to
    /// a zero of the same sign.
    F32 {
        /// Adder-tree width L.
        lanes: u32,
        /// Flush subnormals to zero.
        ftz: bool,
    },
    /// Fixed point (see [`FixedSpec`]).
    Fixed(FixedSpec),
}

/// Everything training needs besides the data.
#[derive(Debug, Clone, PartialEq)]
pub struct SgdParams {
    /// Loss.
    pub loss: Loss,
    /// Minibatch size B (1 ..= n; the last minibatch of a pass may be shorter).
    pub batch: usize,
    /// Hyperparameters (for `Averaging`; `Independent` engines take theirs from the sweep).
    pub hyper: Hyper,
    /// Whether the model has a bias term.
    pub bias: bool,
    /// Epochs (passes over the whole dataset).
    pub epochs: u32,
    /// Sample order.
    pub order: Order,
    /// Stop after epoch e ≥ 1 when |loss[e] − loss[e−1]| ≤ tol.
    pub tol: Option<f64>,
    /// Arithmetic.
    pub numeric: Numeric,
    /// Engines.
    pub engines: EngineMode,
    /// Device capacity for the dataset image in bytes; `None` = it all fits.
    pub capacity: Option<u64>,
    /// Passes over each block before moving to the next (block-wise mode).
    pub block_epochs: u32,
    /// Snapshots of the model after each of the first M minibatches.
    pub snapshots: usize,
    /// Pad each record to a whole number of words in the image.
    pub pad_records: bool,
    /// Features stream as k-bit codes with this scaling; the data must then hold their
    /// dequantised values ([`Quant::quantise`]).
    pub quant: Option<Quant>,
}

/// Where one engine's data and model live.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SgdIo {
    /// Engine index.
    pub engine: u32,
    /// Memory word in bytes.
    pub word_bytes: u64,
    /// Device channel of the dataset image.
    pub channel: u32,
    /// Byte address of the dataset image.
    pub data_base: u64,
    /// Byte address of the model's on-chip region.
    pub model_base: u64,
}

/// Element type of a model as stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ModelElem {
    /// IEEE binary32.
    F32,
    /// IEEE binary64.
    F64,
    /// Signed fixed point in a little-endian integer of `bits` bits.
    Fixed {
        /// Storage width (8, 16, 32 or 64).
        bits: u32,
        /// Q format.
        q: QFormat,
    },
}

/// A model: d weights then the bias (when there is one).
#[derive(Debug, Clone, PartialEq)]
pub enum Model {
    /// `f32` weights.
    F32(Vec<f32>),
    /// `f64` weights.
    F64(Vec<f64>),
    /// Fixed-point integers.
    Fixed(Vec<i64>, ModelElem),
}

impl Model {
    /// The element type.
    pub fn elem(&self) -> ModelElem {
        match self {
            Model::F32(_) => ModelElem::F32,
            Model::F64(_) => ModelElem::F64,
            Model::Fixed(_, e) => *e,
        }
    }

    /// The weights as reals.
    pub fn to_f64(&self) -> Vec<f64> {
        match self {
            Model::F32(v) => v.iter().map(|&x| f64::from(x)).collect(),
            Model::F64(v) => v.clone(),
            Model::Fixed(v, e) => {
                let f = match e {
                    ModelElem::Fixed { q, .. } => q.frac_bits,
                    _ => 0,
                };
                v.iter()
                    .map(|&x| x as f64 / libm::exp2(f64::from(f)))
                    .collect()
            }
        }
    }

    /// The on-chip layout: elements in order, little-endian, no padding.
    pub fn to_bytes(&self) -> Vec<u8> {
        match self {
            Model::F32(v) => v.iter().flat_map(|x| x.to_le_bytes()).collect(),
            Model::F64(v) => v.iter().flat_map(|x| x.to_le_bytes()).collect(),
            Model::Fixed(v, ModelElem::Fixed { bits, .. }) => {
                let b = (*bits / 8) as usize;
                v.iter()
                    .flat_map(|x| x.to_le_bytes()[..b].to_vec())
                    .collect()
            }
            Model::Fixed(v, _) => v.iter().flat_map(|x| x.to_le_bytes()).collect(),
        }
    }
}

/// Saturation or wrap events, by where they happened.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct OverflowCounts {
    /// Converting the input data to the data format.
    pub data: u64,
    /// Dot-product accumulator.
    pub dot: u64,
    /// Gradient accumulators (and the per-sample gradient scalar).
    pub grad: u64,
    /// Model updates (and averaging).
    pub model: u64,
}

impl std::ops::AddAssign for OverflowCounts {
    fn add_assign(&mut self, o: OverflowCounts) {
        self.data += o.data;
        self.dot += o.dot;
        self.grad += o.grad;
        self.model += o.model;
    }
}

/// One engine's golden outputs.
#[derive(Debug, Clone, PartialEq)]
pub struct SgdEngineResult {
    /// Engine index.
    pub engine: u32,
    /// The final model.
    pub model: Model,
    /// The model after every epoch (after averaging, in averaging mode).
    pub epoch_models: Vec<Model>,
    /// The model after each of the first M minibatches (before any averaging).
    pub snapshots: Vec<Model>,
    /// Loss per epoch (see the README for its definition).
    pub losses: Vec<f64>,
    /// Feature and label bytes read from device memory per epoch (records' split).
    pub feature_bytes: Vec<u64>,
    /// Label bytes read per epoch.
    pub label_bytes: Vec<u64>,
    /// Traffic of this engine.
    pub ledger: Ledger,
    /// Saturation or wrap events (fixed point).
    pub overflow: OverflowCounts,
}

/// A bad dataset or parameter set, or a run that diverged.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SgdError {
    /// A NaN or infinity in the data.
    #[error("row {row}, column {column}: {value} is not a finite number")]
    NotFinite {
        /// Row.
        row: usize,
        /// Column (d = the label).
        column: usize,
        /// The value.
        value: f32,
    },
    /// The model and the data disagree on d.
    #[error("the data has {data} features but the parameters expect {expected}")]
    FeatureCount {
        /// Features in the data.
        data: usize,
        /// Features expected.
        expected: usize,
    },
    /// A classification label outside its set.
    #[error("row {row}: label {value} is not in {allowed} as the {loss} loss needs")]
    Label {
        /// Row.
        row: usize,
        /// The label.
        value: f32,
        /// The loss.
        loss: &'static str,
        /// The allowed set.
        allowed: &'static str,
    },
    /// A Q format that does not fit 64 bits.
    #[error("{what} format {q} needs {bits} bits with the sign, more than 64")]
    QFormat {
        /// Which format.
        what: &'static str,
        /// The format.
        q: QFormat,
        /// Bits needed.
        bits: u32,
    },
    /// Training diverged.
    #[error("engine {engine} diverged in epoch {epoch}: {why}")]
    Diverged {
        /// Engine.
        engine: u32,
        /// Epoch (0-based).
        epoch: u32,
        /// What was seen.
        why: String,
    },
    /// The capacity cannot hold one record.
    #[error("capacity {capacity} bytes is smaller than one record of {record} bytes")]
    Capacity {
        /// Capacity in bytes.
        capacity: u64,
        /// Record bytes.
        record: u64,
    },
    /// A missing or mistyped column.
    #[error("{0}")]
    Column(String),
    /// Any other parameter out of range.
    #[error("{0}")]
    Param(String),
}

/// Checks `data` against `params` and `expected_dims` (when the job states d).
pub fn validate(
    data: &SgdData,
    params: &SgdParams,
    expected_dims: Option<usize>,
) -> Result<(), SgdError> {
    let (n, d) = (data.rows(), data.dims());
    if let Some(e) = expected_dims.filter(|&e| e != d) {
        return Err(SgdError::FeatureCount {
            data: d,
            expected: e,
        });
    }
    if data.labels.len() != n {
        return Err(SgdError::Param(format!(
            "{} labels for {n} rows",
            data.labels.len()
        )));
    }
    for (r, row) in data.features.rows().into_iter().enumerate() {
        if let Some((c, &v)) = row.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(SgdError::NotFinite {
                row: r,
                column: c,
                value: v,
            });
        }
        let y = data.labels[r];
        if !y.is_finite() {
            return Err(SgdError::NotFinite {
                row: r,
                column: d,
                value: y,
            });
        }
        let (ok, allowed) = match params.loss {
            Loss::Squared => (true, ""),
            Loss::Logistic => (y == 0.0 || y == 1.0, "{0, 1}"),
            Loss::Hinge => (y == -1.0 || y == 1.0, "{-1, +1}"),
        };
        if !ok {
            return Err(SgdError::Label {
                row: r,
                value: y,
                loss: params.loss.name(),
                allowed,
            });
        }
    }
    if n == 0 || params.batch == 0 || params.batch > n {
        return Err(SgdError::Param(format!(
            "minibatch size {} must be within 1..={n}",
            params.batch
        )));
    }
    if params.epochs == 0 || params.block_epochs == 0 || params.engines.engines() == 0 {
        return Err(SgdError::Param(
            "epochs, block epochs and engines must be at least 1".into(),
        ));
    }
    let hypers: Vec<Hyper> = match &params.engines {
        EngineMode::Independent { sweep } => sweep.clone(),
        EngineMode::Averaging { .. } => vec![params.hyper],
    };
    for h in &hypers {
        let ok = |v: f64| v.is_finite() && v >= 0.0;
        if !(ok(h.step.eta) && ok(h.step.decay) && ok(h.l2)) {
            return Err(SgdError::Param(format!(
                "step {}, decay {} and l2 {} must be finite and non-negative",
                h.step.eta, h.step.decay, h.l2
            )));
        }
    }
    if let EngineMode::Averaging { engines } = params.engines {
        if engines as usize > n {
            return Err(SgdError::Param(format!(
                "{engines} averaging engines for {n} rows"
            )));
        }
    }
    match &params.numeric {
        Numeric::F64 { lanes } | Numeric::F32 { lanes, .. } => {
            if !lanes.is_power_of_two() || *lanes > super::tree::MAX_LANES {
                return Err(SgdError::Param(format!(
                    "adder-tree lanes {lanes} must be a power of two up to {}",
                    super::tree::MAX_LANES
                )));
            }
        }
        Numeric::Fixed(f) => f.validate(params, &hypers)?,
    }
    if let Some(q) = &params.quant {
        if matches!(params.numeric, Numeric::Fixed(_)) {
            return Err(SgdError::Param(
                "k-bit codes dequantise to f32: fixed point reads Q-format data instead".into(),
            ));
        }
        q.check(data)?;
    }
    Ok(())
}
