//! Binding: resolves column names against a schema and converts every literal to its
//! column's type (rule in the parent module's documentation), giving the typed tree
//! [`Bound`] that the evaluator, range extraction and SQL rendering work from.

use super::ast::{CmpOp, Expr, Literal, Span, Spanned};
use super::{ErrorKind, PredicateError};
use crate::table::ElemType;

/// A literal converted to its column's type: `U` for unsigned columns, `I` for signed,
/// `F` for floats (for an `f32` column the exact `f32` value, widened).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Scalar {
    /// Unsigned integer.
    U(u64),
    /// Signed integer.
    I(i64),
    /// Float.
    F(f64),
}

/// The test a leaf applies to its column's value.
#[derive(Debug, Clone, PartialEq)]
pub enum Test {
    /// `value op scalar`.
    Cmp(CmpOp, Scalar),
    /// `lo <= value <= hi` (matches nothing when `lo > hi`).
    Between(Scalar, Scalar),
    /// The value equals one of the scalars (`not in` is `Not` of this).
    In(Vec<Scalar>),
}

/// A predicate bound to a schema: columns by index, literals typed.
#[derive(Debug, Clone, PartialEq)]
pub enum Bound {
    /// One test on column `col` (an index into the schema).
    Leaf {
        /// Schema index of the column.
        col: usize,
        /// The test.
        test: Test,
    },
    /// Both hold.
    And(Box<Bound>, Box<Bound>),
    /// Either holds.
    Or(Box<Bound>, Box<Bound>),
    /// Logical negation.
    Not(Box<Bound>),
}

/// Resolves `expr` against `schema` (column name and type, in column order). Errors
/// carry spans but not the predicate text: see [`PredicateError::with_text`].
pub fn bind(expr: &Expr, schema: &[(String, ElemType)]) -> Result<Bound, PredicateError> {
    let sub = |e: &Expr| bind(e, schema).map(Box::new);
    Ok(match expr {
        Expr::Cmp { col, op, lit } => {
            let (col, c) = resolve(col, schema)?;
            leaf(col, Test::Cmp(*op, convert(lit, c)?))
        }
        Expr::Between { col, lo, hi } => {
            let (col, c) = resolve(col, schema)?;
            leaf(col, Test::Between(convert(lo, c)?, convert(hi, c)?))
        }
        Expr::In { col, list, negated } => {
            let (col, c) = resolve(col, schema)?;
            let list = list
                .iter()
                .map(|lit| convert(lit, c))
                .collect::<Result<_, _>>()?;
            let test = leaf(col, Test::In(list));
            if *negated {
                Bound::Not(Box::new(test))
            } else {
                test
            }
        }
        Expr::And(a, b) => Bound::And(sub(a)?, sub(b)?),
        Expr::Or(a, b) => Bound::Or(sub(a)?, sub(b)?),
        Expr::Not(a) => Bound::Not(sub(a)?),
    })
}

impl Bound {
    /// Schema indices of the columns the predicate reads, sorted, without duplicates.
    pub fn columns(&self) -> Vec<usize> {
        fn walk(b: &Bound, out: &mut Vec<usize>) {
            match b {
                Bound::Leaf { col, .. } => out.push(*col),
                Bound::And(x, y) | Bound::Or(x, y) => {
                    walk(x, out);
                    walk(y, out);
                }
                Bound::Not(x) => walk(x, out),
            }
        }
        let mut out = Vec::new();
        walk(self, &mut out);
        out.sort_unstable();
        out.dedup();
        out
    }
}

fn leaf(col: usize, test: Test) -> Bound {
    Bound::Leaf { col, test }
}

/// Inclusive value range of an integer type; `None` for floats.
pub(super) fn int_bounds(ty: ElemType) -> Option<(i128, i128)> {
    let bits = ty.bits();
    if ty.is_float() {
        None
    } else if ty.is_signed_int() {
        Some((-(1i128 << (bits - 1)), (1i128 << (bits - 1)) - 1))
    } else {
        Some((0, (1i128 << bits) - 1))
    }
}

/// A resolved column's name (for messages) and type.
#[derive(Clone, Copy)]
struct Col<'a> {
    name: &'a str,
    ty: ElemType,
}

fn resolve<'a>(
    col: &Spanned<String>,
    schema: &'a [(String, ElemType)],
) -> Result<(usize, Col<'a>), PredicateError> {
    match schema.iter().position(|(name, _)| *name == col.value) {
        Some(i) => Ok((
            i,
            Col {
                name: &schema[i].0,
                ty: schema[i].1,
            },
        )),
        None => {
            let known = if schema.is_empty() {
                "the table has no columns".to_string()
            } else {
                let names: Vec<&str> = schema.iter().map(|(n, _)| n.as_str()).collect();
                format!("columns: {}", names.join(", "))
            };
            Err(fail(
                ErrorKind::UnknownColumn,
                col.span,
                format!("unknown column `{}` ({known})", col.value),
            ))
        }
    }
}

fn fail(kind: ErrorKind, span: Span, message: String) -> PredicateError {
    PredicateError::new(kind, span, "", message)
}

fn convert(lit: &Spanned<Literal>, col: Col<'_>) -> Result<Scalar, PredicateError> {
    let Col { name, ty } = col;
    let fail = |kind, message| Err(fail(kind, lit.span, message));
    match (&lit.value, int_bounds(ty)) {
        (Literal::Str(_), _) => fail(
            ErrorKind::TypeMismatch,
            format!("string literal on {ty} column `{name}`: predicates compare numbers only"),
        ),
        (Literal::Float(_, text), Some(_)) => fail(
            ErrorKind::TypeMismatch,
            format!("float literal {text} on integer column `{name}` ({ty})"),
        ),
        (Literal::Int(v), Some((min, max))) => {
            if *v < min || *v > max {
                fail(
                    ErrorKind::OutOfRange,
                    format!("literal {v} is out of range for {ty} column `{name}` ({min}..={max})"),
                )
            } else if ty.is_signed_int() {
                // In range, so the casts are exact.
                Ok(Scalar::I(*v as i64))
            } else {
                Ok(Scalar::U(*v as u64))
            }
        }
        // Integer-to-float `as` rounds to nearest, ties to even; |i128| < f32::MAX, so
        // it cannot overflow.
        (Literal::Int(v), None) if ty == ElemType::F32 => Ok(Scalar::F(f64::from(*v as f32))),
        (Literal::Int(v), None) => Ok(Scalar::F(*v as f64)),
        (Literal::Float(_, text), None) => {
            // Rust's float parsing is correctly rounded, so each type gets the nearest value.
            let (value, max) = if ty == ElemType::F32 {
                let v = text.parse::<f32>().map(f64::from);
                (v, format!("{:e}", f32::MAX))
            } else {
                (text.parse::<f64>(), format!("{:e}", f64::MAX))
            };
            let Ok(value) = value else {
                return fail(
                    ErrorKind::Syntax,
                    format!("malformed float literal `{text}`"),
                );
            };
            let written_inf = text
                .trim_start_matches(['+', '-'])
                .eq_ignore_ascii_case("inf");
            if value.is_infinite() && !written_inf {
                fail(
                    ErrorKind::OutOfRange,
                    format!("literal {text} overflows {ty} column `{name}` (largest finite magnitude {max})"),
                )
            } else {
                Ok(Scalar::F(value))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernels::predicate::{compile, parse};

    fn one(ty: ElemType) -> Vec<(String, ElemType)> {
        vec![("x".to_string(), ty)]
    }

    fn scalar(text: &str, ty: ElemType) -> Result<Scalar, PredicateError> {
        match compile(text, &one(ty))? {
            Bound::Leaf {
                test: Test::Cmp(_, s),
                ..
            } => Ok(s),
            b => panic!("not a comparison: {b:?}"),
        }
    }

    // Ranges of u8..u64 and i8..i64 per the Rust Reference, "Integer types"
    // (0..=2^n-1 unsigned, -2^(n-1)..=2^(n-1)-1 signed); u1/u2/u4 as n-bit unsigned
    // values 0..=2^n-1 (common practice). Section name recalled from memory.
    const RANGES: [(ElemType, i128, i128); 11] = [
        (ElemType::U1, 0, 1),
        (ElemType::U2, 0, 3),
        (ElemType::U4, 0, 15),
        (ElemType::U8, 0, 255),
        (ElemType::U16, 0, 65_535),
        (ElemType::U32, 0, 4_294_967_295),
        (ElemType::U64, 0, 18_446_744_073_709_551_615),
        (ElemType::I8, -128, 127),
        (ElemType::I16, -32_768, 32_767),
        (ElemType::I32, -2_147_483_648, 2_147_483_647),
        (
            ElemType::I64,
            -9_223_372_036_854_775_808,
            9_223_372_036_854_775_807,
        ),
    ];

    #[test]
    fn integer_literals_must_fit_the_column_type() {
        let integer_types: Vec<ElemType> = ElemType::ALL
            .into_iter()
            .filter(|t| !t.is_float())
            .collect();
        assert_eq!(RANGES.map(|r| r.0).to_vec(), integer_types);
        for (ty, min, max) in RANGES {
            let expect = |v: i128| {
                if ty.is_signed_int() {
                    Scalar::I(v as i64)
                } else {
                    Scalar::U(v as u64)
                }
            };
            assert_eq!(scalar(&format!("x = {min}"), ty), Ok(expect(min)));
            assert_eq!(scalar(&format!("x = {max}"), ty), Ok(expect(max)));
            for bad in [min - 1, max + 1] {
                let e = scalar(&format!("x = {bad}"), ty).unwrap_err();
                assert_eq!(e.kind(), ErrorKind::OutOfRange);
                assert_eq!(
                    e.message(),
                    format!("literal {bad} is out of range for {ty} column `x` ({min}..={max})")
                );
                assert_eq!(
                    e.span(),
                    Span {
                        pos: 4,
                        len: bad.to_string().len()
                    }
                );
            }
        }
        let e = scalar("x = 0x100", ElemType::U8).unwrap_err();
        assert_eq!(
            e.message(),
            "literal 256 is out of range for u8 column `x` (0..=255)"
        );
    }

    // IEEE 754-2008 §4.3.1: under roundTiesToEven a value of magnitude at least
    // 2^emax × (2 − 2^−p) rounds to infinity; for binary32 (emax 127, p 24, §3.6) that is
    // 2^128 − 2^103 = 340282356779733661637539395458142568448, and the largest finite
    // value is (2 − 2^−23) × 2^127, printed by Rust as 3.4028235e38. Clause numbers
    // here and below are recalled from memory.
    #[test]
    fn float_literals_that_round_to_infinity_are_out_of_range() {
        let e = scalar("x < 1e39", ElemType::F32).unwrap_err();
        assert_eq!(e.kind(), ErrorKind::OutOfRange);
        assert_eq!(
            e.message(),
            "literal 1e39 overflows f32 column `x` (largest finite magnitude 3.4028235e38)"
        );
        assert_eq!(
            scalar("x < -1e39", ElemType::F32).unwrap_err().kind(),
            ErrorKind::OutOfRange
        );
        assert_eq!(scalar("x < 1e39", ElemType::F64), Ok(Scalar::F(1e39)));
        assert_eq!(
            scalar("x < 1e309", ElemType::F64).unwrap_err().kind(),
            ErrorKind::OutOfRange
        );
        let max = f64::from(f32::MAX);
        assert_eq!(
            scalar(
                "x < 340282356779733661637539395458142568447.9",
                ElemType::F32
            ),
            Ok(Scalar::F(max))
        );
        assert_eq!(
            scalar(
                "x < 340282356779733661637539395458142568448.0",
                ElemType::F32
            )
            .unwrap_err()
            .kind(),
            ErrorKind::OutOfRange
        );
        // Tiny literals underflow quietly.
        assert_eq!(scalar("x > 1e-50", ElemType::F32), Ok(Scalar::F(0.0)));
    }

    #[test]
    fn nan_and_infinities_bind_to_float_columns() {
        assert!(matches!(scalar("x = NaN", ElemType::F32), Ok(Scalar::F(v)) if v.is_nan()));
        assert_eq!(
            scalar("x < inf", ElemType::F32),
            Ok(Scalar::F(f64::INFINITY))
        );
        assert_eq!(
            scalar("x > -Inf", ElemType::F64),
            Ok(Scalar::F(f64::NEG_INFINITY))
        );
    }

    // binary32 has a 24-bit significand (IEEE 754-2008 §3.6), so 1 + 2^-24 is the
    // midpoint between 1 and its successor 1 + 2^-23; a literal a hair above it must
    // round up. Going through f64 first would land exactly on the midpoint and then
    // round (ties to even) down to 1.
    #[test]
    fn f32_columns_round_the_literal_text_once() {
        assert_eq!(
            scalar("x = 1.00000005960464477539062500001", ElemType::F32),
            Ok(Scalar::F(1.0 + 2f64.powi(-23)))
        );
        assert_eq!(
            scalar("x = 1.000000059604644775390625", ElemType::F32),
            Ok(Scalar::F(1.0))
        );
        assert_eq!(scalar("x = 0.1", ElemType::F64), Ok(Scalar::F(0.1)));
    }

    // Above 2^24 an f32 holds only even integers; roundTiesToEven (IEEE 754-2008 §4.3.1)
    // sends the midpoints 2^24 + 1 down and 2^24 + 3 up.
    #[test]
    fn integer_literals_on_float_columns_round_to_nearest_even() {
        assert_eq!(
            scalar("x = 16777217", ElemType::F32),
            Ok(Scalar::F(16_777_216.0))
        );
        assert_eq!(
            scalar("x = 16777219", ElemType::F32),
            Ok(Scalar::F(16_777_220.0))
        );
        assert_eq!(
            scalar("x = 16777217", ElemType::F64),
            Ok(Scalar::F(16_777_217.0))
        );
        assert_eq!(scalar("x = -3", ElemType::F64), Ok(Scalar::F(-3.0)));
    }

    #[test]
    fn wrong_literal_kinds_are_type_mismatches() {
        for (text, ty, message) in [
            (
                "x = 'abc'",
                ElemType::U8,
                "string literal on u8 column `x`: predicates compare numbers only",
            ),
            (
                "x = 'abc'",
                ElemType::F64,
                "string literal on f64 column `x`: predicates compare numbers only",
            ),
            (
                "x = 1.5",
                ElemType::I32,
                "float literal 1.5 on integer column `x` (i32)",
            ),
            (
                "x = 2e0",
                ElemType::U64,
                "float literal 2e0 on integer column `x` (u64)",
            ),
            (
                "x = nan",
                ElemType::I8,
                "float literal nan on integer column `x` (i8)",
            ),
            (
                "x between 1 and 2.0",
                ElemType::U16,
                "float literal 2.0 on integer column `x` (u16)",
            ),
            (
                "x in (1, 2, 'z')",
                ElemType::U4,
                "string literal on u4 column `x`: predicates compare numbers only",
            ),
        ] {
            let e = compile(text, &one(ty)).unwrap_err();
            assert_eq!(
                (e.kind(), e.message()),
                (ErrorKind::TypeMismatch, message),
                "{text}"
            );
        }
    }

    #[test]
    fn unknown_column_in_an_empty_schema() {
        let e = compile("x < 1", &[]).unwrap_err();
        assert_eq!(e.message(), "unknown column `x` (the table has no columns)");
        let e = compile("X < 1", &one(ElemType::U8)).unwrap_err();
        assert_eq!(e.message(), "unknown column `X` (columns: x)");
    }

    #[test]
    fn builds_the_typed_tree() {
        let schema = [
            ("a".to_string(), ElemType::U8),
            ("b".to_string(), ElemType::I16),
            ("c".to_string(), ElemType::F32),
        ];
        let b = compile(
            "c between 0.5 and -1 or not a not in (1, 2) and b = -7",
            &schema,
        )
        .unwrap();
        let expect = Bound::Or(
            Box::new(Bound::Leaf {
                col: 2,
                test: Test::Between(Scalar::F(0.5), Scalar::F(-1.0)),
            }),
            Box::new(Bound::And(
                Box::new(Bound::Not(Box::new(Bound::Not(Box::new(Bound::Leaf {
                    col: 0,
                    test: Test::In(vec![Scalar::U(1), Scalar::U(2)]),
                }))))),
                Box::new(Bound::Leaf {
                    col: 1,
                    test: Test::Cmp(CmpOp::Eq, Scalar::I(-7)),
                }),
            )),
        );
        assert_eq!(b, expect);
        assert_eq!(b.columns(), vec![0, 1, 2]);
        assert_eq!(
            compile("c < 1 or c > 2", &schema).unwrap().columns(),
            vec![2]
        );
    }

    #[test]
    fn bind_alone_reports_spans_without_text() {
        let e = bind(&parse("x < 1 or y < 2").unwrap(), &one(ElemType::U8)).unwrap_err();
        assert_eq!(
            (e.kind(), e.span(), e.text()),
            (ErrorKind::UnknownColumn, Span { pos: 9, len: 1 }, "")
        );
    }
}
