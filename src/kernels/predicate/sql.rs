//! SQL rendering of a bound predicate as an SQLite `WHERE` condition, so a scan can be
//! checked against SQLite on the same rows.

use std::fmt::Write;

use super::ast::CmpOp;
use super::bind::{Bound, Scalar, Test};
use crate::table::ElemType;

impl Bound {
    /// The predicate as an SQLite condition (no `WHERE` keyword), fully parenthesised,
    /// column names double-quoted. SQLite evaluates it like [`Bound::eval`] for integer
    /// values in `-(2^63 - 1)..2^63` and non-NaN floats. Floats are written in Rust's
    /// shortest round-trip form (`f32` scalars as their exact `f64`), infinities as
    /// `±9e999` (which SQLite reads as infinity). A test against a NaN literal does not
    /// depend on the row, so it is written as the constant it is (`1` for `!=`, else
    /// `0`); SQLite has no NaN. `schema` must be the one the tree was bound against: a
    /// column index outside it is written as the name `#index`, which SQLite rejects.
    pub fn to_sql(&self, schema: &[(String, ElemType)]) -> String {
        let mut out = String::new();
        self.write_sql(schema, &mut out);
        out
    }

    fn write_sql(&self, schema: &[(String, ElemType)], out: &mut String) {
        match self {
            Bound::Leaf { col, test } => {
                let name = match schema.get(*col) {
                    Some((name, _)) => format!("\"{}\"", name.replace('"', "\"\"")),
                    None => format!("\"#{col}\""),
                };
                leaf_sql(&name, test, out);
            }
            Bound::And(a, b) | Bound::Or(a, b) => {
                let word = if matches!(self, Bound::And(..)) {
                    "AND"
                } else {
                    "OR"
                };
                out.push('(');
                a.write_sql(schema, out);
                let _ = write!(out, " {word} ");
                b.write_sql(schema, out);
                out.push(')');
            }
            Bound::Not(a) => {
                out.push_str("(NOT ");
                a.write_sql(schema, out);
                out.push(')');
            }
        }
    }
}

fn is_nan(s: &Scalar) -> bool {
    matches!(s, Scalar::F(v) if v.is_nan())
}

fn leaf_sql(name: &str, test: &Test, out: &mut String) {
    // `write!` to a String cannot fail.
    let _ = match test {
        Test::Cmp(op, s) if is_nan(s) => write!(out, "{}", u8::from(*op == CmpOp::Ne)),
        Test::Cmp(op, s) => write!(out, "({name} {} {})", op.symbol(), scalar_sql(s)),
        Test::Between(lo, hi) if is_nan(lo) || is_nan(hi) => write!(out, "0"),
        Test::Between(lo, hi) => write!(
            out,
            "({name} BETWEEN {} AND {})",
            scalar_sql(lo),
            scalar_sql(hi)
        ),
        Test::In(list) => {
            let items: Vec<String> = list.iter().filter(|s| !is_nan(s)).map(scalar_sql).collect();
            if items.is_empty() {
                write!(out, "0")
            } else {
                write!(out, "({name} IN ({}))", items.join(", "))
            }
        }
    };
}

fn scalar_sql(s: &Scalar) -> String {
    match *s {
        Scalar::U(v) => v.to_string(),
        Scalar::I(v) => v.to_string(),
        Scalar::F(v) if v == f64::INFINITY => "9e999".to_string(),
        Scalar::F(v) if v == f64::NEG_INFINITY => "-9e999".to_string(),
        Scalar::F(v) => format!("{v:e}"),
    }
}

#[cfg(test)]
mod tests {
    use crate::kernels::predicate::compile;
    use crate::table::ElemType;

    fn schema() -> Vec<(String, ElemType)> {
        vec![
            ("speed".to_string(), ElemType::U16),
            ("temp".to_string(), ElemType::F32),
            ("yaw".to_string(), ElemType::F64),
        ]
    }

    fn sql(text: &str) -> String {
        compile(text, &schema()).unwrap().to_sql(&schema())
    }

    #[test]
    fn renders_every_node_parenthesised() {
        assert_eq!(
            sql("speed >= 3 and not (yaw < -2.5 or speed between 1 and 0x10)"),
            "((\"speed\" >= 3) AND (NOT ((\"yaw\" < -2.5e0) OR (\"speed\" BETWEEN 1 AND 16))))"
        );
        assert_eq!(
            sql("speed in (1, 2) and speed not in (3)"),
            "((\"speed\" IN (1, 2)) AND (NOT (\"speed\" IN (3))))"
        );
        assert_eq!(sql("speed != 4"), "(\"speed\" != 4)");
    }

    #[test]
    fn floats_round_trip_and_f32_is_exact() {
        // 0.1 as f32 is 13421773 * 2^-27 = 0.100000001490116119384765625 exactly.
        assert_eq!(sql("temp < 0.1"), "(\"temp\" < 1.0000000149011612e-1)");
        assert_eq!(sql("yaw = 0.1"), "(\"yaw\" = 1e-1)");
        assert_eq!(
            sql("yaw > -inf and yaw < inf"),
            "((\"yaw\" > -9e999) AND (\"yaw\" < 9e999))"
        );
    }

    #[test]
    fn nan_tests_become_constants() {
        assert_eq!(sql("yaw < nan"), "0");
        assert_eq!(sql("not yaw = nan"), "(NOT 0)");
        assert_eq!(sql("yaw != nan"), "1");
        assert_eq!(sql("yaw between nan and 1"), "0");
        assert_eq!(sql("yaw in (nan, 2)"), "(\"yaw\" IN (2e0))");
        assert_eq!(sql("yaw in (nan)"), "0");
    }

    #[test]
    fn quotes_in_column_names_are_doubled() {
        let b = compile("speed = 1", &schema()).unwrap();
        let other = [("odd \"name\"".to_string(), ElemType::U16)];
        assert_eq!(b.to_sql(&other), "(\"odd \"\"name\"\"\" = 1)");
        assert_eq!(b.to_sql(&[]), "(\"#0\" = 1)");
    }
}
