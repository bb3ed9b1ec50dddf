//! Typed columns and tables, and their file forms: CSV with a header, raw little-endian
//! binary and NumPy `.npy` (one 1-D array per column).
//!
//! The byte form of a column is the one every memory image starts from: elements in row
//! order, each little-endian; sub-byte elements packed LSB-first (row 0 in bit 0 of byte 0).

mod column;
mod csv_io;
mod types;

pub use column::{Column, ColumnData, Table};
pub use csv_io::{parse_q, read_csv, read_csv_from, write_csv};
pub use types::{Elem, ElemType, QFormat};

use crate::error::{Error, Result};

/// Appends the little-endian byte form of rows `range` of `col` to `out`.
///
/// For sub-byte columns `range.start` must be a multiple of the values per byte, so the
/// packed bytes do not straddle the start (layout guarantees this for partitions).
pub fn column_bytes(col: &Column, range: std::ops::Range<usize>, out: &mut Vec<u8>) {
    if col.ty.is_sub_byte() {
        if let ColumnData::U8(v) = &col.data {
            pack_sub_byte(&v[range], col.ty.bits(), out);
        }
        return;
    }
    crate::with_column_data!(&col.data, v => {
        out.reserve(range.len() * (col.ty.bits() as usize / 8));
        for &x in &v[range] {
            x.put_le(out);
        }
    })
}

/// Packs values of `bits` bits (1, 2 or 4) LSB-first into bytes.
pub fn pack_sub_byte(values: &[u8], bits: u32, out: &mut Vec<u8>) {
    let per = (8 / bits) as usize;
    for group in values.chunks(per) {
        let mut b = 0u8;
        for (i, &x) in group.iter().enumerate() {
            b |= x << (i as u32 * bits);
        }
        out.push(b);
    }
}

/// Decodes `rows` elements of type `ty` from their byte form.
pub fn column_from_bytes(ty: ElemType, bytes: &[u8], rows: usize) -> ColumnData {
    if ty.is_sub_byte() {
        let bits = ty.bits();
        let mask = ((1u16 << bits) - 1) as u8;
        let per = (8 / bits) as usize;
        let v = (0..rows)
            .map(|r| (bytes[r / per] >> ((r % per) as u32 * bits)) & mask)
            .collect();
        return ColumnData::U8(v);
    }
    let mut data = ColumnData::with_capacity(ty, rows);
    let n = (ty.bits() / 8) as usize;
    crate::with_column_data!(&mut data, v => decode_into(v, &bytes[..rows * n]));
    data
}

fn decode_into<T: Elem>(v: &mut Vec<T>, bytes: &[u8]) {
    v.extend(bytes.chunks_exact(T::BYTES).map(T::get_le));
}

/// Byte length of `rows` elements of `ty` in byte form.
pub fn byte_len(ty: ElemType, rows: u64) -> u64 {
    (rows * u64::from(ty.bits())).div_ceil(8)
}

/// Reads a raw little-endian binary column file of type `ty`.
pub fn read_bin_column(path: &std::path::Path, name: &str, ty: ElemType) -> Result<Column> {
    let bytes = std::fs::read(path).map_err(|e| Error::read(path, e))?;
    if ty.is_sub_byte() {
        return Err(Error::input(format!(
            "{}: raw binary columns of sub-byte type {ty} have no row count; use CSV or .npy",
            path.display()
        )));
    }
    let eb = (ty.bits() / 8) as usize;
    if bytes.len() % eb != 0 {
        return Err(Error::input(format!(
            "{}: {} bytes is not a whole number of {ty} values ({eb} bytes each)",
            path.display(),
            bytes.len()
        )));
    }
    let rows = bytes.len() / eb;
    Column::new(name, ty, column_from_bytes(ty, &bytes, rows)).map_err(Error::input)
}

/// The raw little-endian binary form of a whole column.
pub fn bin_column_bytes(col: &Column) -> Vec<u8> {
    let mut out = Vec::new();
    column_bytes(col, 0..col.len(), &mut out);
    out
}

/// Writes `col` as a 1-D `.npy` array (sub-byte types one value per `|u1`).
pub fn write_npy_column<W: std::io::Write>(w: &mut W, col: &Column) -> std::io::Result<()> {
    let mut data = Vec::new();
    if col.ty.is_sub_byte() {
        if let ColumnData::U8(v) = &col.data {
            data.extend_from_slice(v);
        }
    } else {
        column_bytes(col, 0..col.len(), &mut data);
    }
    crate::npy::write_npy(w, col.ty.npy_descr(), &[col.len() as u64], &data)
}

/// Reads a 1-D `.npy` column. With `ty` given, the file's dtype must agree with it
/// (a sub-byte type expects `|u1` and checks every value fits).
pub fn read_npy_column(path: &std::path::Path, name: &str, ty: Option<ElemType>) -> Result<Column> {
    let bytes = std::fs::read(path).map_err(|e| Error::read(path, e))?;
    npy_column_from_bytes(&bytes, path, name, ty)
}

/// A 1-D `.npy` column from the file's bytes, as [`read_npy_column`] reads it; `path` names
/// it in errors.
pub fn npy_column_from_bytes(
    bytes: &[u8],
    path: &std::path::Path,
    name: &str,
    ty: Option<ElemType>,
) -> Result<Column> {
    let (header, data) = crate::npy::read_npy(bytes)
        .map_err(|e| Error::input(format!("{}: {e}", path.display())))?;
    if header.shape.len() != 1 {
        return Err(Error::input(format!(
            "{}: a column needs a 1-D array, found shape {:?}",
            path.display(),
            header.shape
        )));
    }
    let file_ty = ElemType::from_npy_descr(&header.descr).ok_or_else(|| {
        Error::input(format!(
            "{}: dtype `{}` is not a column type",
            path.display(),
            header.descr
        ))
    })?;
    let ty = match ty {
        Some(t) if t.npy_descr() == file_ty.npy_descr() => t,
        Some(t) => {
            return Err(Error::input(format!(
                "{}: dtype `{}` does not match column type {t} (expected `{}`)",
                path.display(),
                header.descr,
                t.npy_descr()
            )))
        }
        None => file_ty,
    };
    let rows = header.shape[0] as usize;
    let col_data = if ty.is_sub_byte() {
        ColumnData::U8(data.to_vec())
    } else {
        column_from_bytes(ty, data, rows)
    };
    Column::new(name, ty, col_data).map_err(|e| Error::input(format!("{}: {e}", path.display())))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sub_byte_packs_lsb_first() {
        // Row 0 in the least-significant bits: common practice for packed bit vectors.
        let mut out = Vec::new();
        pack_sub_byte(&[1, 0, 1, 1, 0, 0, 0, 1, 1], 1, &mut out);
        assert_eq!(out, vec![0b1000_1101, 0b0000_0001]);
        let mut out = Vec::new();
        pack_sub_byte(&[0x3, 0x1, 0x2], 2, &mut out);
        assert_eq!(out, vec![0b10_01_11]);
        let back = column_from_bytes(ElemType::U2, &out, 3);
        assert_eq!(back, ColumnData::U8(vec![3, 1, 2]));
    }

    #[test]
    fn whole_byte_round_trip() {
        let col = Column::new(
            "x",
            ElemType::I16,
            ColumnData::I16(vec![-1, 2, i16::MIN, i16::MAX]),
        )
        .unwrap();
        let bytes = bin_column_bytes(&col);
        assert_eq!(bytes[..2], [0xff, 0xff]);
        assert_eq!(column_from_bytes(ElemType::I16, &bytes, 4), col.data);
    }
}
