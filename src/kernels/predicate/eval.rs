//! The row-at-a-time reference evaluator: the oracle every faster scan is checked against,
//! so it is written for plain correctness, not speed.

use std::cmp::Ordering;

use super::ast::CmpOp;
use super::bind::{Bound, Scalar, Test};

/// One column value of the row under test; its kind should match the column's
/// [`Scalar`] kind, but mixed kinds still compare by exact numeric value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Value {
    /// Unsigned integer.
    U(u64),
    /// Signed integer.
    I(i64),
    /// Float (an `f32` widened to `f64`).
    F(f64),
}

impl Bound {
    /// Whether the row whose column `i` has value `row(i)` satisfies the predicate.
    pub fn eval(&self, row: &dyn Fn(usize) -> Value) -> bool {
        match self {
            Bound::Leaf { col, test } => matches(test, row(*col)),
            Bound::And(a, b) => a.eval(row) && b.eval(row),
            Bound::Or(a, b) => a.eval(row) || b.eval(row),
            Bound::Not(a) => !a.eval(row),
        }
    }
}

fn matches(test: &Test, v: Value) -> bool {
    match test {
        Test::Cmp(op, s) => holds(*op, compare(v, *s)),
        Test::Between(lo, hi) => {
            holds(CmpOp::Ge, compare(v, *lo)) && holds(CmpOp::Le, compare(v, *hi))
        }
        Test::In(list) => list.iter().any(|s| holds(CmpOp::Eq, compare(v, *s))),
    }
}

/// Whether `value op scalar` holds given their ordering; `None` means unordered (a NaN),
/// for which only `!=` holds.
fn holds(op: CmpOp, ord: Option<Ordering>) -> bool {
    use Ordering::{Equal, Greater, Less};
    match op {
        CmpOp::Lt => ord == Some(Less),
        CmpOp::Le => matches!(ord, Some(Less | Equal)),
        CmpOp::Eq => ord == Some(Equal),
        CmpOp::Ne => ord != Some(Equal),
        CmpOp::Ge => matches!(ord, Some(Greater | Equal)),
        CmpOp::Gt => ord == Some(Greater),
    }
}

/// A number of either kind, wide enough to hold every integer value and scalar exactly.
#[derive(Clone, Copy)]
enum Num {
    Int(i128),
    Float(f64),
}

impl From<Value> for Num {
    fn from(v: Value) -> Num {
        match v {
            Value::U(x) => Num::Int(x.into()),
            Value::I(x) => Num::Int(x.into()),
            Value::F(x) => Num::Float(x),
        }
    }
}

impl From<Scalar> for Num {
    fn from(s: Scalar) -> Num {
        match s {
            Scalar::U(x) => Num::Int(x.into()),
            Scalar::I(x) => Num::Int(x.into()),
            Scalar::F(x) => Num::Float(x),
        }
    }
}

fn compare(v: Value, s: Scalar) -> Option<Ordering> {
    match (Num::from(v), Num::from(s)) {
        (Num::Int(a), Num::Int(b)) => Some(a.cmp(&b)),
        // IEEE 754 comparison: NaN is unordered, -0.0 equals 0.0.
        (Num::Float(a), Num::Float(b)) => a.partial_cmp(&b),
        (Num::Float(a), Num::Int(b)) => float_vs_int(a, b),
        (Num::Int(a), Num::Float(b)) => float_vs_int(b, a).map(Ordering::reverse),
    }
}

/// Exact comparison of a float with an integer (no rounding of either).
fn float_vs_int(f: f64, i: i128) -> Option<Ordering> {
    const TWO_127: f64 = 170_141_183_460_469_231_731_687_303_715_884_105_728.0;
    if f.is_nan() {
        None
    } else if f >= TWO_127 {
        Some(Ordering::Greater)
    } else if f < -TWO_127 {
        Some(Ordering::Less)
    } else {
        // |f| < 2^127, so its integer part converts to i128 exactly; when that equals
        // `i`, the fraction decides.
        let whole = f.trunc();
        match (whole as i128).cmp(&i) {
            Ordering::Equal => f.partial_cmp(&whole),
            other => Some(other),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernels::predicate::compile;
    use crate::table::ElemType;

    /// Evaluates `text` on a one-column table `x` of type `ty` holding `v`.
    fn eval1(text: &str, ty: ElemType, v: Value) -> bool {
        let b = compile(text, &[("x".to_string(), ty)]).unwrap();
        b.eval(&|_| v)
    }

    // IEEE 754-2008 §5.11: every comparison with a NaN operand is "unordered", so the
    // predicates <, <=, =, >=, > are false and != (the negation of =) is true.
    // (Clause number recalled from memory.)
    #[test]
    fn nan_is_unordered() {
        let nan = Value::F(f64::NAN);
        for (text, expect) in [
            ("x < 1", false),
            ("x <= 1", false),
            ("x = 1", false),
            ("x != 1", true),
            ("x >= 1", false),
            ("x > 1", false),
            ("x between -inf and inf", false),
            ("x in (1, nan, inf)", false),
            ("x not in (1)", true),
            ("x = nan", false),
            ("x != nan", true),
        ] {
            assert_eq!(eval1(text, ElemType::F64, nan), expect, "{text}");
            assert_eq!(eval1(text, ElemType::F32, nan), expect, "{text} (f32)");
        }
        // Literal NaN is unordered against ordinary values too.
        assert!(!eval1("x <= nan", ElemType::F64, Value::F(1.0)));
        assert!(eval1("x != nan", ElemType::F64, Value::F(1.0)));
    }

    #[test]
    fn not_negates_a_false_nan_comparison() {
        let nan = Value::F(f64::NAN);
        assert!(eval1("not (x < 1)", ElemType::F64, nan));
        assert!(!eval1("x >= 1", ElemType::F64, nan));
        assert!(eval1("not x between 0 and 1", ElemType::F64, nan));
    }

    // IEEE 754-2008 §5.11: comparisons ignore the sign of zero.
    #[test]
    fn negative_zero_equals_zero() {
        let neg = Value::F(-0.0);
        assert!(eval1("x = 0", ElemType::F64, neg));
        assert!(eval1("x = 0.0", ElemType::F32, neg));
        assert!(eval1("x >= 0", ElemType::F64, neg));
        assert!(!eval1("x < 0", ElemType::F64, neg));
        assert!(eval1("x in (0.0)", ElemType::F64, neg));
        assert!(eval1("x = -0.0", ElemType::F64, Value::F(0.0)));
    }

    #[test]
    fn infinities_order_at_the_ends() {
        assert!(eval1("x > 1e308", ElemType::F64, Value::F(f64::INFINITY)));
        assert!(eval1("x = inf", ElemType::F64, Value::F(f64::INFINITY)));
        assert!(eval1(
            "x < -1e308",
            ElemType::F64,
            Value::F(f64::NEG_INFINITY)
        ));
    }

    #[test]
    fn integer_comparisons_and_between() {
        let at = |v: u64, text: &str| eval1(text, ElemType::U64, Value::U(v));
        assert!(at(u64::MAX, "x = 0xFFFFFFFFFFFFFFFF"));
        assert!(at(5, "x between 5 and 5"));
        assert!(!at(5, "x between 6 and 4"));
        assert!(at(3, "x in (1, 3)") && !at(2, "x in (1, 3)"));
        assert!(eval1("x < -1", ElemType::I8, Value::I(-128)));
    }

    #[test]
    fn logic_follows_the_tree() {
        let schema = [
            ("a".to_string(), ElemType::I32),
            ("b".to_string(), ElemType::I32),
        ];
        let b = compile("a < 0 or not b = 1 and a > 10", &schema).unwrap();
        let row = |a: i64, bv: i64| move |i: usize| Value::I(if i == 0 { a } else { bv });
        assert!(b.eval(&row(-1, 1)));
        assert!(b.eval(&row(11, 2)));
        assert!(!b.eval(&row(11, 1)));
        assert!(!b.eval(&row(5, 2)));
    }

    #[test]
    fn mixed_kinds_compare_exactly() {
        // 2^53 + 1 is not an f64; a float-rounding comparison would call it equal to 2^53.
        let two53 = 9_007_199_254_740_992.0;
        assert_eq!(
            compare(Value::U((1 << 53) + 1), Scalar::F(two53)),
            Some(Ordering::Greater)
        );
        assert_eq!(compare(Value::F(-2.5), Scalar::I(-2)), Some(Ordering::Less));
        assert_eq!(
            compare(Value::F(-1.5), Scalar::I(-2)),
            Some(Ordering::Greater)
        );
        assert_eq!(compare(Value::F(7.0), Scalar::U(7)), Some(Ordering::Equal));
        assert_eq!(compare(Value::F(f64::NAN), Scalar::U(7)), None);
        assert_eq!(
            compare(Value::F(1e300), Scalar::U(u64::MAX)),
            Some(Ordering::Greater)
        );
        assert_eq!(
            compare(Value::F(-1e300), Scalar::I(i64::MIN)),
            Some(Ordering::Less)
        );
        assert_eq!(compare(Value::I(-1), Scalar::U(0)), Some(Ordering::Less));
    }
}
