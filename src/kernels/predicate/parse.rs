//! Recursive-descent parser from tokens to [`Expr`]; the grammar is in the parent
//! module's documentation.

use super::ast::{CmpOp, Expr, Literal, Span, Spanned};
use super::lex::{lex, Tok, Token};
use super::{column_at, ErrorKind, PredicateError};

/// Most `and`/`or`/`not` operators plus grouping parentheses in one predicate; bounds
/// the recursion of the parser and of every stage that walks the tree.
const MAX_OPERATORS: usize = 256;

/// Words that cannot be column names (`nan` and `inf` lex as literals instead).
const KEYWORDS: [&str; 5] = ["and", "or", "not", "between", "in"];

/// Parses predicate text into an [`Expr`]; every error is [`ErrorKind::Syntax`] except an
/// integer literal beyond 128 bits ([`ErrorKind::OutOfRange`]).
pub fn parse(text: &str) -> Result<Expr, PredicateError> {
    let mut p = Parser {
        text,
        tokens: lex(text)?,
        at: 0,
        operators: 0,
    };
    let expr = p.or_expr()?;
    let t = p.next();
    match t.tok {
        Tok::End => Ok(expr),
        Tok::RParen => Err(p.error(t.span, "unmatched `)`".to_string())),
        _ => Err(p.error(
            t.span,
            format!(
                "expected `and`, `or` or the end of the predicate, found {}",
                p.describe(&t)
            ),
        )),
    }
}

/// The token as a column name: an identifier that is not a keyword.
fn column_name(t: &Token) -> Option<Spanned<String>> {
    match &t.tok {
        Tok::Ident(name) if !KEYWORDS.iter().any(|k| name.eq_ignore_ascii_case(k)) => {
            Some(Spanned {
                value: name.clone(),
                span: t.span,
            })
        }
        _ => None,
    }
}

struct Parser<'a> {
    text: &'a str,
    /// Always ends with [`Tok::End`].
    tokens: Vec<Token>,
    at: usize,
    operators: usize,
}

impl Parser<'_> {
    fn peek(&self) -> &Token {
        &self.tokens[self.at.min(self.tokens.len() - 1)]
    }

    fn next(&mut self) -> Token {
        let t = self.peek().clone();
        if t.tok != Tok::End {
            self.at += 1;
        }
        t
    }

    fn is_keyword(t: &Token, kw: &str) -> bool {
        matches!(&t.tok, Tok::Ident(s) if s.eq_ignore_ascii_case(kw))
    }

    fn error(&self, span: Span, message: String) -> PredicateError {
        PredicateError::new(ErrorKind::Syntax, span, self.text, message)
    }

    /// How a token is shown in "found ..." (string contents could hold a line break).
    fn describe(&self, t: &Token) -> String {
        match &t.tok {
            Tok::End => "end of input".to_string(),
            Tok::Lit(Literal::Str(_)) => "a string literal".to_string(),
            _ => format!("`{}`", &self.text[t.span.pos..t.span.pos + t.span.len]),
        }
    }

    fn count_operator(&mut self, at: Span) -> Result<(), PredicateError> {
        self.operators += 1;
        if self.operators > MAX_OPERATORS {
            return Err(self.error(
                at,
                format!("more than {MAX_OPERATORS} `and`/`or`/`not` operators and parentheses"),
            ));
        }
        Ok(())
    }

    /// Left-associative chain of `sub` joined by keyword `kw`.
    fn chain(
        &mut self,
        kw: &str,
        join: fn(Box<Expr>, Box<Expr>) -> Expr,
        sub: fn(&mut Self) -> Result<Expr, PredicateError>,
    ) -> Result<Expr, PredicateError> {
        let mut left = sub(self)?;
        while Self::is_keyword(self.peek(), kw) {
            let t = self.next();
            self.count_operator(t.span)?;
            let right = sub(self)?;
            left = join(Box::new(left), Box::new(right));
        }
        Ok(left)
    }

    fn or_expr(&mut self) -> Result<Expr, PredicateError> {
        self.chain("or", Expr::Or, Self::and_expr)
    }

    fn and_expr(&mut self) -> Result<Expr, PredicateError> {
        self.chain("and", Expr::And, Self::unary)
    }

    fn unary(&mut self) -> Result<Expr, PredicateError> {
        if Self::is_keyword(self.peek(), "not") {
            let t = self.next();
            self.count_operator(t.span)?;
            return Ok(Expr::Not(Box::new(self.unary()?)));
        }
        self.primary()
    }

    fn primary(&mut self) -> Result<Expr, PredicateError> {
        let t = self.next();
        if let Some(col) = column_name(&t) {
            return self.column_test(col);
        }
        match t.tok {
            Tok::LParen => {
                self.count_operator(t.span)?;
                let inner = self.or_expr()?;
                let close = self.next();
                if close.tok != Tok::RParen {
                    return Err(self.error(
                        close.span,
                        format!(
                            "expected `)` to close the `(` at column {}, found {}",
                            column_at(self.text, t.span.pos),
                            self.describe(&close)
                        ),
                    ));
                }
                Ok(inner)
            }
            Tok::Lit(ref lit) => {
                let lit = Spanned {
                    value: lit.clone(),
                    span: t.span,
                };
                let op_tok = self.next();
                let Tok::Op(op) = op_tok.tok else {
                    return Err(self.error(
                        op_tok.span,
                        format!(
                            "expected a comparison operator after the literal, found {}",
                            self.describe(&op_tok)
                        ),
                    ));
                };
                let col = self.column_after(op)?;
                Ok(Expr::Cmp {
                    col,
                    op: op.mirrored(),
                    lit,
                })
            }
            _ => Err(self.error(
                t.span,
                format!(
                    "expected a column name, `not` or `(`, found {}",
                    self.describe(&t)
                ),
            )),
        }
    }

    /// The column of a reversed comparison `lit op col`.
    fn column_after(&mut self, op: CmpOp) -> Result<Spanned<String>, PredicateError> {
        let t = self.next();
        column_name(&t).ok_or_else(|| {
            self.error(
                t.span,
                format!(
                    "expected a column name after `{}`, found {}",
                    op.symbol(),
                    self.describe(&t)
                ),
            )
        })
    }

    /// What follows a column name: a comparison, `between`, `in` or `not in`.
    fn column_test(&mut self, col: Spanned<String>) -> Result<Expr, PredicateError> {
        let t = self.next();
        if let Tok::Op(op) = t.tok {
            let lit = self.literal(&format!("`{}`", op.symbol()))?;
            return Ok(Expr::Cmp { col, op, lit });
        }
        if Self::is_keyword(&t, "between") {
            let lo = self.literal("`between`")?;
            let and = self.next();
            if !Self::is_keyword(&and, "and") {
                return Err(self.error(
                    and.span,
                    format!(
                        "expected `and` after the lower bound of `between`, found {}",
                        self.describe(&and)
                    ),
                ));
            }
            let hi = self.literal("`and`")?;
            return Ok(Expr::Between { col, lo, hi });
        }
        let negated = Self::is_keyword(&t, "not");
        let in_tok = if negated { self.next() } else { t };
        if Self::is_keyword(&in_tok, "in") {
            let list = self.list()?;
            return Ok(Expr::In { col, list, negated });
        }
        let message = if negated {
            format!(
                "expected `in` after `not`, found {}",
                self.describe(&in_tok)
            )
        } else {
            format!(
                "expected a comparison operator, `between`, `in` or `not in` after column `{}`, found {}",
                col.value,
                self.describe(&in_tok)
            )
        };
        Err(self.error(in_tok.span, message))
    }

    /// `"(" literal { "," literal } ")"` after `in`.
    fn list(&mut self) -> Result<Vec<Spanned<Literal>>, PredicateError> {
        let open = self.next();
        if open.tok != Tok::LParen {
            return Err(self.error(
                open.span,
                format!("expected `(` after `in`, found {}", self.describe(&open)),
            ));
        }
        let mut list = vec![self.literal("`(`")?];
        loop {
            let t = self.next();
            match t.tok {
                Tok::Comma => list.push(self.literal("`,`")?),
                Tok::RParen => return Ok(list),
                _ => {
                    return Err(self.error(
                        t.span,
                        format!(
                            "expected `,` or `)` in the `in` list, found {}",
                            self.describe(&t)
                        ),
                    ))
                }
            }
        }
    }

    fn literal(&mut self, after: &str) -> Result<Spanned<Literal>, PredicateError> {
        let t = self.next();
        match t.tok {
            Tok::Lit(value) => Ok(Spanned {
                value,
                span: t.span,
            }),
            _ => Err(self.error(
                t.span,
                format!(
                    "expected a literal after {after}, found {}",
                    self.describe(&t)
                ),
            )),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn canon(text: &str) -> String {
        parse(text).unwrap().to_string()
    }

    #[test]
    fn precedence_is_not_then_and_then_or() {
        assert_eq!(
            canon("not a < 1 and b < 2 or c < 3"),
            "(((not (a < 1)) and (b < 2)) or (c < 3))"
        );
        assert_eq!(
            canon("a < 1 or b < 2 and c < 3"),
            "((a < 1) or ((b < 2) and (c < 3)))"
        );
        assert_eq!(
            canon("a = 1 and b = 2 and c = 3 or d = 4 or e = 5"),
            "(((((a = 1) and (b = 2)) and (c = 3)) or (d = 4)) or (e = 5))"
        );
        assert_eq!(canon("not not a = 1"), "(not (not (a = 1)))");
    }

    #[test]
    fn parentheses_group() {
        assert_eq!(
            canon("(a < 1 or b < 2) and not (c < 3 or c > 4)"),
            "(((a < 1) or (b < 2)) and (not ((c < 3) or (c > 4))))"
        );
        assert_eq!(canon("((((a<1))))"), "(a < 1)");
        assert_eq!(canon("(a<1)and(b<2)"), "((a < 1) and (b < 2))");
    }

    #[test]
    fn every_operator_and_test_form() {
        for op in CmpOp::ALL {
            let e = parse(&format!("x{}1", op.symbol())).unwrap();
            assert!(
                matches!(e, Expr::Cmp { op: got, .. } if got == op),
                "{op:?}"
            );
        }
        assert_eq!(canon("x between -1 and 2.5"), "(x between -1 and 2.5)");
        assert_eq!(canon("x in (1,2 , 3)"), "(x in (1, 2, 3))");
        assert_eq!(canon("x not in (nan)"), "(x not in (nan))");
        assert_eq!(
            canon("x between 1 and 2 and y < 3"),
            "((x between 1 and 2) and (y < 3))"
        );
    }

    #[test]
    fn reversed_comparison_is_mirrored() {
        for (text, canonical) in [
            ("3 < x", "(x > 3)"),
            ("3 <= x", "(x >= 3)"),
            ("3 = x", "(x = 3)"),
            ("-1.5 != y", "(y != -1.5)"),
            ("0 >= x", "(x <= 0)"),
            ("0 > x", "(x < 0)"),
        ] {
            assert_eq!(canon(text), canonical, "{text}");
        }
    }

    #[test]
    fn keywords_ignore_case_column_names_do_not() {
        assert_eq!(
            canon("X BETWEEN 1 AND 2 Or NOT y In (1) aNd Z NOT IN (2)"),
            "((X between 1 and 2) or ((not (y in (1))) and (Z not in (2))))"
        );
        assert_eq!(
            canon("nanny < 1 and Inform > 2"),
            "((nanny < 1) and (Inform > 2))"
        );
    }

    #[test]
    fn spans_cover_names_and_literals() {
        let Expr::And(a, b) = parse("  speed >= 0x10 and 'a' < t").unwrap() else {
            panic!("not an and");
        };
        let Expr::Cmp { col, lit, .. } = *a else {
            panic!("not a comparison")
        };
        assert_eq!(
            (col.span, lit.span),
            (Span { pos: 2, len: 5 }, Span { pos: 11, len: 4 })
        );
        let Expr::Cmp { col, lit, op } = *b else {
            panic!("not a comparison")
        };
        assert_eq!(op, CmpOp::Gt);
        assert_eq!(
            (col.span, lit.span),
            (Span { pos: 26, len: 1 }, Span { pos: 20, len: 3 })
        );
    }

    /// Each case: text, expected kind, expected `Display`, expected caret line.
    #[test]
    fn errors_give_position_message_and_caret() {
        for (text, kind, shown, caret) in [
            ("v < ", ErrorKind::Syntax, "predicate syntax error at column 5: expected a literal after `<`, found end of input", "    ^"),
            ("v << 3", ErrorKind::Syntax, "predicate syntax error at column 4: expected a literal after `<`, found `<`", "   ^"),
            ("(v < 3", ErrorKind::Syntax, "predicate syntax error at column 7: expected `)` to close the `(` at column 1, found end of input", "      ^"),
            ("v < 3 w", ErrorKind::Syntax, "predicate syntax error at column 7: expected `and`, `or` or the end of the predicate, found `w`", "      ^"),
            ("v < 3)", ErrorKind::Syntax, "predicate syntax error at column 6: unmatched `)`", "     ^"),
        ] {
            let e = parse(text).unwrap_err();
            assert_eq!(e.kind(), kind, "{text}");
            assert_eq!(e.to_string(), shown, "{text}");
            assert_eq!(e.caret(), format!("{text}\n{caret}"), "{text}");
        }
    }

    #[test]
    fn every_syntax_error_message() {
        for (text, column, message) in [
            ("", 1, "expected a column name, `not` or `(`, found end of input"),
            ("and < 1", 1, "expected a column name, `not` or `(`, found `and`"),
            ("v < 1 and", 10, "expected a column name, `not` or `(`, found end of input"),
            ("v between 1 2", 13, "expected `and` after the lower bound of `between`, found `2`"),
            ("v between 1 and", 16, "expected a literal after `and`, found end of input"),
            ("v in 1", 6, "expected `(` after `in`, found `1`"),
            ("v in ()", 7, "expected a literal after `(`, found `)`"),
            ("v in (1 2)", 9, "expected `,` or `)` in the `in` list, found `2`"),
            ("v in (1,)", 9, "expected a literal after `,`, found `)`"),
            ("v not 3", 7, "expected `in` after `not`, found `3`"),
            ("v 3", 3, "expected a comparison operator, `between`, `in` or `not in` after column `v`, found `3`"),
            ("v = w", 5, "expected a literal after `=`, found `w`"),
            ("3 v", 3, "expected a comparison operator after the literal, found `v`"),
            ("3 < 4", 5, "expected a column name after `<`, found `4`"),
            ("3 < 'x'", 5, "expected a column name after `<`, found a string literal"),
            ("v = 1 or w = 'a\nb' z", 20, "expected `and`, `or` or the end of the predicate, found `z`"),
        ] {
            let e = parse(text).unwrap_err();
            assert_eq!((e.kind(), e.column(), e.message()), (ErrorKind::Syntax, column, message), "{text:?}");
            assert!(!e.to_string().contains('\n'), "{text:?}");
        }
    }

    #[test]
    fn operator_count_is_limited() {
        let ok = format!("{}v < 1", "not ".repeat(MAX_OPERATORS));
        assert!(parse(&ok).is_ok());
        let too_many = format!("{}v < 1", "not ".repeat(MAX_OPERATORS + 1));
        let e = parse(&too_many).unwrap_err();
        assert_eq!(e.column(), 4 * MAX_OPERATORS + 1);
        assert_eq!(
            e.message(),
            "more than 256 `and`/`or`/`not` operators and parentheses"
        );
        let deep = format!("{}v < 1{}", "(".repeat(10_000), ")".repeat(10_000));
        assert_eq!(parse(&deep).unwrap_err().column(), MAX_OPERATORS + 1);
        let long = vec!["v < 1"; MAX_OPERATORS + 2].join(" or ");
        assert_eq!(parse(&long).unwrap_err().kind(), ErrorKind::Syntax);
    }

    fn unspanned<T>(value: T) -> Spanned<T> {
        Spanned {
            value,
            span: Span::default(),
        }
    }

    /// The tree with every span zeroed, to compare a parsed tree with a generated one.
    fn unspan(e: &Expr) -> Expr {
        let u = |e: &Expr| Box::new(unspan(e));
        let lits = |l: &[Spanned<Literal>]| l.iter().map(|x| unspanned(x.value.clone())).collect();
        match e {
            Expr::Cmp { col, op, lit } => Expr::Cmp {
                col: unspanned(col.value.clone()),
                op: *op,
                lit: unspanned(lit.value.clone()),
            },
            Expr::Between { col, lo, hi } => Expr::Between {
                col: unspanned(col.value.clone()),
                lo: unspanned(lo.value.clone()),
                hi: unspanned(hi.value.clone()),
            },
            Expr::In { col, list, negated } => Expr::In {
                col: unspanned(col.value.clone()),
                list: lits(list),
                negated: *negated,
            },
            Expr::And(a, b) => Expr::And(u(a), u(b)),
            Expr::Or(a, b) => Expr::Or(u(a), u(b)),
            Expr::Not(a) => Expr::Not(u(a)),
        }
    }

    /// Checks that every span in `e` covers the printed form of its name or literal.
    fn check_spans(text: &str, e: &Expr) {
        let at = |s: Span| &text[s.pos..s.pos + s.len];
        let lit_ok = |l: &Spanned<Literal>| assert_eq!(at(l.span), l.value.to_string());
        match e {
            Expr::Cmp { col, lit, .. } => {
                assert_eq!(at(col.span), col.value);
                lit_ok(lit);
            }
            Expr::Between { col, lo, hi } => {
                assert_eq!(at(col.span), col.value);
                lit_ok(lo);
                lit_ok(hi);
            }
            Expr::In { col, list, .. } => {
                assert_eq!(at(col.span), col.value);
                list.iter().for_each(lit_ok);
            }
            Expr::And(a, b) | Expr::Or(a, b) => {
                check_spans(text, a);
                check_spans(text, b);
            }
            Expr::Not(a) => check_spans(text, a),
        }
    }

    fn arb_column() -> impl Strategy<Value = String> {
        "[A-Za-z_][A-Za-z0-9_]{0,5}".prop_filter("keyword", |s| {
            !KEYWORDS
                .iter()
                .chain(&["nan", "inf"])
                .any(|k| s.eq_ignore_ascii_case(k))
        })
    }

    fn arb_float_text() -> impl Strategy<Value = String> {
        prop_oneof![
            ("[+-]?[0-9]{0,4}", "[0-9]{1,4}", "([eE][+-]?[0-9]{1,3})?")
                .prop_map(|(i, f, e)| format!("{i}.{f}{e}")),
            "[+-]?[0-9]{1,4}[eE][+-]?[0-9]{1,3}",
            "[+-]?([nN][aA][nN]|[iI][nN][fF])",
        ]
    }

    fn arb_literal() -> impl Strategy<Value = Spanned<Literal>> {
        prop_oneof![
            any::<i128>().prop_map(Literal::Int),
            arb_float_text().prop_map(|t| Literal::Float(t.parse().unwrap(), t)),
            any::<String>().prop_map(Literal::Str),
        ]
        .prop_map(unspanned)
    }

    fn arb_expr() -> impl Strategy<Value = Expr> {
        let col = || arb_column().prop_map(unspanned);
        let leaf = prop_oneof![
            (
                col(),
                proptest::sample::select(CmpOp::ALL.to_vec()),
                arb_literal()
            )
                .prop_map(|(col, op, lit)| Expr::Cmp { col, op, lit }),
            (col(), arb_literal(), arb_literal()).prop_map(|(col, lo, hi)| Expr::Between {
                col,
                lo,
                hi
            }),
            (
                col(),
                proptest::collection::vec(arb_literal(), 1..4),
                any::<bool>()
            )
                .prop_map(|(col, list, negated)| Expr::In { col, list, negated }),
        ];
        leaf.prop_recursive(4, 16, 2, |inner| {
            prop_oneof![
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::And(Box::new(a), Box::new(b))),
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::Or(Box::new(a), Box::new(b))),
                inner.prop_map(|a| Expr::Not(Box::new(a))),
            ]
        })
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(128))]

        #[test]
        fn printed_form_parses_back_to_the_same_tree(e in arb_expr()) {
            let text = e.to_string();
            let parsed = parse(&text).map_err(|err| TestCaseError::fail(format!("{err}\n{}", err.caret())))?;
            prop_assert_eq!(&unspan(&parsed), &e);
            check_spans(&text, &parsed);
        }
    }
}
