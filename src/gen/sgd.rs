//! The SGD generator: n samples of d standard-normal features, feature j scaled by
//! `scale[j mod len]`, true weights wⱼ ~ N(0, 1) and bias, and labels from one of three
//! models. Every 4096-row block of every column draws from its own stream
//! (`rng::Stream(seed, "sgd", column, block)`, columns `x0 … x{d−1}` and `y`; the true
//! weights from column `weights`, block 0), so the bytes do not depend on thread count.
//!
//! Labels, with t = w·x + b computed in `f64` in feature order and ε ~ N(0, noise²):
//! regression y = t + ε; logistic y = 1 with probability σ(t) (u < σ(t) for u uniform);
//! margin y = +1 if t + ε ≥ 0 else −1.

use ndarray::{Array1, Array2};
use rayon::prelude::*;

use super::rng::{Stream, BLOCK_ROWS};
use crate::kernels::sgd::{fixed, SgdData};
use crate::table::{Column, ColumnData, ElemType, QFormat, Table};

/// How labels are drawn.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Labels {
    /// y = t + ε.
    Regression,
    /// y ∈ {0, 1}, P(y = 1) = σ(t).
    Logistic,
    /// y = sign(t + ε) ∈ {−1, +1}.
    Margin,
}

impl Labels {
    /// `regression`, `logistic` or `margin`.
    pub fn parse(name: &str) -> Option<Labels> {
        match name {
            "regression" => Some(Labels::Regression),
            "logistic" => Some(Labels::Logistic),
            "margin" => Some(Labels::Margin),
            _ => None,
        }
    }
}

/// Widest fixed-point sample (with the sign): values stay exact through `f32`.
pub const MAX_SAMPLE_BITS: u32 = 24;

/// The keys of a `samples` table, as the job gives them.
#[derive(Debug, Clone, Copy)]
pub struct SamplesKeys<'a> {
    /// Features d.
    pub features: u32,
    /// Label model name.
    pub labels: &'a str,
    /// Noise standard deviation.
    pub noise: f64,
    /// True bias.
    pub bias: f64,
    /// Per-feature scales.
    pub scale: &'a [f64],
    /// Q format of every column, as text.
    pub q: Option<&'a str>,
}

impl SamplesKeys<'_> {
    /// The generator of `rows` samples with `seed`, and its columns' Q format; an error
    /// names the key at fault.
    pub fn build(&self, rows: u64, seed: u64) -> Result<(SamplesGen, Option<QFormat>), String> {
        let labels = Labels::parse(self.labels).ok_or_else(|| {
            format!(
                "samples.labels: `{}` (expected regression, logistic or margin)",
                self.labels
            )
        })?;
        let finite = |v: f64| v.is_finite() && v.abs() <= 1e30;
        if !finite(self.noise)
            || self.noise < 0.0
            || !finite(self.bias)
            || !self.scale.iter().all(|&v| finite(v))
        {
            return Err(
                "samples: noise (non-negative), bias and scale must be finite numbers of at most 1e30"
                    .into(),
            );
        }
        let q = match self.q {
            None => None,
            Some(text) => {
                let q = crate::table::parse_q(text).map_err(|e| format!("samples.q: {e}"))?;
                if fixed::width(q) > MAX_SAMPLE_BITS {
                    return Err(format!(
                        "samples.q = {text}: at most {MAX_SAMPLE_BITS} bits with the sign, so every value is exact in the f32 the trainer reads"
                    ));
                }
                Some(q)
            }
        };
        let gen = SamplesGen {
            rows,
            dims: self.features as usize,
            seed,
            scale: self.scale.to_vec(),
            noise: self.noise,
            bias: self.bias,
            labels,
        };
        Ok((gen, q))
    }
}

/// A seeded SGD dataset.
#[derive(Debug, Clone, PartialEq)]
pub struct SamplesGen {
    /// Samples n.
    pub rows: u64,
    /// Features d.
    pub dims: usize,
    /// Seed.
    pub seed: u64,
    /// Per-feature scales, repeated cyclically.
    pub scale: Vec<f64>,
    /// Noise standard deviation.
    pub noise: f64,
    /// True bias.
    pub bias: f64,
    /// Label model.
    pub labels: Labels,
}

/// The data and the generator's true weights.
#[derive(Debug, Clone, PartialEq)]
pub struct Generated {
    /// The dataset.
    pub data: SgdData,
    /// True weights (d).
    pub weights: Vec<f64>,
    /// True bias.
    pub bias: f64,
}

impl SamplesGen {
    /// The true weights.
    pub fn weights(&self) -> Vec<f64> {
        let mut s = Stream::new(self.seed, "sgd", "weights", 0);
        (0..self.dims).map(|_| s.normal()).collect()
    }

    /// Generates the whole dataset (blocks in parallel, joined in order).
    pub fn generate(&self) -> Generated {
        let w = self.weights();
        let (n, d) = (self.rows as usize, self.dims);
        let blocks: Vec<(Vec<f32>, Vec<f32>)> = (0..self.rows.div_ceil(BLOCK_ROWS))
            .into_par_iter()
            .map(|b| self.block(b, &w))
            .collect();
        let mut x = crate::kernels::hints::huge_vec(n * d);
        let mut y = Vec::with_capacity(n);
        for (bx, by) in blocks {
            x.extend(bx);
            y.extend(by);
        }
        Generated {
            data: SgdData {
                features: Array2::from_shape_vec((n, d), x).expect("n × d values"),
                labels: Array1::from(y),
            },
            weights: w,
            bias: self.bias,
        }
    }

    /// Rows `rows` as a table of columns `x0 … x{d−1}` and `y`: `f32`, or, with `q`, signed
    /// integers of that Q format (nearest-even with saturation, as the fixed-point trainer
    /// enters data), stored in the smallest of 8, 16 or 32 bits. The values of a row do not
    /// depend on the range asked for.
    pub fn table(&self, name: &str, rows: std::ops::Range<u64>, q: Option<QFormat>) -> Table {
        let w = self.weights();
        let d = self.dims;
        let blocks: Vec<(Vec<f32>, Vec<f32>)> = (rows.start / BLOCK_ROWS
            ..rows.end.div_ceil(BLOCK_ROWS))
            .into_par_iter()
            .map(|b| self.block(b, &w))
            .collect();
        let first = (rows.start / BLOCK_ROWS * BLOCK_ROWS) as usize;
        let (lo, hi) = (rows.start as usize - first, rows.end as usize - first);
        let cell = |j: usize, r: usize| -> f32 {
            let (bx, by) = &blocks[r / BLOCK_ROWS as usize];
            let i = r % BLOCK_ROWS as usize;
            if j < d {
                bx[i * d + j]
            } else {
                by[i]
            }
        };
        let columns = (0..=d)
            .map(|j| {
                let name = if j < d { format!("x{j}") } else { "y".into() };
                let vals = (lo..hi).map(|r| cell(j, r));
                let col = match q {
                    None => Column::new(&name, ElemType::F32, ColumnData::F32(vals.collect())),
                    Some(q) => {
                        let (bits, mut over) = (fixed::width(q), 0);
                        let ints = vals
                            .map(|v| fixed::from_real(f64::from(v), q.frac_bits, bits, &mut over));
                        let (ty, data) = match fixed::storage_bits(q) {
                            8 => (
                                ElemType::I8,
                                ColumnData::I8(ints.map(|v| v as i8).collect()),
                            ),
                            16 => (
                                ElemType::I16,
                                ColumnData::I16(ints.map(|v| v as i16).collect()),
                            ),
                            _ => (
                                ElemType::I32,
                                ColumnData::I32(ints.map(|v| v as i32).collect()),
                            ),
                        };
                        Column::new(&name, ty, data).map(|mut c| {
                            c.q = Some(q);
                            c
                        })
                    }
                };
                col.expect("generated columns match their types")
            })
            .collect();
        Table::new(name, columns).expect("generated columns have equal length")
    }

    /// Column names and types of [`SamplesGen::table`].
    pub fn schema(&self, q: Option<QFormat>) -> Vec<(String, ElemType)> {
        let ty = match q.map(fixed::storage_bits) {
            None => ElemType::F32,
            Some(8) => ElemType::I8,
            Some(16) => ElemType::I16,
            Some(_) => ElemType::I32,
        };
        (0..=self.dims)
            .map(|j| {
                (
                    if j < self.dims {
                        format!("x{j}")
                    } else {
                        "y".into()
                    },
                    ty,
                )
            })
            .collect()
    }

    fn block(&self, b: u64, w: &[f64]) -> (Vec<f32>, Vec<f32>) {
        let lo = b * BLOCK_ROWS;
        let len = (self.rows - lo).min(BLOCK_ROWS) as usize;
        let d = self.dims;
        let mut x = vec![0f32; len * d];
        for j in 0..d {
            let mut s = Stream::new(self.seed, "sgd", &format!("x{j}"), b);
            let sc = self
                .scale
                .get(j % self.scale.len().max(1))
                .copied()
                .unwrap_or(1.0);
            for r in 0..len {
                x[r * d + j] = (s.normal() * sc) as f32;
            }
        }
        let mut s = Stream::new(self.seed, "sgd", "y", b);
        let y = (0..len)
            .map(|r| {
                let t = x[r * d..(r + 1) * d]
                    .iter()
                    .zip(w)
                    .fold(self.bias, |a, (&xj, &wj)| a + f64::from(xj) * wj);
                let eps = s.normal() * self.noise;
                let u = s.unit();
                match self.labels {
                    Labels::Regression => (t + eps) as f32,
                    Labels::Logistic => f32::from(u8::from(u < 1.0 / (1.0 + libm::exp(-t)))),
                    Labels::Margin => {
                        if t + eps >= 0.0 {
                            1.0
                        } else {
                            -1.0
                        }
                    }
                }
            })
            .collect();
        (x, y)
    }
}
