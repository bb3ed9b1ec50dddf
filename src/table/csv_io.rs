//! CSV form of a table: a header row of `name`, `name:type` or `name:type:Qi.f` cells, then
//! one line per row. Errors name the file, the line and the column.

use std::path::Path;

use super::column::{Column, ColumnData, Table};
use super::types::{Elem, ElemType, QFormat};
use crate::error::{Error, Result};

/// One header cell: name, optional type, optional fixed-point format.
fn parse_header_cell(
    cell: &str,
) -> std::result::Result<(String, Option<ElemType>, Option<QFormat>), String> {
    let mut parts = cell.trim().split(':');
    let name = parts.next().unwrap_or("").to_string();
    if name.is_empty() {
        return Err("empty column name in header".into());
    }
    let ty = parts.next().map(str::parse::<ElemType>).transpose()?;
    let q = parts.next().map(parse_q).transpose()?;
    if parts.next().is_some() {
        return Err(format!("header cell `{cell}` has more than name:type:Q"));
    }
    Ok((name, ty, q))
}

/// Parses a fixed-point format written `Qi.f` (integer bits, fraction bits).
pub fn parse_q(s: &str) -> std::result::Result<QFormat, String> {
    let bad = || format!("`{s}` is not a fixed-point format like Q3.12");
    let rest = s.strip_prefix('Q').ok_or_else(bad)?;
    let (i, f) = rest.split_once('.').ok_or_else(bad)?;
    let q = QFormat {
        int_bits: i.parse().map_err(|_| bad())?,
        frac_bits: f.parse().map_err(|_| bad())?,
    };
    if u64::from(q.int_bits) + u64::from(q.frac_bits) + 1 > 64 {
        return Err(format!("`{s}` needs more than 64 bits with the sign"));
    }
    Ok(q)
}

/// Parses one CSV cell as a value of `ty`, explaining a failure.
fn parse_cell<T: Elem>(cell: &str, ty: ElemType) -> std::result::Result<T, String> {
    let t = cell.trim();
    if ty.is_float() && !t.to_ascii_lowercase().contains("inf") {
        // A finite number too large for the type is an error, never a silent infinity.
        let overflows = match t.parse::<f64>() {
            Ok(x) => x.is_infinite() || (ty == ElemType::F32 && (x as f32).is_infinite()),
            Err(_) => false,
        };
        if overflows {
            return Err(format!("value {t} overflows {ty}"));
        }
    }
    if let Some(v) = T::parse_text(cell) {
        return Ok(v);
    }
    if !ty.is_float() && t.parse::<i128>().is_ok() {
        return Err(format!("value {t} is out of range for {ty}"));
    }
    if t.is_empty() {
        return Err(format!("empty cell, expected {} {ty} number", article(ty)));
    }
    Err(format!("`{t}` is not {} {ty} number", article(ty)))
}

/// "an" before a type name read with a vowel sound first (`i16`, `f32`), else "a" (`u8`).
fn article(ty: ElemType) -> &'static str {
    if ty.is_float() || ty.is_signed_int() {
        "an"
    } else {
        "a"
    }
}

fn push_cell(data: &mut ColumnData, ty: ElemType, cell: &str) -> std::result::Result<(), String> {
    if ty.is_sub_byte() {
        let max = (1u8 << ty.bits()) - 1;
        let v: u8 = parse_cell(cell, ElemType::U8).map_err(|_| match cell.trim() {
            "" => format!("empty cell, expected a {ty} value (0..={max})"),
            t => format!("`{t}` is not a {ty} value (0..={max})"),
        })?;
        if v > max {
            return Err(format!("value {v} is out of range for {ty} (0..={max})"));
        }
        if let ColumnData::U8(vec) = data {
            vec.push(v);
        }
        return Ok(());
    }
    crate::with_column_data!(data, v => v.push(parse_cell(cell, ty)?));
    Ok(())
}

/// Reads a CSV table. `schema` gives the expected columns and types; without it every
/// header cell must carry its type (`name:type`). With both, they must agree.
pub fn read_csv(path: &Path, table: &str, schema: Option<&[(String, ElemType)]>) -> Result<Table> {
    let file = std::fs::File::open(path).map_err(|e| Error::read(path, e))?;
    read_csv_from(std::io::BufReader::new(file), path, table, schema)
}

/// Reads a CSV table from `reader` as [`read_csv`] does; `path` names it in errors.
pub fn read_csv_from<R: std::io::Read>(
    reader: R,
    path: &Path,
    table: &str,
    schema: Option<&[(String, ElemType)]>,
) -> Result<Table> {
    let at =
        |line: u64, msg: String| Error::input(format!("{}, line {line}: {msg}", path.display()));
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_reader(reader);
    let header = rdr.headers().map_err(|e| at(1, e.to_string()))?.clone();
    if header.iter().all(|c| c.trim().is_empty()) {
        return Err(Error::input(format!(
            "{}: the file is empty or its first line is blank; it needs a header line naming the columns",
            path.display()
        )));
    }
    let mut cols: Vec<(String, ElemType, Option<QFormat>)> = Vec::new();
    for (i, cell) in header.iter().enumerate() {
        let (name, ty, q) = parse_header_cell(cell).map_err(|m| at(1, m))?;
        let ty = match (ty, schema.and_then(|s| s.get(i))) {
            (Some(t), Some((n, st))) if (n != &name || t != *st) => {
                return Err(at(1, format!("header `{cell}` does not match the job's column `{n}:{st}`")))
            }
            (_, Some((n, st))) if n != &name => {
                return Err(at(1, format!("header column {} is `{name}`, the job expects `{n}:{st}`", i + 1)))
            }
            (_, Some((_, st))) => *st,
            (Some(t), None) => t,
            (None, None) => {
                return Err(at(1, format!("header cell `{cell}` has no type; write `{name}:u32` (or give the schema in the job)")))
            }
        };
        if let Some(q) = q {
            q.check(ty)
                .map_err(|m| at(1, format!("column `{name}`: {m}")))?;
        }
        cols.push((name, ty, q));
    }
    if let Some(s) = schema {
        if s.len() != cols.len() {
            return Err(at(
                1,
                format!(
                    "header has {} columns, the job expects {}",
                    cols.len(),
                    s.len()
                ),
            ));
        }
    }
    let mut data: Vec<ColumnData> = cols
        .iter()
        .map(|(_, t, _)| ColumnData::with_capacity(*t, 0))
        .collect();
    let mut record = csv::StringRecord::new();
    loop {
        let more = rdr.read_record(&mut record).map_err(|e| {
            let line = e.position().map_or(0, |p| p.line());
            at(line, e.to_string())
        })?;
        if !more {
            break;
        }
        let line = record.position().map_or(0, |p| p.line());
        if record.len() != cols.len() {
            return Err(at(
                line,
                format!("{} fields, the header has {}", record.len(), cols.len()),
            ));
        }
        for ((cell, (name, ty, _)), d) in record.iter().zip(&cols).zip(&mut data) {
            push_cell(d, *ty, cell).map_err(|m| at(line, format!("column `{name}`: {m}")))?;
        }
    }
    let columns = cols
        .into_iter()
        .zip(data)
        .map(|((name, ty, q), d)| {
            let mut c = Column::new(&name, ty, d).map_err(Error::input)?;
            c.q = q;
            Ok(c)
        })
        .collect::<Result<Vec<_>>>()?;
    Table::new(table, columns).map_err(Error::input)
}

/// Writes `table` as CSV with a typed header (`name:type[:Qi.f]`), so it reads back alone.
/// Floats are written in Rust's shortest round-trip form (`NaN`, `inf`, `-inf`, `-0`).
pub fn write_csv<W: std::io::Write>(w: W, table: &Table) -> std::io::Result<()> {
    let mut wr = csv::Writer::from_writer(w);
    let header: Vec<String> = table
        .columns
        .iter()
        .map(|c| match c.q {
            Some(q) => format!("{}:{}:{q}", c.name, c.ty),
            None => format!("{}:{}", c.name, c.ty),
        })
        .collect();
    wr.write_record(&header)?;
    let mut row: Vec<String> = vec![String::new(); table.columns.len()];
    for r in 0..table.rows() {
        for (cell, c) in row.iter_mut().zip(&table.columns) {
            cell.clear();
            crate::with_column_data!(&c.data, v => {
                use std::fmt::Write as _;
                let _ = write!(cell, "{:?}", v[r]);
            });
            if cell.ends_with(".0") {
                cell.truncate(cell.len() - 2);
            }
        }
        wr.write_record(&row)?;
    }
    wr.flush()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tmp(name: &str, text: &str) -> std::path::PathBuf {
        let dir = std::env::temp_dir().join(format!("weir-csv-{}-{name}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("t.csv");
        std::fs::write(&p, text).unwrap();
        p
    }

    #[test]
    fn reads_typed_header_and_round_trips() {
        let p = tmp("rt", "a:u8,b:f32,c:i16:Q3.12\n1,0.5,-4096\n255,NaN,7\n");
        let t = read_csv(&p, "t", None).unwrap();
        assert_eq!(t.rows(), 2);
        assert_eq!(
            t.columns[2].q,
            Some(QFormat {
                int_bits: 3,
                frac_bits: 12
            })
        );
        let mut out = Vec::new();
        write_csv(&mut out, &t).unwrap();
        assert_eq!(
            String::from_utf8(out).unwrap(),
            "a:u8,b:f32,c:i16:Q3.12\n1,0.5,-4096\n255,NaN,7\n"
        );
    }

    #[test]
    fn errors_name_line_and_column() {
        let p = tmp("range", "a:u8,b:i8\n1,2\n256,3\n");
        let e = read_csv(&p, "t", None).unwrap_err().to_string();
        assert!(
            e.ends_with("line 3: column `a`: value 256 is out of range for u8"),
            "{e}"
        );
        let p = tmp("ragged", "a:u8,b:i8\n1,2\n4\n");
        let e = read_csv(&p, "t", None).unwrap_err().to_string();
        assert!(e.ends_with("line 3: 1 fields, the header has 2"), "{e}");
        let p = tmp("nonnum", "a:u8,b:f64\n1,abc\n");
        let e = read_csv(&p, "t", None).unwrap_err().to_string();
        assert!(
            e.ends_with("line 2: column `b`: `abc` is not an f64 number"),
            "{e}"
        );
        let p = tmp("untyped", "a,b\n1,2\n");
        let e = read_csv(&p, "t", None).unwrap_err().to_string();
        assert!(e.contains("has no type"), "{e}");
    }
}
