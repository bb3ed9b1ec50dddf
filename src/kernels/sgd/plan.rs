//! SGD on the kernel seam: what the bound kernel declares to the runner and how one
//! engine's run becomes golden outputs and a ledger.
//!
//! ```text
//!   dataset table (replicated: one row-major record image per engine channel)
//!     record = x0 … x{d−1} then the label, f32 or the data Q format, packed
//!              (or k-bit codes of x0 … x{d−1}, then the f32 label: the kernel's record form)
//!        └─► engine e trains (its sweep entry, or its share with model averaging)
//!              ├─► model   (device region: the final model, read back by the host)
//!              ├─► epochs, batches, loss (on-chip history, no device address)
//!              └─► dequant (with codes: per feature lo and step, the on-chip table)
//! ```
//!
//! The runner writes the dataset image from the table, so the table's columns must already
//! be in the type the engines read: `f32` for the float modes, signed integers carrying the
//! data Q format for fixed point (the `samples` generator writes either). The label is the
//! last column and every other column is a feature, in table order, so the runner's record
//! image is exactly the record the trainer counts. With k-bit codes the kernel encodes the
//! record image itself (its record form) from the table's `f32` features, and every engine
//! trains on the codes' values.

use std::ops::Range;

use super::keys::SgdKernel;
use super::quant::Quant;
use super::record::{payload_bytes, record_bytes, record_shape};
use super::{
    fixed, train, train_engine, EngineMode, Model, ModelElem, Numeric, SgdData, SgdEngineResult,
    SgdIo,
};
use crate::kernels::seam::{
    Arrays, EngineCtx, EngineRun, Field, Golden, Kernel, KernelError, MapParam, MapSection,
    RecordForm, RegionNeed, Share, Sizing, TableUse,
};
use crate::ledger::{Cursor, Direction, Key, Phase};
use crate::table::{ElemType, Table};

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

impl SgdIo {
    /// Whether a ledger counted with `self` counts the same words as one with `o`.
    fn same_offsets(&self, o: &SgdIo) -> bool {
        let wb = self.word_bytes;
        wb == o.word_bytes
            && self.data_base % wb == o.data_base % wb
            && self.model_base % wb == o.model_base % wb
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

    /// The dataset of `rows` as the engines read it: the table's values, or with k-bit
    /// codes their dequantised values and the count of clamped features.
    fn dataset(&self, rows: &Table) -> std::result::Result<(SgdData, u64), KernelError> {
        let features: Vec<usize> = (0..self.dims()).collect();
        let data = SgdData::from_table(rows, &features, self.dims(), &self.table.q)
            .map_err(|e| KernelError(e.to_string()))?;
        match &self.params.quant {
            Some(q) => q
                .quantise(&data)
                .map(|d| (d.data, d.clamped))
                .map_err(|e| KernelError(format!("kernel.quant: {e}"))),
            None => Ok((data, 0)),
        }
    }

    /// The dequantisation table: per feature lo then step, `f32`.
    fn dequant(&self, q: &Quant) -> Golden {
        let bytes: Vec<u8> = q
            .lo()
            .iter()
            .zip(q.step())
            .flat_map(|(l, s)| [l.to_le_bytes(), s.to_le_bytes()].concat())
            .collect();
        Golden {
            name: "dequant".into(),
            region: None,
            records: q.dims() as u64,
            record_bytes: 8,
            elem: "record".into(),
            fields: ["lo", "step"]
                .map(|name| Field {
                    name: name.into(),
                    ty: ElemType::F32,
                })
                .to_vec(),
            arrays: Arrays::PerField,
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
                *engines = ctx.engines;
                let mine = io(ctx.engine);
                let mut last = self.coupled.0.lock().unwrap_or_else(|e| e.into_inner());
                if !last.as_ref().is_some_and(|(at, _)| at.same_offsets(&mine)) {
                    let ios: Vec<SgdIo> = (0..ctx.engines).map(io).collect();
                    *last = Some((mine, train(data, &p, &ios).map_err(|e| e.to_string())?));
                }
                let (at, all) = last.as_ref().expect("trained above");
                let mut r = all[ctx.engine as usize].clone();
                r.ledger = r.ledger.rekeyed(|k| Key {
                    channel: k
                        .channel
                        .map(|c| if c == at.channel { mine.channel } else { c }),
                    ..k
                });
                Ok(r)
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
        let (data, clamped) = self.dataset(rows)?;
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
        if let Some(q) = &self.params.quant {
            outputs.push(self.dequant(q));
        }
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
        if let Some(q) = &self.params.quant {
            note.push_str(&format!(
                "; {}-bit codes, {clamped} features clamped to their range",
                q.bits()
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

    fn record_form(&self, table: &str) -> Option<&dyn RecordForm> {
        (self.params.quant.is_some() && table == self.table.name).then_some(self as _)
    }

    fn map_section(&self) -> Option<MapSection> {
        let p = |name: &str, value: u64| MapParam {
            name: name.into(),
            bits: 32,
            signed: false,
            value: i128::from(value),
        };
        let d = self.dims() as u64;
        let mut params = vec![
            p("SGD_FEATURES", d),
            p("SGD_RECORD_BYTES", payload_bytes(self.dims(), &self.params)),
            p("SGD_MODEL_BYTES", self.model_bytes()),
            p("SGD_BATCH", self.config.batch),
            p("SGD_EPOCHS", u64::from(self.params.epochs)),
        ];
        let mut json = serde_json::json!({
            "features": d,
            "bias": self.params.bias,
            "numeric": self.config.numeric,
            "loss": self.config.loss,
            "engines": self.config.engines,
        });
        let mut comment =
            "SGD: features per record, record and model bytes, minibatch size, epochs".to_string();
        if let Some(q) = &self.params.quant {
            comment.push_str(
                "; k-bit codes: bits per code, code bytes per record (the label's offset), then per feature j the f32 bit patterns of lo and step (x = lo + q*step)",
            );
            params.push(p("SGD_QUANT_BITS", u64::from(q.bits())));
            params.push(p("SGD_QUANT_CODE_BYTES", q.code_bytes()));
            for (j, (l, s)) in q.lo().iter().zip(q.step()).enumerate() {
                params.push(p(&format!("SGD_QUANT_LO_{j}"), u64::from(l.to_bits())));
                params.push(p(&format!("SGD_QUANT_STEP_{j}"), u64::from(s.to_bits())));
            }
            let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<u32>>();
            json["quant"] = serde_json::json!({
                "bits": q.bits(),
                "code_bytes": q.code_bytes(),
                "lo": q.lo(),
                "hi": q.hi(),
                "step": q.step(),
                "lo_f32_bits": bits(q.lo()),
                "step_f32_bits": bits(q.step()),
            });
        }
        Some(MapSection {
            comment,
            params,
            json: vec![("sgd".into(), json)],
        })
    }

    fn host_variant(&self) -> &'static str {
        crate::kernels::isa::Isa::detect().name()
    }

    fn summary(&self, runs: &[(u64, u64)]) -> Vec<String> {
        let epochs = runs.iter().map(|r| r.1).max().unwrap_or(0);
        let codes = self
            .params
            .quant
            .as_ref()
            .map_or(String::new(), |q| format!(", {}-bit codes", q.bits()));
        vec![format!(
            "sgd: {} engines trained up to {epochs} epochs over {} samples of {} features ({} loss, {}{codes})",
            runs.len(),
            self.table.rows,
            self.dims(),
            self.config.loss,
            self.config.numeric
        )]
    }
}

/// With k-bit codes the record image is the codes of the table's features, then the label.
impl RecordForm for SgdKernel {
    fn record_bytes(&self, word_bytes: u64) -> u64 {
        record_shape(self.dims(), &self.params, word_bytes).1
    }

    fn encode(&self, rows: &Table, word_bytes: u64) -> std::result::Result<Vec<u8>, KernelError> {
        let (data, _) = self.dataset(rows)?;
        Ok(record_bytes(&data, &self.params, word_bytes))
    }
}
