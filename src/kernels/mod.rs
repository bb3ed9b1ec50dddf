//! The kernels: they compute results and count their traffic into a ledger. They know
//! tables, layout and the ledger, never file formats or the terminal. Each kernel plugs
//! into the runner through the seam in [`seam`]; [`KernelConfig`] is the one list of them.

pub mod hints;
pub mod isa;
pub mod join;
pub mod predicate;
pub mod scan;
pub mod seam;
pub mod sgd;

use std::sync::Arc;

use serde::{Deserialize, Serialize};

use crate::error::Result;
use crate::kernels::seam::{Kernel, TableSchema};

use crate::kernels::predicate::Value;
use crate::table::{Column, ColumnData};

/// Row `r` of `col` as a predicate value (for the row-at-a-time oracles).
pub fn value_at(col: &Column, r: usize) -> Value {
    match &col.data {
        ColumnData::U8(v) => Value::U(u64::from(v[r])),
        ColumnData::U16(v) => Value::U(u64::from(v[r])),
        ColumnData::U32(v) => Value::U(u64::from(v[r])),
        ColumnData::U64(v) => Value::U(v[r]),
        ColumnData::I8(v) => Value::I(i64::from(v[r])),
        ColumnData::I16(v) => Value::I(i64::from(v[r])),
        ColumnData::I32(v) => Value::I(i64::from(v[r])),
        ColumnData::I64(v) => Value::I(v[r]),
        ColumnData::F32(v) => Value::F(f64::from(v[r])),
        ColumnData::F64(v) => Value::F(v[r]),
    }
}

/// The `[kernel]` table of a job, selected by its `name` key: the registry of kernels.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(tag = "name", rename_all = "lowercase")]
pub enum KernelConfig {
    /// Predicate scan.
    Scan(scan::ScanConfig),
    /// Blocked build/probe hash join.
    Join(join::JoinConfig),
    /// Minibatch linear SGD.
    Sgd(sgd::SgdConfig),
}

impl KernelConfig {
    /// Binds the configuration against the job's input tables.
    pub fn bind(&self, tables: &[TableSchema]) -> Result<Arc<dyn Kernel>> {
        Ok(match self {
            KernelConfig::Scan(c) => Arc::new(c.bind(tables)?),
            KernelConfig::Join(c) => Arc::new(c.bind(tables)?),
            KernelConfig::Sgd(c) => Arc::new(c.bind(tables)?),
        })
    }
}
