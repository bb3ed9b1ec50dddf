//! Running engines: passes, minibatches, block-wise loading, averaging, snapshots, loss
//! per epoch, divergence, and the ledger as the engines touch memory.
//!
//! ```text
//!   epoch e ─┬─ block b (rows [b·R, (b+1)·R)) ── load[k] over the host link
//!            │    └─ block_epochs passes: order (input / shuffle of pass p)
//!            │         └─ engine's share ─► minibatches of B ─► update, snapshot
//!            └─ end: (averaging) mean of the engines' models; loss; divergence check
//! ```
//! Engines of an epoch run in parallel and are collected in index order; nothing inside
//! an engine is parallel, so results do not depend on the thread count.

use rayon::prelude::*;

use super::fixed::{self, FixedTrainer};
use super::params::*;
use super::pass::{stream, Counts, Plan, Reads, Share};
use super::real::{self, FloatTrainer};
use super::record::{field_bytes, record_shape};
use super::wide::{self, Wide};
use crate::kernels::isa::{Isa, Level};
use crate::ledger::{words_touched, Direction, Key, Ledger, Phase, Region, Traffic};

/// Loss above this many times the zero model's loss (or 1, if larger) is divergence.
pub const BLOW_UP: f64 = 1e6;

enum Trainer<'a> {
    F32(FloatTrainer<'a, f32, false>),
    F32Ftz(FloatTrainer<'a, f32, true>),
    F64(FloatTrainer<'a, f64, false>),
    Fixed(Box<FixedTrainer>),
}

macro_rules! each {
    ($t:expr, $v:ident => $e:expr) => {
        match $t {
            Trainer::F32($v) => $e,
            Trainer::F32Ftz($v) => $e,
            Trainer::F64($v) => $e,
            Trainer::Fixed($v) => $e,
        }
    };
}

impl<'a> Trainer<'a> {
    fn new(data: &'a SgdData, p: &SgdParams) -> Trainer<'a> {
        match p.numeric {
            Numeric::F32 { lanes, ftz: false } => {
                Trainer::F32(FloatTrainer::new(data, p.loss, lanes, p.bias))
            }
            Numeric::F32 { lanes, ftz: true } => {
                Trainer::F32Ftz(FloatTrainer::new(data, p.loss, lanes, p.bias))
            }
            Numeric::F64 { lanes } => Trainer::F64(FloatTrainer::new(data, p.loss, lanes, p.bias)),
            Numeric::Fixed(spec) => {
                Trainer::Fixed(Box::new(FixedTrainer::new(data, spec, p.loss, p.bias)))
            }
        }
    }
    fn model(&self) -> Model {
        each!(self, t => t.model())
    }
}

/// One engine's state across epochs.
struct Engine<'a> {
    index: u32,
    io: SgdIo,
    hyper: Hyper,
    trainer: Trainer<'a>,
    updates: u64,
    snapshots: Vec<Model>,
    epoch_models: Vec<Model>,
    losses: Vec<f64>,
    /// Σ ℓ over this epoch's samples and their count.
    loss_sum: f64,
    samples: u64,
    feature_bytes: Vec<u64>,
    label_bytes: Vec<u64>,
    ledger: Ledger,
}

impl Engine<'_> {
    /// One epoch over every block (its share of each pass when `share` = (k, E)).
    fn epoch(&mut self, plan: &Plan, e: u32, share: (usize, usize)) {
        let p = plan.p;
        let (d, wb) = (plan.data.dims() as u64, self.io.word_bytes);
        let phase = Phase::nth("epoch", e);
        let mut c = Counts {
            reads: Reads::new(self.io.data_base, plan.payload, plan.stride, wb),
            model_r: Traffic::default(),
            model_w: Traffic::default(),
            model_t: Traffic {
                bytes: plan.model_bytes,
                words: words_touched(self.io.model_base, plan.model_bytes, wb),
                rows: 0,
            },
            samples: 0,
        };
        let (fb, lb) = field_bytes(d as usize, p);
        self.loss_sum = 0.0;
        self.samples = 0;
        let nb = plan.blocks();
        for b in 0..nb {
            let start = b * plan.block_rows;
            let rows = start..(start + plan.block_rows).min(plan.data.rows());
            if nb > 1 || e == 0 {
                let load = Phase::nth("load", if nb > 1 { e * nb as u32 + b as u32 } else { 0 });
                let bytes = rows.len() as u64 * plan.stride;
                let t = Traffic {
                    bytes,
                    words: words_touched(self.io.data_base, bytes, wb),
                    rows: rows.len() as u64,
                };
                self.ledger.add(
                    Key {
                        engine: self.index,
                        phase: load,
                        region: Region::HostLink,
                        channel: None,
                        direction: Direction::Read,
                    },
                    t,
                );
                self.ledger.add(
                    Key::device(self.index, load, self.io.channel, Direction::Write),
                    t,
                );
            }
            for k in 0..p.block_epochs {
                let pass = (u64::from(e) * nb as u64 + b as u64) * u64::from(p.block_epochs)
                    + u64::from(k);
                let drawn = plan.order(rows.clone(), pass);
                let n = rows.len();
                let (lo, hi) = (n * share.0 / share.1, n * (share.0 + 1) / share.1);
                let part = match &drawn {
                    Some(o) => Share::Listed(&o[lo..hi]),
                    None => Share::Run(start + lo, start + hi),
                };
                self.pass(plan, part, start, &mut c);
            }
        }
        let (reads, model_r, model_w, samples) = (c.reads, c.model_r, c.model_w, c.samples);
        self.samples = samples;
        self.feature_bytes.push(samples * fb);
        self.label_bytes.push(samples * lb);
        let mut reads = reads;
        self.ledger.add(
            Key::device(self.index, phase, self.io.channel, Direction::Read),
            reads.take(),
        );
        let key = |direction| Key {
            engine: self.index,
            phase,
            region: Region::OnChip,
            channel: None,
            direction,
        };
        self.ledger.add(key(Direction::Read), model_r);
        self.ledger.add(key(Direction::Write), model_w);
    }

    /// One pass over `share` (rows of the block starting at row `start`), on the widest
    /// instruction set the plan's token allows. Every path runs the same IEEE operations
    /// in the same order (Rust never fuses or reorders float arithmetic), so results are
    /// identical; wider registers only hold more adder-tree lanes at once.
    fn pass(&mut self, plan: &Plan, share: Share, start: usize, c: &mut Counts) {
        match plan.isa.level() {
            #[cfg(target_arch = "x86_64")]
            Level::Avx512 => {
                // SAFETY: an Avx512 token exists only when detection saw every feature
                // `pass_avx512` enables (see `kernels::isa`).
                unsafe { self.pass_avx512(plan, share, start, c) }
            }
            #[cfg(target_arch = "x86_64")]
            Level::Avx2 => {
                // SAFETY: as above, for the features of the Avx2 token.
                unsafe { self.pass_avx2(plan, share, start, c) }
            }
            Level::Portable => self.pass_body(wide::Portable, plan, share, start, c),
        }
    }

    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx512f,avx512bw,avx512vl,bmi1,bmi2,popcnt")]
    unsafe fn pass_avx512(&mut self, plan: &Plan, share: Share, start: usize, c: &mut Counts) {
        let v = wide::Avx512::new(plan.isa).expect("an AVX-512 token");
        self.pass_body(v, plan, share, start, c)
    }

    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2,bmi1,bmi2,popcnt")]
    unsafe fn pass_avx2(&mut self, plan: &Plan, share: Share, start: usize, c: &mut Counts) {
        let v = wide::Avx2::new(plan.isa).expect("an AVX2 token");
        self.pass_body(v, plan, share, start, c)
    }

    #[inline(always)]
    fn pass_body<V: Wide>(
        &mut self,
        v: V,
        plan: &Plan,
        share: Share,
        start: usize,
        c: &mut Counts,
    ) {
        let Engine {
            trainer,
            hyper,
            updates,
            snapshots,
            loss_sum,
            ..
        } = self;
        each!(trainer, t => stream(t, v, plan, share, start, c, (hyper, updates, snapshots, loss_sum)))
    }

    fn finish(mut self, plan: &Plan) -> SgdEngineResult {
        let t = Traffic {
            bytes: plan.model_bytes,
            words: plan.model_bytes.div_ceil(self.io.word_bytes),
            rows: 0,
        };
        let ph = Phase::single("copyback");
        self.ledger.add(
            Key {
                engine: self.index,
                phase: ph,
                region: Region::HostLink,
                channel: None,
                direction: Direction::Write,
            },
            t,
        );
        let overflow = match &self.trainer {
            Trainer::Fixed(f) => f.overflow,
            _ => OverflowCounts::default(),
        };
        SgdEngineResult {
            engine: self.index,
            model: self.trainer.model(),
            epoch_models: self.epoch_models,
            snapshots: self.snapshots,
            losses: self.losses,
            feature_bytes: self.feature_bytes,
            label_bytes: self.label_bytes,
            ledger: self.ledger,
            overflow,
        }
    }
}

/// ½λ‖w‖² over the weights (not the bias).
fn penalty(m: &Model, d: usize, l2: f64) -> f64 {
    0.5 * l2 * m.to_f64()[..d].iter().map(|w| w * w).sum::<f64>()
}

/// Trains every engine; `io[e]` places engine e. Engines of one epoch run in parallel.
pub fn train(
    data: &SgdData,
    p: &SgdParams,
    io: &[SgdIo],
) -> Result<Vec<SgdEngineResult>, SgdError> {
    validate(data, p, None)?;
    train_validated(data, p, io)
}

/// [`train`] for data and parameters that [`validate`] has accepted (so a caller that
/// trains the same data repeatedly checks it once).
pub fn train_validated(
    data: &SgdData,
    p: &SgdParams,
    io: &[SgdIo],
) -> Result<Vec<SgdEngineResult>, SgdError> {
    train_on(Isa::detect(), data, p, io)
}

/// [`train_validated`] with the inner loops compiled for `isa` (every instruction set
/// gives the same bytes; tests run each one the host has).
pub fn train_on(
    isa: Isa,
    data: &SgdData,
    p: &SgdParams,
    io: &[SgdIo],
) -> Result<Vec<SgdEngineResult>, SgdError> {
    let e_count = p.engines.engines();
    if io.len() != e_count {
        return Err(SgdError::Param(format!(
            "{} engine placements for {e_count} engines",
            io.len()
        )));
    }
    let d = data.dims();
    let (payload, stride) = record_shape(d, p, io[0].word_bytes);
    let block_rows = match p.capacity {
        Some(c) if c < stride => {
            return Err(SgdError::Capacity {
                capacity: c,
                record: stride,
            })
        }
        Some(c) => ((c / stride) as usize).min(data.rows()),
        None => data.rows(),
    };
    let m = d + usize::from(p.bias);
    let mbytes = match &p.numeric {
        Numeric::F32 { .. } => 4,
        Numeric::F64 { .. } => 8,
        Numeric::Fixed(s) => u64::from(fixed::storage_bits(s.model) / 8),
    };
    let plan = Plan {
        data,
        p,
        block_rows,
        payload,
        stride,
        model_bytes: m as u64 * mbytes,
        isa,
        last_order: Default::default(),
    };
    let mut engines: Vec<Engine> = (0..e_count)
        .map(|e| Engine {
            index: e as u32,
            io: io[e],
            hyper: match &p.engines {
                EngineMode::Independent { sweep } => sweep[e],
                EngineMode::Averaging { .. } => p.hyper,
            },
            trainer: Trainer::new(data, p),
            updates: 0,
            snapshots: Vec::new(),
            epoch_models: Vec::new(),
            losses: Vec::new(),
            loss_sum: 0.0,
            samples: 0,
            feature_bytes: Vec::new(),
            label_bytes: Vec::new(),
            ledger: Ledger::new(),
        })
        .collect();
    let zero_loss = data
        .labels
        .iter()
        .map(|&y| p.loss.value(0.0, f64::from(y)))
        .sum::<f64>()
        / data.rows() as f64;
    let averaging = matches!(p.engines, EngineMode::Averaging { .. });
    let mut active: Vec<bool> = vec![true; e_count];
    for e in 0..p.epochs {
        engines
            .par_iter_mut()
            .zip(active.par_iter())
            .filter(|(_, a)| **a)
            .for_each(|(en, _)| {
                en.epoch(
                    &plan,
                    e,
                    if averaging {
                        (en.index as usize, e_count)
                    } else {
                        (0, 1)
                    },
                )
            });
        let mut shared = None;
        if averaging {
            let models: Vec<Model> = engines.iter().map(|en| en.trainer.model()).collect();
            let avg = match &p.numeric {
                Numeric::F32 { .. } => real::average::<f32>(&models),
                Numeric::F64 { .. } => real::average::<f64>(&models),
                Numeric::Fixed(_) => fixed::average(&models),
            };
            let sum: f64 = engines.iter().map(|en| en.loss_sum).sum();
            let seen: u64 = engines.iter().map(|en| en.samples).sum();
            for en in &mut engines {
                each!(&mut en.trainer, t => t.set_model(&avg));
            }
            shared = Some(sum / seen as f64);
        }
        for (en, a) in engines
            .iter_mut()
            .zip(active.iter_mut())
            .filter(|(_, a)| **a)
        {
            let model = en.trainer.model();
            let mean = shared.unwrap_or(en.loss_sum / en.samples as f64);
            let loss = mean + penalty(&model, d, en.hyper.l2);
            let finite = model.to_f64().iter().all(|v| v.is_finite());
            if !finite || !loss.is_finite() || loss > BLOW_UP * zero_loss.max(1.0) {
                let why = if finite {
                    format!(
                        "loss {loss:e} exceeds {BLOW_UP:e} times the zero model's {zero_loss:e}"
                    )
                } else {
                    "a weight is not finite".into()
                };
                return Err(SgdError::Diverged {
                    engine: en.index,
                    epoch: e,
                    why,
                });
            }
            if let (Some(tol), Some(&prev)) = (p.tol, en.losses.last()) {
                *a = (prev - loss).abs() > tol;
            }
            en.losses.push(loss);
            en.epoch_models.push(model);
        }
        if averaging && active.iter().any(|a| !a) {
            active.iter_mut().for_each(|a| *a = false);
        }
        if active.iter().all(|a| !a) {
            break;
        }
    }
    Ok(engines.into_iter().map(|en| en.finish(&plan)).collect())
}

/// Trains one engine of an `Independent` sweep alone (the same result as its entry of
/// [`train`]).
pub fn train_engine(
    data: &SgdData,
    p: &SgdParams,
    io: &SgdIo,
) -> Result<SgdEngineResult, SgdError> {
    let EngineMode::Independent { sweep } = &p.engines else {
        return Err(SgdError::Param(
            "averaging engines are coupled: train them together".into(),
        ));
    };
    let h = *sweep
        .get(io.engine as usize)
        .ok_or_else(|| SgdError::Param(format!("no sweep entry for engine {}", io.engine)))?;
    let one = SgdParams {
        engines: EngineMode::Independent { sweep: vec![h] },
        ..p.clone()
    };
    let mut r = train(data, &one, &[SgdIo { engine: 0, ..*io }])?.remove(0);
    r.engine = io.engine;
    r.ledger = r.ledger.rekeyed(|k| Key {
        engine: io.engine,
        ..k
    });
    Ok(r)
}
