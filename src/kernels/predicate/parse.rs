//! Lexer and recursive-descent parser from predicate text to [`Expr`]; the grammar is in
//! the parent module's documentation.

use super::ast::{CmpOp, Expr, Literal, Span, Spanned};
use super::{column_at, ErrorKind, PredicateError};

/// Most `and`/`or`/`not` operators plus grouping parentheses in one predicate; bounds
/// the recursion of the parser and of every stage that walks the tree.
const MAX_OPERATORS: usize = 256;

/// Words that cannot be column names (`nan` and `inf` lex as literals instead).
const KEYWORDS: [&str; 5] = ["and", "or", "not", "between", "in"];

#[derive(Debug, Clone, PartialEq)]
enum Tok {
    Ident(String),
    Lit(Literal),
    Op(CmpOp),
    LParen,
    RParen,
    Comma,
    End,
}

#[derive(Debug, Clone)]
struct Token {
    tok: Tok,
    span: Span,
}

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

fn span(pos: usize, end: usize) -> Span {
    Span {
        pos,
        len: end - pos,
    }
}

fn error(kind: ErrorKind, text: &str, span: Span, message: String) -> PredicateError {
    PredicateError::new(kind, span, text, message)
}

fn is_ident_char(b: u8) -> bool {
    b.is_ascii_alphanumeric() || b == b'_'
}

/// End of the run of bytes from `i` satisfying `f`.
fn scan(bytes: &[u8], mut i: usize, f: impl Fn(u8) -> bool) -> usize {
    while i < bytes.len() && f(bytes[i]) {
        i += 1;
    }
    i
}

fn lex(text: &str) -> Result<Vec<Token>, PredicateError> {
    let bytes = text.as_bytes();
    let at = |i: usize| bytes.get(i).copied();
    let mut out = Vec::new();
    let mut i = 0;
    while let Some(c) = text[i..].chars().next() {
        let start = i;
        let (tok, end) = match c {
            _ if c.is_whitespace() => {
                i += c.len_utf8();
                continue;
            }
            '(' => (Tok::LParen, i + 1),
            ')' => (Tok::RParen, i + 1),
            ',' => (Tok::Comma, i + 1),
            '<' | '>' | '=' | '!' => {
                let two = text.get(i..i + 2).unwrap_or("");
                let (op, len) = match (c, two) {
                    (_, "<=") => (CmpOp::Le, 2),
                    (_, ">=") => (CmpOp::Ge, 2),
                    (_, "!=") => (CmpOp::Ne, 2),
                    (_, "==") | (_, "<>") => {
                        let hint = if two == "==" { "=" } else { "!=" };
                        return Err(error(
                            ErrorKind::Syntax,
                            text,
                            span(i, i + 2),
                            format!("`{two}` is not an operator; write `{hint}`"),
                        ));
                    }
                    ('<', _) => (CmpOp::Lt, 1),
                    ('>', _) => (CmpOp::Gt, 1),
                    ('=', _) => (CmpOp::Eq, 1),
                    _ => {
                        return Err(error(
                            ErrorKind::Syntax,
                            text,
                            span(i, i + 1),
                            "unexpected character `!` (not-equal is written `!=`)".to_string(),
                        ))
                    }
                };
                (Tok::Op(op), i + len)
            }
            '\'' => lex_string(text, i)?,
            'a'..='z' | 'A'..='Z' | '_' => {
                let end = scan(bytes, i, is_ident_char);
                let word = &text[i..end];
                if word.eq_ignore_ascii_case("nan") || word.eq_ignore_ascii_case("inf") {
                    (float_token(text, i, end)?, end)
                } else {
                    (Tok::Ident(word.to_string()), end)
                }
            }
            '0'..='9' | '.' | '+' | '-' => lex_number(text, i)?,
            _ => {
                return Err(error(
                    ErrorKind::Syntax,
                    text,
                    span(i, i + c.len_utf8()),
                    format!("unexpected character `{}`", c.escape_debug()),
                ))
            }
        };
        // A number or word running straight into more word characters is one bad token.
        if matches!(tok, Tok::Lit(Literal::Int(_) | Literal::Float(..)))
            && at(end).is_some_and(|b| is_ident_char(b) || b == b'.')
        {
            let bad_end = scan(bytes, end, |b| is_ident_char(b) || b == b'.');
            return Err(error(
                ErrorKind::Syntax,
                text,
                span(start, bad_end),
                format!("malformed number `{}`", &text[start..bad_end]),
            ));
        }
        out.push(Token {
            tok,
            span: span(start, end),
        });
        i = end;
    }
    out.push(Token {
        tok: Tok::End,
        span: span(text.len(), text.len()),
    });
    Ok(out)
}

/// A single-quoted string starting at `start`; `''` stands for one quote.
fn lex_string(text: &str, start: usize) -> Result<(Tok, usize), PredicateError> {
    let mut value = String::new();
    let mut i = start + 1;
    loop {
        match text[i..].find('\'') {
            None => {
                return Err(error(
                    ErrorKind::Syntax,
                    text,
                    span(start, text.len()),
                    "unterminated string literal".to_string(),
                ))
            }
            Some(off) => {
                value.push_str(&text[i..i + off]);
                i += off + 1;
                if text[i..].starts_with('\'') {
                    value.push('\'');
                    i += 1;
                } else {
                    return Ok((Tok::Lit(Literal::Str(value)), i));
                }
            }
        }
    }
}

fn float_token(text: &str, start: usize, end: usize) -> Result<Tok, PredicateError> {
    let s = &text[start..end];
    s.parse::<f64>()
        .map(|v| Tok::Lit(Literal::Float(v, s.to_string())))
        .map_err(|_| {
            error(
                ErrorKind::Syntax,
                text,
                span(start, end),
                format!("malformed number `{s}`"),
            )
        })
}

/// A number starting at `start` (a digit, `.` or sign); see `integer` and `float` in
/// the grammar.
fn lex_number(text: &str, start: usize) -> Result<(Tok, usize), PredicateError> {
    let bytes = text.as_bytes();
    let at = |i: usize| bytes.get(i).copied();
    let digits = |i| scan(bytes, i, |b| b.is_ascii_digit());
    let syntax = |from: usize, to: usize, message: String| {
        Err(error(ErrorKind::Syntax, text, span(from, to), message))
    };
    let signed = matches!(at(start), Some(b'+' | b'-'));
    let body = start + usize::from(signed);
    if signed && at(body).is_some_and(|b| b.is_ascii_alphabetic()) {
        let end = scan(bytes, body, is_ident_char);
        let word = &text[body..end];
        if word.eq_ignore_ascii_case("inf") || word.eq_ignore_ascii_case("nan") {
            return Ok((float_token(text, start, end)?, end));
        }
    }
    if matches!(text.get(body..body + 2), Some("0x" | "0X")) {
        let end = scan(bytes, body + 2, |b| b.is_ascii_hexdigit());
        if signed {
            return syntax(start, end, "a hex literal takes no sign".to_string());
        }
        if end == body + 2 {
            return syntax(start, end, "expected hex digits after `0x`".to_string());
        }
        return match u128::from_str_radix(&text[body + 2..end], 16).map(i128::try_from) {
            Ok(Ok(v)) => Ok((Tok::Lit(Literal::Int(v)), end)),
            _ => Err(too_wide(text, start, end)),
        };
    }
    let int_end = digits(body);
    let mut end = int_end;
    let mut is_float = false;
    if at(end) == Some(b'.') {
        let frac_end = digits(end + 1);
        if frac_end == end + 1 {
            return syntax(end, end + 1, "expected a digit after `.`".to_string());
        }
        is_float = true;
        end = frac_end;
    } else if int_end == body {
        let sign = &text[start..body];
        return syntax(start, body, format!("expected a number after `{sign}`"));
    }
    if matches!(at(end), Some(b'e' | b'E')) {
        let exp = end + 1 + usize::from(matches!(at(end + 1), Some(b'+' | b'-')));
        let exp_end = digits(exp);
        if exp_end == exp {
            return syntax(
                start,
                exp,
                format!("expected exponent digits in `{}`", &text[start..exp]),
            );
        }
        is_float = true;
        end = exp_end;
    }
    if is_float {
        return Ok((float_token(text, start, end)?, end));
    }
    match text[start..end].parse::<i128>() {
        Ok(v) => Ok((Tok::Lit(Literal::Int(v)), end)),
        Err(_) => Err(too_wide(text, start, end)),
    }
}

fn too_wide(text: &str, start: usize, end: usize) -> PredicateError {
    error(
        ErrorKind::OutOfRange,
        text,
        span(start, end),
        format!(
            "integer literal `{}` does not fit in 128 bits",
            &text[start..end]
        ),
    )
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
        error(ErrorKind::Syntax, self.text, span, message)
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
            Tok::Ident(ref name) if !KEYWORDS.iter().any(|k| name.eq_ignore_ascii_case(k)) => {
                let col = Spanned {
                    value: name.clone(),
                    span: t.span,
                };
                self.column_test(col)
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
        match &t.tok {
            Tok::Ident(name) if !KEYWORDS.iter().any(|k| name.eq_ignore_ascii_case(k)) => {
                Ok(Spanned {
                    value: name.clone(),
                    span: t.span,
                })
            }
            _ => Err(self.error(
                t.span,
                format!(
                    "expected a column name after `{}`, found {}",
                    op.symbol(),
                    self.describe(&t)
                ),
            )),
        }
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
            format!("expected `in` after `not`, found {}", self.describe(&in_tok))
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

    fn lit(text: &str) -> Literal {
        match parse(&format!("x = {text}")).unwrap() {
            Expr::Cmp { lit, .. } => lit.value,
            e => panic!("not a comparison: {e}"),
        }
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
            assert!(matches!(e, Expr::Cmp { op: got, .. } if got == op), "{op:?}");
        }
        assert_eq!(canon("x between -1 and 2.5"), "(x between -1 and 2.5)");
        assert_eq!(canon("x in (1,2 , 3)"), "(x in (1, 2, 3))");
        assert_eq!(canon("x not in (nan)"), "(x not in (nan))");
        assert_eq!(canon("x between 1 and 2 and y < 3"), "((x between 1 and 2) and (y < 3))");
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
    fn literal_forms() {
        assert_eq!(lit("42"), Literal::Int(42));
        assert_eq!(lit("-5"), Literal::Int(-5));
        assert_eq!(lit("+7"), Literal::Int(7));
        assert_eq!(lit("007"), Literal::Int(7));
        assert_eq!(lit("0x1F"), Literal::Int(31));
        assert_eq!(lit("0XfF"), Literal::Int(255));
        assert_eq!(lit("170141183460469231731687303715884105727"), Literal::Int(i128::MAX));
        assert_eq!(lit("-170141183460469231731687303715884105728"), Literal::Int(i128::MIN));
        assert_eq!(lit("0xFFFFFFFFFFFFFFFF"), Literal::Int(u64::MAX.into()));
        for (text, value) in [
            ("1.5", 1.5),
            ("-2e-3", -0.002),
            (".5", 0.5),
            ("-.25", -0.25),
            ("1E3", 1000.0),
            ("+0.5e+1", 5.0),
            ("inf", f64::INFINITY),
            ("-INF", f64::NEG_INFINITY),
            ("+Inf", f64::INFINITY),
        ] {
            assert_eq!(lit(text), Literal::Float(value, text.to_string()), "{text}");
        }
        for text in ["nan", "NaN", "NAN"] {
            assert!(matches!(lit(text), Literal::Float(v, t) if v.is_nan() && t == text));
        }
        assert_eq!(lit("'abc'"), Literal::Str("abc".to_string()));
        assert_eq!(lit("'it''s'"), Literal::Str("it's".to_string()));
        assert_eq!(lit("''"), Literal::Str(String::new()));
        assert_eq!(lit("'é, (x)'"), Literal::Str("é, (x)".to_string()));
    }

    #[test]
    fn keywords_ignore_case_column_names_do_not() {
        assert_eq!(
            canon("X BETWEEN 1 AND 2 Or NOT y In (1) aNd Z NOT IN (2)"),
            "((X between 1 and 2) or ((not (y in (1))) and (Z not in (2))))"
        );
        assert_eq!(canon("nanny < 1 and Inform > 2"), "((nanny < 1) and (Inform > 2))");
    }

    #[test]
    fn spans_cover_names_and_literals() {
        let Expr::And(a, b) = parse("  speed >= 0x10 and 'a' < t").unwrap() else {
            panic!("not an and");
        };
        let Expr::Cmp { col, lit, .. } = *a else { panic!("not a comparison") };
        assert_eq!((col.span, lit.span), (Span { pos: 2, len: 5 }, Span { pos: 11, len: 4 }));
        let Expr::Cmp { col, lit, op } = *b else { panic!("not a comparison") };
        assert_eq!(op, CmpOp::Gt);
        assert_eq!((col.span, lit.span), (Span { pos: 26, len: 1 }, Span { pos: 20, len: 3 }));
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
            ("v == 3", ErrorKind::Syntax, "predicate syntax error at column 3: `==` is not an operator; write `=`", "  ^^"),
            ("v <> 3", ErrorKind::Syntax, "predicate syntax error at column 3: `<>` is not an operator; write `!=`", "  ^^"),
            ("v < 'ab", ErrorKind::Syntax, "predicate syntax error at column 5: unterminated string literal", "    ^^^"),
            ("v < 12abc", ErrorKind::Syntax, "predicate syntax error at column 5: malformed number `12abc`", "    ^^^^^"),
            ("v < 0x1FFFFFFFFFFFFFFFFFFFFFFFFFFFFFFFF", ErrorKind::OutOfRange, "predicate error at column 5: integer literal `0x1FFFFFFFFFFFFFFFFFFFFFFFFFFFFFFFF` does not fit in 128 bits", "    ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^"),
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
            ("v < 1.2.3", 5, "malformed number `1.2.3`"),
            ("v < 1and w < 2", 5, "malformed number `1and`"),
            ("v < 1.", 6, "expected a digit after `.`"),
            ("v < .", 5, "expected a digit after `.`"),
            ("v < 1e+", 5, "expected exponent digits in `1e+`"),
            ("v < -0x1", 5, "a hex literal takes no sign"),
            ("v < 0x", 5, "expected hex digits after `0x`"),
            ("v < 0x1G", 5, "malformed number `0x1G`"),
            ("v < - 1", 5, "expected a number after `-`"),
            ("v < -x", 5, "expected a number after `-`"),
            ("v < 1 ; ", 7, "unexpected character `;`"),
            ("v ! 1", 3, "unexpected character `!` (not-equal is written `!=`)"),
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
        assert_eq!(e.message(), "more than 256 `and`/`or`/`not` operators and parentheses");
        let deep = format!("{}v < 1{}", "(".repeat(10_000), ")".repeat(10_000));
        assert_eq!(parse(&deep).unwrap_err().column(), MAX_OPERATORS + 1);
        let long = vec!["v < 1"; MAX_OPERATORS + 2].join(" or ");
        assert_eq!(parse(&long).unwrap_err().kind(), ErrorKind::Syntax);
    }

    fn unspanned<T>(value: T) -> Spanned<T> {
        Spanned { value, span: Span::default() }
    }

    /// The tree with every span zeroed, to compare a parsed tree with a generated one.
    fn unspan(e: &Expr) -> Expr {
        let u = |e: &Expr| Box::new(unspan(e));
        let lits = |l: &[Spanned<Literal>]| l.iter().map(|x| unspanned(x.value.clone())).collect();
        match e {
            Expr::Cmp { col, op, lit } => Expr::Cmp { col: unspanned(col.value.clone()), op: *op, lit: unspanned(lit.value.clone()) },
            Expr::Between { col, lo, hi } => Expr::Between { col: unspanned(col.value.clone()), lo: unspanned(lo.value.clone()), hi: unspanned(hi.value.clone()) },
            Expr::In { col, list, negated } => Expr::In { col: unspanned(col.value.clone()), list: lits(list), negated: *negated },
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
            !KEYWORDS.iter().chain(&["nan", "inf"]).any(|k| s.eq_ignore_ascii_case(k))
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
            (col(), proptest::sample::select(CmpOp::ALL.to_vec()), arb_literal())
                .prop_map(|(col, op, lit)| Expr::Cmp { col, op, lit }),
            (col(), arb_literal(), arb_literal()).prop_map(|(col, lo, hi)| Expr::Between { col, lo, hi }),
            (col(), proptest::collection::vec(arb_literal(), 1..4), any::<bool>())
                .prop_map(|(col, list, negated)| Expr::In { col, list, negated }),
        ];
        leaf.prop_recursive(4, 16, 2, |inner| {
            prop_oneof![
                (inner.clone(), inner.clone()).prop_map(|(a, b)| Expr::And(Box::new(a), Box::new(b))),
                (inner.clone(), inner.clone()).prop_map(|(a, b)| Expr::Or(Box::new(a), Box::new(b))),
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
