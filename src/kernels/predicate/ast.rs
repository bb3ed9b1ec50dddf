//! The syntax tree a predicate parses to, with the byte span of every column name and
//! literal, and its canonical fully-parenthesised printed form.

use std::fmt;

/// A byte range in the predicate text.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub struct Span {
    /// Byte offset of the first byte.
    pub pos: usize,
    /// Length in bytes (0 for a position, e.g. the end of the text).
    pub len: usize,
}

/// A node with the span of the text it was parsed from.
#[derive(Debug, Clone, PartialEq)]
pub struct Spanned<T> {
    /// The node.
    pub value: T,
    /// Where it is in the predicate text.
    pub span: Span,
}

/// A comparison operator.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum CmpOp {
    /// `<`
    Lt,
    /// `<=`
    Le,
    /// `=`
    Eq,
    /// `!=`
    Ne,
    /// `>=`
    Ge,
    /// `>`
    Gt,
}

impl CmpOp {
    /// Every operator, in a fixed order.
    pub const ALL: [CmpOp; 6] = [
        CmpOp::Lt,
        CmpOp::Le,
        CmpOp::Eq,
        CmpOp::Ne,
        CmpOp::Ge,
        CmpOp::Gt,
    ];

    /// The operator as written in a predicate (SQLite accepts the same spelling).
    pub fn symbol(self) -> &'static str {
        match self {
            CmpOp::Lt => "<",
            CmpOp::Le => "<=",
            CmpOp::Eq => "=",
            CmpOp::Ne => "!=",
            CmpOp::Ge => ">=",
            CmpOp::Gt => ">",
        }
    }

    /// The operator with its operands swapped: `3 < x` means `x > 3`.
    pub(super) fn mirrored(self) -> CmpOp {
        match self {
            CmpOp::Lt => CmpOp::Gt,
            CmpOp::Le => CmpOp::Ge,
            CmpOp::Ge => CmpOp::Le,
            CmpOp::Gt => CmpOp::Lt,
            CmpOp::Eq | CmpOp::Ne => self,
        }
    }
}

/// A literal as written, before it is converted to a column's type.
#[derive(Debug, Clone)]
pub enum Literal {
    /// A decimal or hex integer.
    Int(i128),
    /// A float (`1.5`, `.5`, `-2e-3`, `nan`, `inf`): its `f64` value and original text,
    /// which binding re-parses so an `f32` column gets the correctly rounded `f32`.
    Float(f64, String),
    /// A single-quoted string (always a type error once bound).
    Str(String),
}

/// Floats compare by bit pattern and text, so a parsed `nan` equals itself.
impl PartialEq for Literal {
    fn eq(&self, other: &Literal) -> bool {
        match (self, other) {
            (Literal::Int(a), Literal::Int(b)) => a == b,
            (Literal::Float(a, s), Literal::Float(b, t)) => a.to_bits() == b.to_bits() && s == t,
            (Literal::Str(a), Literal::Str(b)) => a == b,
            _ => false,
        }
    }
}

/// Prints the literal so that it lexes back to itself: integers in decimal, floats as
/// written, strings quoted with `'` doubled.
impl fmt::Display for Literal {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Literal::Int(v) => write!(f, "{v}"),
            Literal::Float(_, text) => f.write_str(text),
            Literal::Str(s) => write!(f, "'{}'", s.replace('\'', "''")),
        }
    }
}

/// A parsed predicate. A reversed comparison (`3 < x`) is stored as `x > 3`.
#[derive(Debug, Clone, PartialEq)]
pub enum Expr {
    /// `col op lit`.
    Cmp {
        /// Column name.
        col: Spanned<String>,
        /// Operator.
        op: CmpOp,
        /// Right-hand literal.
        lit: Spanned<Literal>,
    },
    /// `col between lo and hi` (both bounds inclusive).
    Between {
        /// Column name.
        col: Spanned<String>,
        /// Lower bound.
        lo: Spanned<Literal>,
        /// Upper bound.
        hi: Spanned<Literal>,
    },
    /// `col in (..)`, or `col not in (..)` when `negated`.
    In {
        /// Column name.
        col: Spanned<String>,
        /// The listed literals (at least one when parsed).
        list: Vec<Spanned<Literal>>,
        /// True for `not in`.
        negated: bool,
    },
    /// Both hold.
    And(Box<Expr>, Box<Expr>),
    /// Either holds.
    Or(Box<Expr>, Box<Expr>),
    /// Logical negation.
    Not(Box<Expr>),
}

/// Canonical form: every node in parentheses, lower-case keywords, single spaces;
/// [`crate::kernels::predicate::parse`] of it gives the same tree (up to spans).
impl fmt::Display for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Expr::Cmp { col, op, lit } => {
                write!(f, "({} {} {})", col.value, op.symbol(), lit.value)
            }
            Expr::Between { col, lo, hi } => {
                write!(f, "({} between {} and {})", col.value, lo.value, hi.value)
            }
            Expr::In { col, list, negated } => {
                let not = if *negated { " not" } else { "" };
                write!(f, "({}{not} in (", col.value)?;
                for (i, lit) in list.iter().enumerate() {
                    if i > 0 {
                        f.write_str(", ")?;
                    }
                    write!(f, "{}", lit.value)?;
                }
                f.write_str("))")
            }
            Expr::And(a, b) => write!(f, "({a} and {b})"),
            Expr::Or(a, b) => write!(f, "({a} or {b})"),
            Expr::Not(a) => write!(f, "(not {a})"),
        }
    }
}
