//! One pass of one engine over its share of a block: the minibatch loop every trainer
//! runs, the record-read counting, and prefetching ahead of the stream.
//!
//! ```text
//!   share (sample order) ─► minibatch of B ─► predictions z (prefetching rows ahead)
//!                                          └► gradients G += g·x in sample order
//!                        ─► record reads (ledger cursor, one span per run of rows), loss
//!   every B samples ─► update (η_t), model traffic, snapshot (first M)
//! ```

use std::sync::{Arc, Mutex};

use super::fixed::FixedTrainer;
use super::params::*;
use super::real::{self, FloatTrainer};
use super::wide::Wide;
use crate::gen::rng::Stream;
use crate::kernels::isa::Isa;
use crate::ledger::{words_touched, Cursor, Traffic};

/// How far ahead of the current sample its successors' rows are fetched, in bytes: far
/// enough to hide memory latency behind a few samples' arithmetic (common practice for
/// streaming loops; tuned on the bench).
pub(super) const PREFETCH_BYTES: u64 = 2048;

/// The plan shared by all engines.
pub(super) struct Plan<'a> {
    pub(super) data: &'a SgdData,
    pub(super) p: &'a SgdParams,
    pub(super) block_rows: usize,
    pub(super) payload: u64,
    pub(super) stride: u64,
    pub(super) model_bytes: u64,
    pub(super) isa: Isa,
    /// The last pass's sample order, shared by the engines (every engine of a job walks
    /// the same order, each its share of it, so it is drawn once per pass).
    pub(super) last_order: Mutex<Option<(u64, Arc<Vec<usize>>)>>,
}

impl Plan<'_> {
    pub(super) fn blocks(&self) -> usize {
        self.data.rows().div_ceil(self.block_rows)
    }

    /// [`order`] of pass `pass` over `rows`, drawn by the first engine to ask for it;
    /// `None` in input order, which is `rows` itself.
    pub(super) fn order(&self, rows: std::ops::Range<usize>, pass: u64) -> Option<Arc<Vec<usize>>> {
        if matches!(self.p.order, Order::Input) {
            return None;
        }
        let mut last = self.last_order.lock().unwrap_or_else(|e| e.into_inner());
        match &*last {
            Some((at, o)) if *at == pass => Some(o.clone()),
            _ => {
                let o = Arc::new(order(rows, self.p.order, pass));
                *last = Some((pass, o.clone()));
                Some(o)
            }
        }
    }
}

/// The samples one engine's pass takes, in order.
#[derive(Clone, Copy)]
pub(super) enum Share<'a> {
    /// Consecutive rows (input order): no list is made, which would cost a write and a
    /// read of 8 bytes a row beside the data itself.
    Run(usize, usize),
    /// Rows in a drawn order.
    Listed(&'a [usize]),
}

impl Share<'_> {
    fn len(self) -> usize {
        match self {
            Share::Run(a, b) => b - a,
            Share::Listed(s) => s.len(),
        }
    }

    /// The rows at positions `now` and at positions `next`, listed in `buf` for a run.
    fn window<'s>(
        &'s self,
        now: std::ops::Range<usize>,
        next: std::ops::Range<usize>,
        buf: &'s mut Vec<usize>,
    ) -> (&'s [usize], &'s [usize]) {
        match self {
            Share::Listed(s) => (&s[now], &s[next]),
            Share::Run(a, _) => {
                let k = now.len();
                buf.clear();
                buf.extend(now.start + a..now.end + a);
                buf.extend(next.start + a..next.end + a);
                buf.split_at(k)
            }
        }
    }
}

/// The sample order of pass `pass` over `rows`.
pub(crate) fn order(rows: std::ops::Range<usize>, o: Order, pass: u64) -> Vec<usize> {
    let mut v: Vec<usize> = rows.collect();
    if let Order::Shuffle { seed } = o {
        let mut s = Stream::new(seed, "sgd", "order", pass);
        for i in (1..v.len()).rev() {
            let j = s.int_in(0, i as i128) as usize;
            v.swap(i, j);
        }
    }
    v
}

/// Counts one engine's record reads: a cursor runs while reads are consecutive.
pub(super) struct Reads {
    base: u64,
    payload: u64,
    stride: u64,
    word_bytes: u64,
    next: Option<u64>,
    cursor: Cursor,
    done: Traffic,
}

impl Reads {
    pub(super) fn new(base: u64, payload: u64, stride: u64, word_bytes: u64) -> Reads {
        Reads {
            base,
            payload,
            stride,
            word_bytes,
            next: None,
            cursor: Cursor::new(base, word_bytes),
            done: Traffic::default(),
        }
    }

    /// Counts the reads of `count` consecutive records from record `offset_rows` on.
    #[inline]
    fn read(&mut self, offset_rows: u64, count: u64) {
        let addr = self.base + offset_rows * self.stride;
        if self.stride != self.payload {
            for k in 0..count {
                self.done += Traffic {
                    bytes: self.payload,
                    words: words_touched(addr + k * self.stride, self.payload, self.word_bytes),
                    rows: 1,
                };
            }
            return;
        }
        if self.next != Some(addr) {
            self.done +=
                std::mem::replace(&mut self.cursor, Cursor::new(addr, self.word_bytes)).traffic;
        }
        // One span of consecutive records touches the words that touching them one by one
        // would: the cursor counts a word shared by neighbours once either way.
        self.cursor.touch(self.payload * count, count);
        self.next = Some(addr + self.payload * count);
    }

    pub(super) fn take(&mut self) -> Traffic {
        let mut t = std::mem::take(&mut self.done);
        t += std::mem::replace(&mut self.cursor, Cursor::new(self.base, self.word_bytes)).traffic;
        self.next = None;
        t
    }
}

/// What a trainer does per sample and per minibatch (both trainers implement it, so a
/// pass is compiled once per trainer with no dispatch per sample).
pub(super) trait Trains {
    /// Adds the gradients of the samples `mb` in order and returns `loss` plus their
    /// losses (labels `labels`), summed in order in `f64`, prefetching row `ahead[i]`
    /// while sample i is read.
    fn batch<V: Wide>(
        &mut self,
        v: V,
        mb: &[usize],
        ahead: &[usize],
        labels: &[f32],
        loss: f64,
    ) -> f64;
    /// An update's rates from step `eta`, L2 strength `l2` and a minibatch of `batch`.
    type Rates: Copy;
    fn rates(&self, eta: f64, l2: f64, batch: usize) -> Self::Rates;
    /// Applies and clears the minibatch's gradient.
    fn update(&mut self, rates: Self::Rates);
    fn model(&self) -> Model;
}

impl<T: real::Real, const FTZ: bool> Trains for FloatTrainer<'_, T, FTZ> {
    #[inline(always)]
    fn batch<V: Wide>(
        &mut self,
        v: V,
        mb: &[usize],
        ahead: &[usize],
        labels: &[f32],
        loss: f64,
    ) -> f64 {
        FloatTrainer::batch(self, v, mb, ahead, labels, loss)
    }
    type Rates = (T, T);
    #[inline(always)]
    fn rates(&self, eta: f64, l2: f64, batch: usize) -> (T, T) {
        FloatTrainer::rates(self, eta, l2, batch)
    }
    #[inline(always)]
    fn update(&mut self, rates: (T, T)) {
        FloatTrainer::update(self, rates)
    }
    fn model(&self) -> Model {
        FloatTrainer::model(self)
    }
}

impl Trains for Box<FixedTrainer> {
    /// One sample after another: stochastic rounding draws its bits in this order.
    #[inline(always)]
    fn batch<V: Wide>(
        &mut self,
        _: V,
        mb: &[usize],
        ahead: &[usize],
        labels: &[f32],
        loss: f64,
    ) -> f64 {
        let mut loss = loss;
        for (i, &r) in mb.iter().enumerate() {
            if let Some(&next) = ahead.get(i) {
                self.prefetch(next);
            }
            loss += self.loss.value(self.sample(r), f64::from(labels[r]));
        }
        loss
    }
    type Rates = (i128, i128);
    #[inline(always)]
    fn rates(&self, eta: f64, l2: f64, batch: usize) -> (i128, i128) {
        FixedTrainer::rates(eta, l2, batch)
    }
    #[inline(always)]
    fn update(&mut self, rates: (i128, i128)) {
        FixedTrainer::update(self, rates)
    }
    fn model(&self) -> Model {
        FixedTrainer::model(self)
    }
}

/// An epoch's running traffic counts.
pub(super) struct Counts {
    pub(super) reads: Reads,
    pub(super) model_r: Traffic,
    pub(super) model_w: Traffic,
    /// One model's traffic.
    pub(super) model_t: Traffic,
    pub(super) samples: u64,
}

/// The samples of `share` through trainer `t`, minibatch by minibatch: the samples'
/// predictions and gradients, record reads and losses, then one update and (among the
/// first M) a snapshot.
#[inline(always)]
pub(super) fn stream<S: Trains, V: Wide>(
    t: &mut S,
    v: V,
    plan: &Plan,
    share: Share,
    start: usize,
    c: &mut Counts,
    (hyper, updates, snapshots, loss_sum): (&Hyper, &mut u64, &mut Vec<Model>, &mut f64),
) {
    let p = plan.p;
    // Rows shorter than the distance are hinted whole, at least four rows ahead (the
    // predictions take rows in fours, and the hints for a four are issued just before
    // it); longer ones one row ahead, which the float
    // trainer's widest form hints a line per step of the row before's dot product. At
    // 1024 values a row, spreading the hints gained 2–5 % at B = 16 and 15 % at B = 1 over
    // none at all, which in turn beat hinting the row whole by about 8 % at B = 16
    // (measured on the bench).
    let ahead = if plan.stride < PREFETCH_BYTES {
        (PREFETCH_BYTES / plan.stride).max(4) as usize
    } else {
        1
    };
    let labels = plan.data.labels.as_slice().expect("contiguous labels");
    // The running loss in a local, passed through the trainer by value, so it stays in a
    // register.
    let mut loss = *loss_sum;
    let n = share.len();
    let mut buf = Vec::new();
    for k in 0..n.div_ceil(p.batch) {
        let now = k * p.batch..((k + 1) * p.batch).min(n);
        let from = (now.start + ahead).min(n);
        let next = from..(from + now.len()).min(n);
        let (mb, next) = share.window(now, next, &mut buf);
        // The update's rates first: issued here, their divisions are done long before the
        // update waits on them (issued beside the update, they lengthen every minibatch's
        // chain of dependent steps).
        let rates = t.rates(hyper.step.at(*updates), hyper.l2, mb.len());
        loss = t.batch(v, mb, next, labels, loss);
        for run in mb.chunk_by(|a, b| b.checked_sub(*a) == Some(1)) {
            c.reads.read((run[0] - start) as u64, run.len() as u64);
        }
        t.update(rates);
        // Each sample reads the model, and the update reads and writes it.
        c.model_r += c.model_t.times(mb.len() as u64 + 1);
        c.model_w += c.model_t;
        *updates += 1;
        c.samples += mb.len() as u64;
        if snapshots.len() < p.snapshots {
            snapshots.push(t.model());
        }
    }
    *loss_sum = loss;
}
