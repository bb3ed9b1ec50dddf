//! Round trips through every file form of a column (CSV, `.npy`, raw binary) and through
//! every word-image format per partition, and the error messages bad input gets.

use std::path::{Path, PathBuf};

use proptest::prelude::*;
use weir::image::{read_dump, read_image, write_image, ImageFormat, WordState};
use weir::layout::{check_elem_fits_word, granule, split_rows, word_bytes};
use weir::table::{
    bin_column_bytes, column_bytes, read_bin_column, read_csv, read_npy_column, write_csv,
    write_npy_column, Column, ColumnData, ElemType, QFormat, Table,
};

/// A directory of its own under the system temp dir (process id and test name), removed
/// when dropped.
struct Scratch(PathBuf);

impl Scratch {
    fn new(test: &str) -> Scratch {
        let dir = std::env::temp_dir().join(format!("weir-formats-{}-{test}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        Scratch(dir)
    }

    fn file(&self, name: &str, contents: &[u8]) -> PathBuf {
        let p = self.0.join(name);
        std::fs::write(&p, contents).unwrap();
        p
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// `cases` cases, and no failure file written into the source tree.
fn config(cases: u32) -> ProptestConfig {
    ProptestConfig {
        failure_persistence: None,
        ..ProptestConfig::with_cases(cases)
    }
}

/// Values of a float type: anything proptest draws (normal, subnormal, zero, infinite,
/// NaN) mixed with the type's extremes and IEEE specials.
macro_rules! float_values {
    ($t:ident) => {
        prop_oneof![
            3 => proptest::num::$t::ANY,
            1 => prop::sample::select(vec![
                $t::NAN,
                -$t::NAN,
                $t::from_bits(<$t>::NAN.to_bits() | 1),
                -0.0,
                0.0,
                $t::INFINITY,
                $t::NEG_INFINITY,
                $t::MAX,
                $t::MIN,
                $t::MIN_POSITIVE,
                $t::from_bits(1),
                $t::EPSILON,
            ]),
        ]
    };
}

/// Values of an integer type: uniform, mixed with its minimum, maximum, 0 and ±1.
macro_rules! int_values {
    ($t:ident) => {
        prop_oneof![
            3 => any::<$t>(),
            1 => prop::sample::select(vec![$t::MIN, $t::MAX, 0, 1, $t::MAX - 1, $t::MIN.wrapping_add(1)]),
        ]
    };
}

/// `rows` random values of `ty`.
fn data(ty: ElemType, rows: usize) -> BoxedStrategy<ColumnData> {
    use prop::collection::vec;
    match ty {
        ElemType::U1 | ElemType::U2 | ElemType::U4 => vec(0u8..(1 << ty.bits()), rows)
            .prop_map(ColumnData::U8)
            .boxed(),
        ElemType::U8 => vec(int_values!(u8), rows).prop_map(ColumnData::U8).boxed(),
        ElemType::U16 => vec(int_values!(u16), rows)
            .prop_map(ColumnData::U16)
            .boxed(),
        ElemType::U32 => vec(int_values!(u32), rows)
            .prop_map(ColumnData::U32)
            .boxed(),
        ElemType::U64 => vec(int_values!(u64), rows)
            .prop_map(ColumnData::U64)
            .boxed(),
        ElemType::I8 => vec(int_values!(i8), rows).prop_map(ColumnData::I8).boxed(),
        ElemType::I16 => vec(int_values!(i16), rows)
            .prop_map(ColumnData::I16)
            .boxed(),
        ElemType::I32 => vec(int_values!(i32), rows)
            .prop_map(ColumnData::I32)
            .boxed(),
        ElemType::I64 => vec(int_values!(i64), rows)
            .prop_map(ColumnData::I64)
            .boxed(),
        ElemType::F32 => vec(float_values!(f32), rows)
            .prop_map(ColumnData::F32)
            .boxed(),
        ElemType::F64 => vec(float_values!(f64), rows)
            .prop_map(ColumnData::F64)
            .boxed(),
    }
}

/// A column of a random type (from `types`) with `rows` random values.
fn column(types: Vec<ElemType>, rows: usize, name: String) -> impl Strategy<Value = Column> {
    prop::sample::select(types).prop_flat_map(move |ty| {
        let name = name.clone();
        data(ty, rows).prop_map(move |d| Column::new(&name, ty, d).unwrap())
    })
}

/// A table of one to three columns of any types, 0..3000 rows; signed columns sometimes
/// carry a fixed-point format that fits them.
fn table() -> impl Strategy<Value = Table> {
    (0usize..3000, 1usize..=3, any::<u64>()).prop_flat_map(|(rows, n, q_seed)| {
        let cols: Vec<_> = (0..n)
            .map(|i| column(ElemType::ALL.to_vec(), rows, format!("col{i}")))
            .collect();
        cols.prop_map(move |mut cols| {
            for (i, c) in cols.iter_mut().enumerate() {
                let draw = q_seed >> (8 * i);
                if c.ty.is_signed_int() && draw % 3 == 0 {
                    let frac_bits = (draw >> 2) as u32 % c.ty.bits();
                    let int_bits = (draw >> 12) as u32 % (c.ty.bits() - frac_bits);
                    c.q = Some(QFormat {
                        int_bits,
                        frac_bits,
                    });
                }
            }
            Table::new("t", cols).unwrap()
        })
    })
}

/// Whether two value vectors are equal element by element: integers by value, floats by
/// bit pattern, except that with `nan_is_nan` any NaN equals any NaN (payloads differ).
fn same_values(a: &ColumnData, b: &ColumnData, nan_is_nan: bool) -> bool {
    macro_rules! floats {
        ($x:expr, $y:expr) => {
            $x.len() == $y.len()
                && $x.iter().zip($y.iter()).all(|(p, q)| {
                    p.to_bits() == q.to_bits() || (nan_is_nan && p.is_nan() && q.is_nan())
                })
        };
    }
    match (a, b) {
        (ColumnData::F32(x), ColumnData::F32(y)) => floats!(x, y),
        (ColumnData::F64(x), ColumnData::F64(y)) => floats!(x, y),
        (ColumnData::U8(x), ColumnData::U8(y)) => x == y,
        (ColumnData::U16(x), ColumnData::U16(y)) => x == y,
        (ColumnData::U32(x), ColumnData::U32(y)) => x == y,
        (ColumnData::U64(x), ColumnData::U64(y)) => x == y,
        (ColumnData::I8(x), ColumnData::I8(y)) => x == y,
        (ColumnData::I16(x), ColumnData::I16(y)) => x == y,
        (ColumnData::I32(x), ColumnData::I32(y)) => x == y,
        (ColumnData::I64(x), ColumnData::I64(y)) => x == y,
        _ => false,
    }
}

fn same_column(a: &Column, b: &Column, nan_is_nan: bool) -> bool {
    a.name == b.name && a.ty == b.ty && a.q == b.q && same_values(&a.data, &b.data, nan_is_nan)
}

proptest! {
    #![proptest_config(config(48))]

    #[test]
    fn csv_round_trips(t in table()) {
        let dir = Scratch::new("csv");
        let mut text = Vec::new();
        write_csv(&mut text, &t).unwrap();
        let path = dir.file("t.csv", &text);
        let back = read_csv(&path, "t", None).unwrap();
        prop_assert_eq!(back.rows(), t.rows());
        prop_assert_eq!(back.columns.len(), t.columns.len());
        for (a, b) in t.columns.iter().zip(&back.columns) {
            // CSV writes every NaN as `NaN`, so payloads are not kept: NaN compares as NaN.
            prop_assert!(same_column(a, b, true), "column {} ({}) differs after CSV", a.name, a.ty);
        }
        // Given the schema instead of reading it from the header, the result is the same.
        let schema = t.schema();
        let typed = read_csv(&path, "t", Some(&schema)).unwrap();
        for (a, b) in back.columns.iter().zip(&typed.columns) {
            prop_assert!(same_column(a, b, false), "column {} with a schema", a.name);
        }
    }

    #[test]
    fn npy_and_bin_columns_round_trip(
        col in (0usize..3000).prop_flat_map(|rows| column(ElemType::ALL.to_vec(), rows, "v".into()))
    ) {
        let dir = Scratch::new("npy-bin");
        let mut file = Vec::new();
        write_npy_column(&mut file, &col).unwrap();
        let path = dir.file("v.npy", &file);
        let back = read_npy_column(&path, "v", Some(col.ty)).unwrap();
        // Raw bytes all the way, so even NaN payloads survive.
        prop_assert!(same_column(&col, &back, false), "{} through .npy", col.ty);
        if col.ty.is_sub_byte() {
            // Sub-byte columns are stored one value per `|u1`, so alone they read as u8.
            let as_u8 = read_npy_column(&path, "v", None).unwrap();
            prop_assert_eq!(as_u8.ty, ElemType::U8);
            prop_assert!(same_values(&as_u8.data, &col.data, false));
        } else {
            let untyped = read_npy_column(&path, "v", None).unwrap();
            prop_assert!(same_column(&col, &untyped, false), "{} through .npy, type from the file", col.ty);
            let bytes = bin_column_bytes(&col);
            prop_assert_eq!(bytes.len(), col.len() * col.ty.bits() as usize / 8);
            let path = dir.file("v.bin", &bytes);
            let back = read_bin_column(&path, "v", col.ty).unwrap();
            prop_assert!(same_column(&col, &back, false), "{} through .bin", col.ty);
        }
    }
}

/// The byte form of rows `range`, built from the values without the crate's encoder:
/// little-endian elements, sub-byte values packed LSB-first (common practice).
fn expected_bytes(col: &Column, range: std::ops::Range<usize>) -> Vec<u8> {
    macro_rules! le {
        ($v:expr) => {
            $v[range].iter().flat_map(|x| x.to_le_bytes()).collect()
        };
    }
    match &col.data {
        ColumnData::U8(v) if col.ty.is_sub_byte() => {
            let bits = col.ty.bits() as usize;
            let mut out = vec![0u8; (range.len() * bits).div_ceil(8)];
            for (i, &x) in v[range].iter().enumerate() {
                out[i * bits / 8] |= x << (i * bits % 8);
            }
            out
        }
        ColumnData::U8(v) => le!(v),
        ColumnData::U16(v) => le!(v),
        ColumnData::U32(v) => le!(v),
        ColumnData::U64(v) => le!(v),
        ColumnData::I8(v) => le!(v),
        ColumnData::I16(v) => le!(v),
        ColumnData::I32(v) => le!(v),
        ColumnData::I64(v) => le!(v),
        ColumnData::F32(v) => le!(v),
        ColumnData::F64(v) => le!(v),
    }
}

/// A column, a word width that holds whole elements of it (a multiple of 8 and of the
/// element width, 8..=4096 bits) and a partition count 1..8.
fn partitioned() -> impl Strategy<Value = (Column, u32, u32)> {
    (0usize..3000)
        .prop_flat_map(|rows| column(ElemType::ALL.to_vec(), rows, "v".into()))
        .prop_flat_map(|col| {
            let unit = col.ty.bits().max(8);
            // Narrow words half the time, so partitions hold many words.
            let k = prop_oneof![1..=8u32, 1..=4096 / unit];
            (Just(col), k, 1u32..8).prop_map(move |(c, k, p)| (c, unit * k, p))
        })
}

const FORMATS: [ImageFormat; 3] = [ImageFormat::Hex, ImageFormat::Bin, ImageFormat::Npy];

proptest! {
    #![proptest_config(config(48))]

    #[test]
    fn partition_images_read_back_and_join_to_the_column((col, word_bits, parts) in partitioned()) {
        let wb = word_bytes(word_bits).unwrap() as usize;
        let g = granule(word_bits, &[col.ty.bits()], false);
        let ranges = split_rows(col.len() as u64, parts, g).unwrap();
        prop_assert_eq!(ranges.len(), parts as usize);
        let mut joined = Vec::new();
        for r in &ranges {
            let range = r.start as usize..r.end as usize;
            if !range.is_empty() {
                // Every partition starts on a word boundary of the column's image.
                prop_assert_eq!(r.start * u64::from(col.ty.bits()) % u64::from(word_bits), 0);
            }
            let mut bytes = Vec::new();
            column_bytes(&col, range.clone(), &mut bytes);
            prop_assert_eq!(&bytes, &expected_bytes(&col, range));
            let words = bytes.len().div_ceil(wb);
            let mut padded = bytes.clone();
            padded.resize(words * wb, 0);
            for format in FORMATS {
                let mut file = Vec::new();
                let written = write_image(&mut file, format, wb, &bytes).unwrap();
                prop_assert_eq!(written, words as u64, "{}", format);
                let dump = read_image(format, &file, word_bits).unwrap();
                prop_assert_eq!(dump.words(), words, "{}", format);
                prop_assert_eq!(&dump.data, &padded, "{} at {} bits", format, word_bits);
                prop_assert!(dump.state.iter().all(|s| *s == WordState::Written));
            }
            joined.extend(bytes);
        }
        prop_assert_eq!(&joined, &expected_bytes(&col, 0..col.len()));
    }
}

/// The error message of a failed call, for assertions on its text.
fn message<T: std::fmt::Debug, E: std::fmt::Display>(r: Result<T, E>) -> String {
    match r {
        Ok(v) => panic!("expected an error, got {v:?}"),
        Err(e) => e.to_string(),
    }
}

fn shown(p: &Path) -> String {
    p.display().to_string()
}

#[test]
fn bad_csv_is_refused_with_file_line_and_value() {
    let dir = Scratch::new("bad-csv");
    let cases = [
        (
            "ragged.csv",
            "a:u8,b:i8\n1,2\n3\n",
            "line 3: 1 fields, the header has 2",
        ),
        (
            "nonnum.csv",
            "a:u8,b:f32\n1,2\n3,4.5\n5,fast\n",
            "line 4: column `b`: `fast` is not an f32 number",
        ),
        (
            "u8.csv",
            "a:u8\n255\n256\n",
            "line 3: column `a`: value 256 is out of range for u8",
        ),
        (
            "i8.csv",
            "a:i8\n-128\n-129\n",
            "line 3: column `a`: value -129 is out of range for i8",
        ),
        (
            "u2.csv",
            "a:u2\n3\n4\n",
            "line 3: column `a`: value 4 is out of range for u2 (0..=3)",
        ),
    ];
    for (name, text, what) in cases {
        let path = dir.file(name, text.as_bytes());
        let got = message(read_csv(&path, "t", None));
        assert_eq!(got, format!("{}, {what}", shown(&path)));
    }
}

#[test]
fn bad_npy_and_bin_columns_are_refused_naming_the_file() {
    let dir = Scratch::new("bad-npy-bin");
    let col = Column::new("v", ElemType::U32, ColumnData::U32((0..10).collect())).unwrap();
    let mut file = Vec::new();
    write_npy_column(&mut file, &col).unwrap();
    let cut = dir.file("cut.npy", &file[..file.len() - 3]);
    assert_eq!(
        message(read_npy_column(&cut, "v", Some(ElemType::U32))),
        format!(
            "{}: truncated: header says 10 elements of 4 bytes (40 bytes) but 37 bytes follow",
            shown(&cut)
        )
    );
    let whole = dir.file("v.npy", &file);
    assert_eq!(
        message(read_npy_column(&whole, "v", Some(ElemType::I32))),
        format!(
            "{}: dtype `<u4` does not match column type i32 (expected `<i4`)",
            shown(&whole)
        )
    );
    let wide = Column::new("v", ElemType::U8, ColumnData::U8(vec![1, 3, 4])).unwrap();
    let mut file = Vec::new();
    write_npy_column(&mut file, &wide).unwrap();
    let wide = dir.file("wide.npy", &file);
    assert_eq!(
        message(read_npy_column(&wide, "v", Some(ElemType::U2))),
        format!(
            "{}: column `v`, row 2: value 4 does not fit u2",
            shown(&wide)
        )
    );

    let bin = dir.file("v.bin", &[0u8; 7]);
    assert_eq!(
        message(read_bin_column(&bin, "v", ElemType::U32)),
        format!(
            "{}: 7 bytes is not a whole number of u32 values (4 bytes each)",
            shown(&bin)
        )
    );
    assert_eq!(
        message(read_bin_column(&bin, "v", ElemType::U4)),
        format!(
            "{}: raw binary columns of sub-byte type u4 have no row count; use CSV or .npy",
            shown(&bin)
        )
    );
}

#[test]
fn a_hex_word_wider_than_the_word_is_refused_with_its_line() {
    let dir = Scratch::new("bad-hex");
    let path = dir.file("ch0.hex", b"00112233\n// comment\n100112233\n");
    assert_eq!(
        message(read_dump(&path, 32)),
        format!(
            "{}: line 3: word `100112233` has 9 hex digits, wider than a 32-bit word",
            shown(&path)
        )
    );
}

#[test]
fn word_widths_must_be_bytes_and_hold_whole_elements() {
    assert_eq!(
        message(word_bytes(500)),
        "word width 500 bits: must be a multiple of 8 from 8 to 4096"
    );
    assert_eq!(
        message(word_bytes(4104)),
        "word width 4104 bits: must be a multiple of 8 from 8 to 4096"
    );
    assert_eq!(word_bytes(4096).unwrap(), 512);
    assert_eq!(
        message(check_elem_fits_word(ElemType::U32, 48, "column `speed`")),
        "column `speed`: word width 48 bits is not a multiple of the u32 element width (32 bits)"
    );
    assert!(check_elem_fits_word(ElemType::U4, 8, "column `flag`").is_ok());
    assert!(check_elem_fits_word(ElemType::U16, 24, "column `flag`").is_err());
}
