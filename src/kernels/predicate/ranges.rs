//! Range extraction: reduces a conjunction of range terms on integer columns to one
//! inclusive interval per column, the form a hardware range-compare unit takes directly.

use std::collections::BTreeMap;

use super::ast::CmpOp;
use super::bind::{int_bounds, Bound, Scalar, Test};
use crate::table::ElemType;

/// The values `lo..=hi` of integer column `col`; empty when `lo > hi`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ColumnRange {
    /// Schema index of the column.
    pub col: usize,
    /// Smallest matching value.
    pub lo: i128,
    /// Largest matching value.
    pub hi: i128,
}

impl ColumnRange {
    /// Exclusive upper bound `hi + 1` (saturating, which never happens for ranges from
    /// [`Bound::ranges`]: their bounds lie within 64-bit column ranges).
    pub fn hi_excl(&self) -> i128 {
        self.hi.saturating_add(1)
    }

    /// True when no value matches.
    pub fn is_empty(&self) -> bool {
        self.lo > self.hi
    }
}

impl Bound {
    /// For a predicate that is an `and` of `<`, `<=`, `=`, `>=`, `>` and `between` terms
    /// on integer columns: one range per column mentioned (terms on the same column
    /// intersected, bounds clamped to the column type's range), sorted by column. `None`
    /// for anything else (`or`, `not`, `in`, `not in`, `!=`, a float column) and for a
    /// tree that does not fit `schema`.
    pub fn ranges(&self, schema: &[(String, ElemType)]) -> Option<Vec<ColumnRange>> {
        let mut out = BTreeMap::new();
        self.collect_ranges(schema, &mut out)?;
        Some(out.into_values().collect())
    }

    fn collect_ranges(
        &self,
        schema: &[(String, ElemType)],
        out: &mut BTreeMap<usize, ColumnRange>,
    ) -> Option<()> {
        match self {
            Bound::And(a, b) => {
                a.collect_ranges(schema, out)?;
                b.collect_ranges(schema, out)
            }
            Bound::Leaf { col, test } => {
                let (min, max) = int_bounds(schema.get(*col)?.1)?;
                let (lo, hi) = match test {
                    Test::Cmp(op, s) => {
                        let c = int_of(*s)?;
                        match op {
                            CmpOp::Lt => (min, c - 1),
                            CmpOp::Le => (min, c),
                            CmpOp::Eq => (c, c),
                            CmpOp::Ge => (c, max),
                            CmpOp::Gt => (c + 1, max),
                            CmpOp::Ne => return None,
                        }
                    }
                    Test::Between(lo, hi) => (int_of(*lo)?, int_of(*hi)?),
                    Test::In(_) => return None,
                };
                let r = out.entry(*col).or_insert(ColumnRange {
                    col: *col,
                    lo: min,
                    hi: max,
                });
                r.lo = r.lo.max(lo);
                r.hi = r.hi.min(hi);
                Some(())
            }
            Bound::Or(..) | Bound::Not(_) => None,
        }
    }
}

impl Bound {
    /// When no row can match: the name of a column on which the terms of the top-level
    /// `and` leave no value (a `between` with its bounds reversed, `x < 5 and x > 9`), with
    /// the interval they ask for. Terms under `or` and `not`, and `in`/`!=`, are not looked
    /// at, so `None` does not promise that a row matches.
    pub fn never_matches(&self, schema: &[(String, ElemType)]) -> Option<String> {
        let mut ints: BTreeMap<usize, ColumnRange> = BTreeMap::new();
        let mut floats: BTreeMap<usize, (f64, f64)> = BTreeMap::new();
        self.conjuncts(&mut |col, test| {
            let Some((_, ty)) = schema.get(col) else {
                return;
            };
            if let Some((min, max)) = int_bounds(*ty) {
                let r = ints.entry(col).or_insert(ColumnRange {
                    col,
                    lo: min,
                    hi: max,
                });
                if let Some((lo, hi)) = int_interval(test, min, max) {
                    r.lo = r.lo.max(lo);
                    r.hi = r.hi.min(hi);
                }
            } else if let Some((lo, hi)) = float_interval(test) {
                let r = floats
                    .entry(col)
                    .or_insert((f64::NEG_INFINITY, f64::INFINITY));
                r.0 = r.0.max(lo);
                r.1 = r.1.min(hi);
            }
        });
        let name = |c: usize| &schema[c].0;
        if let Some(r) = ints.values().find(|r| r.is_empty()) {
            return Some(format!(
                "no value of `{}` lies in {}..={} as the terms require",
                name(r.col),
                r.lo,
                r.hi
            ));
        }
        floats.iter().find(|(_, r)| r.0 > r.1).map(|(c, r)| {
            format!(
                "no value of `{}` lies in {}..={} as the terms require",
                name(*c),
                r.0,
                r.1
            )
        })
    }

    fn conjuncts(&self, f: &mut dyn FnMut(usize, &Test)) {
        match self {
            Bound::And(a, b) => {
                a.conjuncts(f);
                b.conjuncts(f);
            }
            Bound::Leaf { col, test } => f(*col, test),
            Bound::Or(..) | Bound::Not(_) => {}
        }
    }
}

/// The inclusive interval an integer term allows, or `None` when it is no interval.
fn int_interval(test: &Test, min: i128, max: i128) -> Option<(i128, i128)> {
    match test {
        Test::Cmp(op, s) => {
            let c = int_of(*s)?;
            match op {
                CmpOp::Lt => Some((min, c - 1)),
                CmpOp::Le => Some((min, c)),
                CmpOp::Eq => Some((c, c)),
                CmpOp::Ge => Some((c, max)),
                CmpOp::Gt => Some((c + 1, max)),
                CmpOp::Ne => None,
            }
        }
        Test::Between(lo, hi) => Some((int_of(*lo)?, int_of(*hi)?)),
        Test::In(_) => None,
    }
}

/// The closed interval a float term allows (`<` and `>` taken as closed, which can only
/// miss an empty case, never report a false one).
fn float_interval(test: &Test) -> Option<(f64, f64)> {
    let f = |s: &Scalar| match *s {
        Scalar::F(v) => Some(v),
        Scalar::U(v) => Some(v as f64),
        Scalar::I(v) => Some(v as f64),
    };
    match test {
        Test::Cmp(CmpOp::Lt | CmpOp::Le, s) => Some((f64::NEG_INFINITY, f(s)?)),
        Test::Cmp(CmpOp::Gt | CmpOp::Ge, s) => Some((f(s)?, f64::INFINITY)),
        Test::Cmp(CmpOp::Eq, s) => Some((f(s)?, f(s)?)),
        Test::Between(lo, hi) => Some((f(lo)?, f(hi)?)),
        _ => None,
    }
}

fn int_of(s: Scalar) -> Option<i128> {
    match s {
        Scalar::U(v) => Some(v.into()),
        Scalar::I(v) => Some(v.into()),
        Scalar::F(_) => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernels::predicate::{compile, Value};
    use proptest::prelude::*;

    fn schema() -> Vec<(String, ElemType)> {
        vec![
            ("a".to_string(), ElemType::U32),
            ("b".to_string(), ElemType::I8),
            ("f".to_string(), ElemType::F64),
            ("n".to_string(), ElemType::U4),
        ]
    }

    fn ranges(text: &str) -> Option<Vec<ColumnRange>> {
        compile(text, &schema()).unwrap().ranges(&schema())
    }

    fn r(col: usize, lo: i128, hi: i128) -> ColumnRange {
        ColumnRange { col, lo, hi }
    }

    #[test]
    fn terms_on_one_column_intersect() {
        assert_eq!(
            ranges("a >= 10 and b < 0 and a < 100 and a between 5 and 50 and 20 < a"),
            Some(vec![r(0, 21, 50), r(1, -128, -1)])
        );
        assert_eq!(ranges("b > -3 and b <= 3"), Some(vec![r(1, -2, 3)]));
    }

    #[test]
    fn equality_is_a_single_point() {
        let got = ranges("a = 7").unwrap();
        assert_eq!(got, vec![r(0, 7, 7)]);
        assert_eq!(got[0].hi_excl(), 8);
        assert!(!got[0].is_empty());
    }

    #[test]
    fn impossible_terms_give_empty_ranges() {
        let got = ranges("a < 0").unwrap();
        assert_eq!(got, vec![r(0, 0, -1)]);
        assert!(got[0].is_empty());
        assert!(ranges("a = 3 and a = 4").unwrap()[0].is_empty());
        assert!(ranges("n between 9 and 2").unwrap()[0].is_empty());
        assert!(ranges("n > 15").unwrap()[0].is_empty());
    }

    #[test]
    fn one_sided_terms_take_the_type_limits() {
        assert_eq!(ranges("a > 1"), Some(vec![r(0, 2, 4_294_967_295)]));
        assert_eq!(ranges("n <= 9"), Some(vec![r(3, 0, 9)]));
        assert_eq!(ranges("a > 1").unwrap()[0].hi_excl(), 1 << 32);
    }

    #[test]
    fn anything_but_a_conjunction_of_ranges_is_none() {
        for text in [
            "a < 1 or a > 5",
            "not a < 1",
            "a in (1, 2)",
            "a not in (1)",
            "a != 3",
            "f < 1.5",
            "a < 5 and f < 1.5",
            "a < 5 and (b = 1 or b = 2)",
        ] {
            assert_eq!(ranges(text), None, "{text}");
        }
    }

    #[test]
    fn a_tree_that_does_not_fit_the_schema_is_none() {
        let b = compile("n < 3", &schema()).unwrap();
        assert_eq!(b.ranges(&schema()[..2]), None);
    }

    fn range_op() -> impl Strategy<Value = &'static str> {
        proptest::sample::select(vec!["<", "<=", "=", ">=", ">"])
    }

    /// One range term on `a` (u8) or `b` (i8), in column-first or reversed form.
    fn term() -> impl Strategy<Value = String> {
        prop_oneof![
            (range_op(), any::<u8>()).prop_map(|(op, v)| format!("a {op} {v}")),
            (range_op(), any::<i8>()).prop_map(|(op, v)| format!("{v} {op} b")),
            (any::<u8>(), any::<u8>()).prop_map(|(x, y)| format!("a between {x} and {y}")),
            (any::<i8>(), any::<i8>()).prop_map(|(x, y)| format!("b between {x} and {y}")),
        ]
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(128))]

        // The ranges must accept exactly the rows the reference evaluator accepts; every
        // value of each column is tried with the other column held fixed.
        #[test]
        fn ranges_agree_with_eval(terms in proptest::collection::vec(term(), 1..6), a0: u8, b0: i8) {
            let schema = [("a".to_string(), ElemType::U8), ("b".to_string(), ElemType::I8)];
            let bound = compile(&terms.join(" and "), &schema).unwrap();
            let ranges = bound.ranges(&schema).unwrap();
            let inside = |col: usize, v: i128| {
                ranges.iter().filter(|r| r.col == col).all(|r| r.lo <= v && v <= r.hi)
            };
            let rows = (0..=255u8).map(|a| (a, b0)).chain((-128..=127i8).map(|b| (a0, b)));
            for (a, b) in rows {
                let want = bound.eval(&|c| if c == 0 { Value::U(a.into()) } else { Value::I(b.into()) });
                prop_assert_eq!(inside(0, a.into()) && inside(1, b.into()), want, "a={} b={}", a, b);
            }
        }
    }
}
