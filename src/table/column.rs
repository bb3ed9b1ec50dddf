//! Columns and tables of named columns.
//!
//! Invariant: every column of a [`Table`] has the same length, and a sub-byte column
//! (`u1`/`u2`/`u4`) holds only values below `2^bits`.

use super::types::{ElemType, QFormat};

/// The values of one column, one variant per Rust storage type.
#[derive(Debug, Clone, PartialEq)]
pub enum ColumnData {
    U8(Vec<u8>),
    U16(Vec<u16>),
    U32(Vec<u32>),
    U64(Vec<u64>),
    I8(Vec<i8>),
    I16(Vec<i16>),
    I32(Vec<i32>),
    I64(Vec<i64>),
    F32(Vec<f32>),
    F64(Vec<f64>),
}

/// Runs `$body` with `$v` bound to the typed `Vec` (or slice) inside a [`ColumnData`].
#[macro_export]
macro_rules! with_column_data {
    ($data:expr, $v:ident => $body:expr) => {
        match $data {
            $crate::table::ColumnData::U8($v) => $body,
            $crate::table::ColumnData::U16($v) => $body,
            $crate::table::ColumnData::U32($v) => $body,
            $crate::table::ColumnData::U64($v) => $body,
            $crate::table::ColumnData::I8($v) => $body,
            $crate::table::ColumnData::I16($v) => $body,
            $crate::table::ColumnData::I32($v) => $body,
            $crate::table::ColumnData::I64($v) => $body,
            $crate::table::ColumnData::F32($v) => $body,
            $crate::table::ColumnData::F64($v) => $body,
        }
    };
}

impl ColumnData {
    /// An empty vector of the storage type of `ty`, with room for `cap` values.
    pub fn with_capacity(ty: ElemType, cap: usize) -> ColumnData {
        match ty {
            ElemType::U1 | ElemType::U2 | ElemType::U4 | ElemType::U8 => {
                ColumnData::U8(Vec::with_capacity(cap))
            }
            ElemType::U16 => ColumnData::U16(Vec::with_capacity(cap)),
            ElemType::U32 => ColumnData::U32(Vec::with_capacity(cap)),
            ElemType::U64 => ColumnData::U64(Vec::with_capacity(cap)),
            ElemType::I8 => ColumnData::I8(Vec::with_capacity(cap)),
            ElemType::I16 => ColumnData::I16(Vec::with_capacity(cap)),
            ElemType::I32 => ColumnData::I32(Vec::with_capacity(cap)),
            ElemType::I64 => ColumnData::I64(Vec::with_capacity(cap)),
            ElemType::F32 => ColumnData::F32(Vec::with_capacity(cap)),
            ElemType::F64 => ColumnData::F64(Vec::with_capacity(cap)),
        }
    }

    /// Number of values.
    pub fn len(&self) -> usize {
        with_column_data!(self, v => v.len())
    }

    /// True when there are no values.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// A copy of the values in `range`.
    pub fn slice(&self, range: std::ops::Range<usize>) -> ColumnData {
        match self {
            ColumnData::U8(v) => ColumnData::U8(v[range].to_vec()),
            ColumnData::U16(v) => ColumnData::U16(v[range].to_vec()),
            ColumnData::U32(v) => ColumnData::U32(v[range].to_vec()),
            ColumnData::U64(v) => ColumnData::U64(v[range].to_vec()),
            ColumnData::I8(v) => ColumnData::I8(v[range].to_vec()),
            ColumnData::I16(v) => ColumnData::I16(v[range].to_vec()),
            ColumnData::I32(v) => ColumnData::I32(v[range].to_vec()),
            ColumnData::I64(v) => ColumnData::I64(v[range].to_vec()),
            ColumnData::F32(v) => ColumnData::F32(v[range].to_vec()),
            ColumnData::F64(v) => ColumnData::F64(v[range].to_vec()),
        }
    }

    /// Appends the values of `other`, which must have the same storage type.
    pub fn append(&mut self, other: &ColumnData) {
        match (self, other) {
            (ColumnData::U8(a), ColumnData::U8(b)) => a.extend_from_slice(b),
            (ColumnData::U16(a), ColumnData::U16(b)) => a.extend_from_slice(b),
            (ColumnData::U32(a), ColumnData::U32(b)) => a.extend_from_slice(b),
            (ColumnData::U64(a), ColumnData::U64(b)) => a.extend_from_slice(b),
            (ColumnData::I8(a), ColumnData::I8(b)) => a.extend_from_slice(b),
            (ColumnData::I16(a), ColumnData::I16(b)) => a.extend_from_slice(b),
            (ColumnData::I32(a), ColumnData::I32(b)) => a.extend_from_slice(b),
            (ColumnData::I64(a), ColumnData::I64(b)) => a.extend_from_slice(b),
            (ColumnData::F32(a), ColumnData::F32(b)) => a.extend_from_slice(b),
            (ColumnData::F64(a), ColumnData::F64(b)) => a.extend_from_slice(b),
            (a, b) => panic!(
                "append of mismatched column storage ({} values onto {})",
                b.len(),
                a.len()
            ),
        }
    }
}

/// One named, typed column.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// Column name, unique in its table.
    pub name: String,
    /// Element type (for sub-byte types the storage is `u8`).
    pub ty: ElemType,
    /// Fixed-point interpretation of a signed integer column, if any.
    pub q: Option<QFormat>,
    /// The values.
    pub data: ColumnData,
}

impl Column {
    /// A column from its parts; checks that storage matches `ty` and sub-byte values fit.
    pub fn new(name: &str, ty: ElemType, data: ColumnData) -> Result<Column, String> {
        let want = ColumnData::with_capacity(ty, 0);
        if std::mem::discriminant(&want) != std::mem::discriminant(&data) {
            return Err(format!("column `{name}`: storage does not match type {ty}"));
        }
        if ty.is_sub_byte() {
            if let ColumnData::U8(v) = &data {
                let limit = 1u16 << ty.bits();
                if let Some(i) = v.iter().position(|&x| u16::from(x) >= limit) {
                    return Err(format!(
                        "column `{name}`, row {i}: value {} does not fit {ty}",
                        v[i]
                    ));
                }
            }
        }
        Ok(Column {
            name: name.to_string(),
            ty,
            q: None,
            data,
        })
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.data.len()
    }

    /// True when the column has no rows.
    pub fn is_empty(&self) -> bool {
        self.data.is_empty()
    }

    /// Rows `range` as a new column with the same name, type and metadata.
    pub fn slice(&self, range: std::ops::Range<usize>) -> Column {
        Column {
            name: self.name.clone(),
            ty: self.ty,
            q: self.q,
            data: self.data.slice(range),
        }
    }
}

/// A named table: columns of equal length.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// Table name (used in file names and the manifest).
    pub name: String,
    /// The columns, in schema order.
    pub columns: Vec<Column>,
}

impl Table {
    /// A table from columns of equal length and distinct names.
    pub fn new(name: &str, columns: Vec<Column>) -> Result<Table, String> {
        if let Some(first) = columns.first() {
            for c in &columns {
                if c.len() != first.len() {
                    return Err(format!(
                        "table `{name}`: column `{}` has {} rows but `{}` has {}",
                        c.name,
                        c.len(),
                        first.name,
                        first.len()
                    ));
                }
            }
        }
        for (i, c) in columns.iter().enumerate() {
            if columns[..i].iter().any(|d| d.name == c.name) {
                return Err(format!("table `{name}`: column `{}` appears twice", c.name));
            }
        }
        Ok(Table {
            name: name.to_string(),
            columns,
        })
    }

    /// Number of rows (0 for a table without columns).
    pub fn rows(&self) -> usize {
        self.columns.first().map_or(0, Column::len)
    }

    /// The column called `name`.
    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|c| c.name == name)
    }

    /// (name, type) of every column, in order.
    pub fn schema(&self) -> Vec<(String, ElemType)> {
        self.columns
            .iter()
            .map(|c| (c.name.clone(), c.ty))
            .collect()
    }

    /// Rows `range` as a new table.
    pub fn slice(&self, range: std::ops::Range<usize>) -> Table {
        Table {
            name: self.name.clone(),
            columns: self
                .columns
                .iter()
                .map(|c| c.slice(range.clone()))
                .collect(),
        }
    }
}
