//! The predicate language of the scan kernel: text → [`Expr`] ([`parse`]) → typed
//! [`Bound`] tree ([`bind`]), evaluated row at a time by [`Bound::eval`], reduced to
//! per-column integer ranges by [`Bound::ranges`] and rendered as SQL by [`Bound::to_sql`].
//!
//! # Grammar (EBNF, ISO 14977 notation)
//!
//! ```text
//! predicate = or_expr ;
//! or_expr   = and_expr , { "or" , and_expr } ;
//! and_expr  = unary , { "and" , unary } ;
//! unary     = "not" , unary | primary ;
//! primary   = "(" , or_expr , ")"
//!           | column , cmp_op , literal
//!           | literal , cmp_op , column        (* stored as column form, operator mirrored *)
//!           | column , "between" , literal , "and" , literal
//!           | column , [ "not" ] , "in" , "(" , literal , { "," , literal } , ")" ;
//! cmp_op    = "<" | "<=" | "=" | "!=" | ">=" | ">" ;
//! column    = ( letter | "_" ) , { letter | digit | "_" } ;   (* ASCII, not a keyword *)
//! literal   = integer | float | string ;
//! integer   = [ sign ] , digits | ( "0x" | "0X" ) , hexdigit , { hexdigit } ;
//! float     = [ sign ] , ( digits , "." , digits , [ exponent ]
//!                        | "." , digits , [ exponent ]
//!                        | digits , exponent
//!                        | "nan" | "inf" ) ;
//! exponent  = ( "e" | "E" ) , [ sign ] , digits ;
//! digits    = digit , { digit } ;
//! sign      = "+" | "-" ;
//! string    = "'" , { ? any character but "'" ? | "''" } , "'" ;
//! ```
//!
//! `not` binds tighter than `and`, which binds tighter than `or`; `and` and `or` group
//! to the left. Keywords (`and or not between in nan inf`) are case-insensitive and
//! cannot be column names; column names are case-sensitive. Tokens may be separated by
//! any whitespace. `==` and `<>` are rejected with a hint to write `=` or `!=`, so each
//! comparison has exactly one spelling. A number must not run straight into a letter,
//! digit, `_` or `.` (`12abc`, `1.2.3` are errors). Integer literals must fit in 128
//! bits; hex literals take no sign. An empty predicate is an error, not "match all".
//! At most 256 `and`/`or`/`not` operators and parentheses are accepted, which bounds the
//! depth of the tree every later stage walks recursively.
//!
//! # Literal conversion (binding)
//!
//! * Integer columns (`u1`..`u64`, `i8`..`i64`) take integer literals only. The value
//!   must lie in the column type's range, else an out-of-range error; a float literal
//!   (anything with `.`, an exponent, `nan` or `inf`) is a type mismatch.
//! * Float columns take integer and float literals, rounded to the column type
//!   round-to-nearest-ties-to-even: float literals by parsing their original text as
//!   `f32`/`f64` (correctly rounded), integer literals by an `as` cast (also
//!   round-to-nearest-even, so `16777217` on an `f32` column becomes `16777216`).
//!   `nan`, `inf` and `-inf` are allowed; a finite literal that rounds to infinity is an
//!   out-of-range error; one that rounds to a subnormal or to zero is accepted.
//! * A string literal on any column is a type mismatch (strings exist only so that
//!   `x = 'abc'` gets a clear error).
//! * `between lo and hi` with `lo > hi` is accepted and matches no row.
//!
//! # Semantics
//!
//! Floats compare per IEEE 754: `-0.0 = 0.0`, and a comparison involving NaN is
//! unordered, so it is false for every operator except `!=`, which is true. Hence
//! `between` and `in` never match NaN. `not` is plain logical negation of the result,
//! so `not (x < 1)` DOES match a NaN `x` (it negates a false comparison) while `x >= 1`
//! does not: the two are different predicates on float columns.

mod ast;
mod bind;
mod eval;
mod lex;
mod parse;
mod ranges;
mod sql;

pub use ast::{CmpOp, Expr, Literal, Span, Spanned};
pub use bind::{bind, Bound, Scalar, Test};
pub use eval::Value;
pub use parse::parse;
pub use ranges::ColumnRange;

use crate::table::ElemType;

/// Parses `text` and binds it against `schema`; errors carry the text for [`PredicateError::caret`].
pub fn compile(text: &str, schema: &[(String, ElemType)]) -> Result<Bound, PredicateError> {
    bind(&parse(text)?, schema).map_err(|e| e.with_text(text))
}

/// What went wrong with a predicate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ErrorKind {
    /// The text does not follow the grammar.
    Syntax,
    /// A column name not in the schema.
    UnknownColumn,
    /// A literal outside the column type's range.
    OutOfRange,
    /// A literal of the wrong kind for its column (string anywhere, float on an integer).
    TypeMismatch,
}

impl ErrorKind {
    fn label(self) -> &'static str {
        match self {
            ErrorKind::Syntax => "syntax error",
            ErrorKind::UnknownColumn | ErrorKind::OutOfRange | ErrorKind::TypeMismatch => "error",
        }
    }
}

/// A predicate error: kind, byte span in the predicate text, and a one-line message.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("predicate {} at column {}: {}", .kind.label(), self.column(), .message)]
pub struct PredicateError {
    kind: ErrorKind,
    span: Span,
    text: String,
    message: String,
}

impl PredicateError {
    fn new(kind: ErrorKind, span: Span, text: &str, message: String) -> Self {
        PredicateError {
            kind,
            span,
            text: text.to_string(),
            message,
        }
    }

    /// The kind of error.
    pub fn kind(&self) -> ErrorKind {
        self.kind
    }

    /// The byte span of the offending text.
    pub fn span(&self) -> Span {
        self.span
    }

    /// The message without the position prefix.
    pub fn message(&self) -> &str {
        &self.message
    }

    /// The predicate text (empty for an error from [`bind`] until [`Self::with_text`]).
    pub fn text(&self) -> &str {
        &self.text
    }

    /// Attaches the predicate text, which [`bind`] does not see.
    pub fn with_text(mut self, text: &str) -> Self {
        self.text = text.to_string();
        self
    }

    /// 1-based character column of the span start (the byte offset + 1 without the text).
    pub fn column(&self) -> usize {
        column_at(&self.text, self.span.pos)
    }

    /// Two lines: the predicate (line breaks shown as spaces) and `^` under the span
    /// (one `^` for an empty span, e.g. at the end of the text).
    pub fn caret(&self) -> String {
        let line: String = self
            .text
            .chars()
            .map(|c| if c == '\n' || c == '\r' { ' ' } else { c })
            .collect();
        let Span { pos, len } = self.span;
        // Tabs are copied so the caret lines up however the terminal expands them.
        let indent: String = match self.text.get(..pos) {
            Some(before) => before
                .chars()
                .map(|c| if c == '\t' { '\t' } else { ' ' })
                .collect(),
            None => " ".repeat(pos),
        };
        let width = self
            .text
            .get(pos..pos + len)
            .map_or(len, |s| s.chars().count())
            .max(1);
        format!("{line}\n{indent}{}", "^".repeat(width))
    }
}

/// 1-based character column of byte offset `pos` in `text`.
fn column_at(text: &str, pos: usize) -> usize {
    text.get(..pos).map_or(pos, |s| s.chars().count()) + 1
}

#[cfg(test)]
mod tests {
    use super::*;

    fn schema() -> Vec<(String, ElemType)> {
        vec![
            ("a".to_string(), ElemType::U8),
            ("b".to_string(), ElemType::I32),
            ("c".to_string(), ElemType::F32),
        ]
    }

    fn compile_err(text: &str) -> PredicateError {
        compile(text, &schema()).unwrap_err()
    }

    #[test]
    fn unknown_column_lists_the_schema() {
        let e = compile_err("a < 3 and wind < 3");
        assert_eq!(e.kind(), ErrorKind::UnknownColumn);
        assert_eq!(
            e.to_string(),
            "predicate error at column 11: unknown column `wind` (columns: a, b, c)"
        );
        assert_eq!(e.caret(), "a < 3 and wind < 3\n          ^^^^");
    }

    #[test]
    fn out_of_range_points_at_the_literal() {
        let e = compile_err("a < 300");
        assert_eq!(e.kind(), ErrorKind::OutOfRange);
        assert_eq!(
            e.to_string(),
            "predicate error at column 5: literal 300 is out of range for u8 column `a` (0..=255)"
        );
        assert_eq!(e.caret(), "a < 300\n    ^^^");
    }

    #[test]
    fn type_mismatch_for_float_and_string() {
        let e = compile_err("a < 1.5");
        assert_eq!(e.kind(), ErrorKind::TypeMismatch);
        assert_eq!(
            e.to_string(),
            "predicate error at column 5: float literal 1.5 on integer column `a` (u8)"
        );
        let e = compile_err("c = 'abc'");
        assert_eq!(e.kind(), ErrorKind::TypeMismatch);
        assert_eq!(
            e.to_string(),
            "predicate error at column 5: string literal on f32 column `c`: predicates compare numbers only"
        );
        assert_eq!(e.caret(), "c = 'abc'\n    ^^^^^");
    }

    #[test]
    fn columns_count_characters_and_caret_keeps_tabs() {
        // `é` is two bytes: the column and caret count it once.
        let e = compile_err("b = 'é' or\t!x");
        assert_eq!(e.span(), Span { pos: 12, len: 1 });
        assert_eq!(e.column(), 12);
        assert_eq!(e.caret(), "b = 'é' or\t!x\n          \t^");
    }

    #[test]
    fn bind_error_without_text_uses_byte_offsets() {
        let e = bind(&parse("a < 300").unwrap(), &schema()).unwrap_err();
        assert_eq!(e.text(), "");
        assert_eq!(e.column(), 5);
        assert_eq!(e.caret(), "\n    ^^^");
    }

    #[test]
    fn line_breaks_show_as_spaces_in_the_caret() {
        let e = compile_err("a < 1\nor z > 2");
        assert_eq!(e.message(), "unknown column `z` (columns: a, b, c)");
        assert_eq!(e.caret(), "a < 1 or z > 2\n         ^");
    }
}
