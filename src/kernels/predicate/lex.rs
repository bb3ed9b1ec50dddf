//! Lexer: splits predicate text into tokens (names, literals, operators, punctuation),
//! each with its byte span; the literal grammar is in the parent module's documentation.

use super::ast::{CmpOp, Literal, Span};
use super::{ErrorKind, PredicateError};

/// One token.
#[derive(Debug, Clone, PartialEq)]
pub(super) enum Tok {
    Ident(String),
    Lit(Literal),
    Op(CmpOp),
    LParen,
    RParen,
    Comma,
    End,
}

/// A token and where it is.
#[derive(Debug, Clone)]
pub(super) struct Token {
    pub(super) tok: Tok,
    pub(super) span: Span,
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

/// The float keywords, which lex as literals rather than names.
fn is_nan_or_inf(word: &str) -> bool {
    word.eq_ignore_ascii_case("nan") || word.eq_ignore_ascii_case("inf")
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

/// The tokens of `text`, always ending with [`Tok::End`].
pub(super) fn lex(text: &str) -> Result<Vec<Token>, PredicateError> {
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
                if is_nan_or_inf(word) {
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
        // A number running straight into a letter, digit, `_` or `.` is one bad token.
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
        if is_nan_or_inf(word) {
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

#[cfg(test)]
mod tests {
    use super::super::{parse, Expr};
    use super::*;

    fn lit(text: &str) -> Literal {
        match parse(&format!("x = {text}")).unwrap() {
            Expr::Cmp { lit, .. } => lit.value,
            e => panic!("not a comparison: {e}"),
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
        assert_eq!(
            lit("170141183460469231731687303715884105727"),
            Literal::Int(i128::MAX)
        );
        assert_eq!(
            lit("-170141183460469231731687303715884105728"),
            Literal::Int(i128::MIN)
        );
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

    /// Each case: text, expected kind, expected `Display`, expected caret line.
    #[test]
    fn bad_tokens_show_their_extent() {
        for (text, kind, shown, caret) in [
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
    fn every_lexical_error_message() {
        for (text, column, message) in [
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
            (
                "v ! 1",
                3,
                "unexpected character `!` (not-equal is written `!=`)",
            ),
        ] {
            let e = parse(text).unwrap_err();
            assert_eq!(
                (e.kind(), e.column(), e.message()),
                (ErrorKind::Syntax, column, message),
                "{text:?}"
            );
        }
    }
}
