//! Seeded generators of input tables. A generator yields any row range of its table on
//! demand, so a run generates partition by partition and never holds the whole table; the
//! values of a row do not depend on how the table is partitioned.

pub mod columns;
pub mod join;
pub mod rng;
pub mod sgd;
pub mod telemetry;

pub use columns::{ColumnGen, Dist, Skew};
pub use sgd::{SamplesGen, SamplesKeys};

use rayon::prelude::*;

use crate::table::{ElemType, Table};

/// Which table a generator makes.
#[derive(Debug, Clone, PartialEq)]
pub enum Shape {
    /// Independent columns, each with its own distribution.
    Columns(Vec<ColumnGen>),
    /// The demo's wind-farm readings for this many turbines.
    Telemetry {
        /// Number of turbines.
        turbines: u32,
    },
    /// Training samples `x0 … x{d−1}, y` from a seeded linear model (see [`sgd`]), in
    /// `f32` or, with `q`, fixed point.
    Samples {
        /// The model and noise.
        gen: sgd::SamplesGen,
        /// Fixed-point format of every column.
        q: Option<crate::table::QFormat>,
    },
}

/// A seeded table generator.
#[derive(Debug, Clone, PartialEq)]
pub struct TableGen {
    /// Table name (part of every stream's key).
    pub table: String,
    /// Total rows.
    pub rows: u64,
    /// Seed.
    pub seed: u64,
    /// What to generate.
    pub shape: Shape,
}

impl TableGen {
    /// (name, type) of every column.
    pub fn schema(&self) -> Vec<(String, ElemType)> {
        match &self.shape {
            Shape::Columns(cols) => cols.iter().map(|c| (c.name.clone(), c.ty)).collect(),
            Shape::Telemetry { .. } => telemetry::SCHEMA
                .iter()
                .map(|(n, t)| (n.to_string(), *t))
                .collect(),
            Shape::Samples { gen, q } => gen.schema(*q),
        }
    }

    /// Rows `rows` of the table (columns generated in parallel; the result is the same for
    /// any thread count).
    pub fn generate(&self, rows: std::ops::Range<u64>) -> Table {
        match &self.shape {
            Shape::Columns(cols) => {
                let columns = cols
                    .par_iter()
                    .map(|c| c.generate(self.seed, &self.table, self.rows, rows.clone()))
                    .collect();
                Table::new(&self.table, columns).expect("generated columns have equal length")
            }
            Shape::Telemetry { turbines } => {
                telemetry::generate(self.seed, &self.table, *turbines, rows)
            }
            Shape::Samples { gen, q } => gen.table(&self.table, rows, *q),
        }
    }
}
