//! `$readmemh` reader: accepts what `$readmemh` accepts (IEEE 1364-2005 §17.2.9) and what
//! simulators' `$writememh` writes, and tells written, unknown and absent words apart.
//!
//! Tokens are separated by any whitespace, so several words may share a line. `//` and
//! `/* */` comments, `@hex` word addresses, `_` inside numbers, upper and lower case, and
//! CRLF line ends are accepted. A word with any `x`/`z` digit is [`WordState::Unknown`];
//! words no token ever reached are [`WordState::Absent`].
//!
//! Width rule: digits are counted without `_`. A word of W bits takes W/4 digits; fewer are
//! zero-extended. More than W/4 digits are accepted only when every extra leading digit is
//! `0`, since the value still fits; any other extra digit is an error, because simulators
//! disagree on it (one truncates, one warns) and a dump must not lose bits silently.

use super::{check_word_bits, ImageError, WordDump, WordState, MAX_DUMP_BYTES};

/// What is wrong with one token of a hex image.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum HexProblem {
    /// A word with more significant digits than the word holds.
    #[error("word `{token}` has {digits} hex digits, wider than {} {bits}-bit word", article(*.bits))]
    TooWide {
        /// The word as written.
        token: String,
        /// Its digits, `_` not counted.
        digits: usize,
        /// The word width.
        bits: u32,
    },
    /// A word with a character that is not a hex, `x`, `z` or `_` digit.
    #[error("`{token}` is not a hex word: `{digit}` is not a hex digit")]
    BadDigit {
        /// The word as written.
        token: String,
        /// The first bad character.
        digit: char,
    },
    /// A word made only of `_`.
    #[error("`{token}` has no hex digits")]
    NoDigits {
        /// The word as written.
        token: String,
    },
    /// An `@` token that is not a hex number.
    #[error("`{token}` is not a word address: {why}")]
    BadAddress {
        /// The address token as written.
        token: String,
        /// What is wrong with it.
        why: &'static str,
    },
    /// A word address whose dense dump would exceed the limit of [`dense_limit`].
    #[error("word address @{addr:x} lies beyond the {limit}-byte limit of this dump")]
    TooFar {
        /// The word address reached.
        addr: u64,
        /// The limit for this dump's text.
        limit: u64,
    },
    /// A word address that an earlier part of the file already filled.
    #[error("word address @{addr:x} was already written earlier in the file")]
    Overlap {
        /// The word address written twice.
        addr: u64,
    },
    /// A `/*` comment with no `*/`; the line is where it opened.
    #[error("`/*` comment is never closed")]
    OpenComment,
}

/// "an" before a number read aloud with a vowel first (8, 80, 800, ...), else "a".
fn article(n: u32) -> &'static str {
    if n.to_string().starts_with('8') {
        "an"
    } else {
        "a"
    }
}

/// Bytes a sparse dump may span whatever its length: `@` addresses are free to jump this far.
pub const SPARSE_DUMP_BYTES: u64 = 64 << 20;

/// The most bytes the dense form of a hex text of `text_bytes` may take: a text of N bytes
/// holds at most N/2 bytes of words, so 8·N never refuses a dump without gaps, and
/// [`SPARSE_DUMP_BYTES`] lets `@` addresses jump far into a channel from a short text.
/// Without it a ten-byte file naming a far address would ask for gigabytes.
pub fn dense_limit(text_bytes: usize) -> u64 {
    (text_bytes as u64)
        .saturating_mul(8)
        .clamp(SPARSE_DUMP_BYTES, MAX_DUMP_BYTES)
}

/// Parses a hex image of `word_bits`-bit words; word `i` of the dump is word address `i`.
pub fn read_hex(text: &str, word_bits: u32) -> Result<WordDump, ImageError> {
    let word_bytes = check_word_bits(word_bits)? as usize;
    let mut dump = WordDump {
        word_bytes,
        data: Vec::new(),
        state: Vec::new(),
    };
    let limit = dense_limit(text.len());
    let mut next = 0u64;
    let mut comment_from: Option<usize> = None;
    for (index, mut rest) in text.split('\n').enumerate() {
        let line = index + 1;
        let at_line = |problem| ImageError::Hex { line, problem };
        loop {
            if comment_from.is_some() {
                let Some(end) = rest.find("*/") else { break };
                rest = &rest[end + 2..];
                comment_from = None;
            }
            rest = rest.trim_start();
            if rest.is_empty() || rest.starts_with("//") {
                break;
            }
            if let Some(after) = rest.strip_prefix("/*") {
                comment_from = Some(line);
                rest = after;
                continue;
            }
            let (token, tail) = rest.split_at(token_len(rest));
            rest = tail;
            if token.starts_with('@') {
                next = parse_address(token).map_err(at_line)?;
            } else {
                put_word(&mut dump, next, token, word_bits, limit).map_err(at_line)?;
                // put_word refused any address past the limit, so this cannot overflow.
                next += 1;
            }
        }
    }
    match comment_from {
        Some(line) => Err(ImageError::Hex {
            line,
            problem: HexProblem::OpenComment,
        }),
        None => Ok(dump),
    }
}

/// Length of the token at the start of `rest`: up to whitespace or a comment opener.
fn token_len(rest: &str) -> usize {
    rest.char_indices()
        .find(|&(i, ch)| {
            ch.is_whitespace() || rest[i..].starts_with("//") || rest[i..].starts_with("/*")
        })
        .map_or(rest.len(), |(i, _)| i)
}

/// The word address of an `@` token; `_` separators are ignored as in numbers.
fn parse_address(token: &str) -> Result<u64, HexProblem> {
    let bad = |why| HexProblem::BadAddress {
        token: token.to_string(),
        why,
    };
    let mut digits = token[1..].chars().filter(|&ch| ch != '_').peekable();
    if digits.peek().is_none() {
        return Err(bad(
            "no hex digits after `@` (write them right after it, as in `@1a0`)",
        ));
    }
    digits.try_fold(0u64, |addr, ch| {
        let digit = ch
            .to_digit(16)
            .ok_or_else(|| bad("it has a digit that is not hex"))?;
        addr.checked_mul(16)
            .map(|a| a | u64::from(digit))
            .ok_or_else(|| bad("it does not fit in 64 bits"))
    })
}

/// Stores word `token` at `addr`, growing the dump with absent words up to it.
fn put_word(
    dump: &mut WordDump,
    addr: u64,
    token: &str,
    bits: u32,
    limit: u64,
) -> Result<(), HexProblem> {
    let is_unknown = |ch: char| matches!(ch, 'x' | 'X' | 'z' | 'Z');
    let is_digit = |ch: char| ch != '_';
    if let Some(digit) = token
        .chars()
        .find(|&ch| !(ch.is_ascii_hexdigit() || is_unknown(ch) || ch == '_'))
    {
        return Err(HexProblem::BadDigit {
            token: token.to_string(),
            digit,
        });
    }
    let digits = token.chars().filter(|&ch| is_digit(ch)).count();
    if digits == 0 {
        return Err(HexProblem::NoDigits {
            token: token.to_string(),
        });
    }
    let wb = dump.word_bytes;
    let width = 2 * wb;
    let extra = digits.saturating_sub(width);
    if token
        .chars()
        .filter(|&ch| is_digit(ch))
        .take(extra)
        .any(|ch| ch != '0')
    {
        return Err(HexProblem::TooWide {
            token: token.to_string(),
            digits,
            bits,
        });
    }
    let index = addr
        .checked_add(1)
        .and_then(|n| n.checked_mul(wb as u64))
        .filter(|&end| end <= limit)
        .and_then(|_| usize::try_from(addr).ok())
        .ok_or(HexProblem::TooFar { addr, limit })?;
    if index >= dump.state.len() {
        dump.state.resize(index + 1, WordState::Absent);
        dump.data.resize((index + 1) * wb, 0);
    }
    if dump.state[index] != WordState::Absent {
        return Err(HexProblem::Overlap { addr });
    }
    // Any x/z digit lies within the width here, and makes the whole word unknown.
    if token.chars().any(is_unknown) {
        dump.state[index] = WordState::Unknown;
        return Ok(());
    }
    let word = &mut dump.data[index * wb..(index + 1) * wb];
    // Least-significant digit first: digit n is nibble n % 2 of byte n / 2.
    let nibbles = token.chars().rev().filter(|&ch| is_digit(ch)).take(width);
    for (n, ch) in nibbles.enumerate() {
        word[n / 2] |= (ch.to_digit(16).unwrap_or(0) as u8) << (4 * (n % 2));
    }
    dump.state[index] = WordState::Written;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::image::tests::{external, TempDir};
    use crate::image::write_hex;
    use WordState::{Absent, Unknown, Written};

    fn err(text: &str, word_bits: u32) -> String {
        read_hex(text, word_bits).unwrap_err().to_string()
    }

    fn u32_words(dump: &WordDump) -> Vec<u32> {
        (0..dump.words())
            .map(|i| u32::from_le_bytes(dump.word(i).try_into().unwrap()))
            .collect()
    }

    #[test]
    fn reads_a_writememh_style_dump() {
        // Icarus Verilog's `$writememh` output format (recalled from memory; tests/external.rs checks it against iverilog): a `// 0x%08x` line
        // before every 16 words, lowercase digits, `x` for a wholly unknown nibble and `X`
        // for a partly unknown one.
        let text = "// 0x00000000\na000\na001\na002\nxxxx\na004\na005\na006\na007\n\
                    a008\na009\na00a\na00b\na00c\na00d\na00e\na00f\n// 0x00000010\na010\n12X4\n";
        let dump = read_hex(text, 16).unwrap();
        assert_eq!(dump.words(), 18);
        for i in 0..18 {
            let value = u16::from_le_bytes(dump.word(i).try_into().unwrap());
            if i == 3 || i == 17 {
                assert_eq!((dump.state[i], value), (Unknown, 0), "word {i}");
            } else {
                assert_eq!(
                    (dump.state[i], value),
                    (Written, 0xa000 + i as u16),
                    "word {i}"
                );
            }
        }
    }

    #[test]
    fn tokens_comments_case_underscores_and_crlf() {
        // Source: IEEE 1364-2005 §17.2.9 — whitespace-separated numbers, comments, `_`.
        let text = "DEAD_beef /* block\r\n comment */ 0123_4567 // tail\r\n  89abCDEF 1//c\r\n\
                    2/*c*/3\t4\x0c5";
        let dump = read_hex(text, 32).unwrap();
        assert_eq!(
            u32_words(&dump),
            [0xdead_beef, 0x0123_4567, 0x89ab_cdef, 1, 2, 3, 4, 5]
        );
        assert!(dump.state.iter().all(|s| *s == Written));
    }

    #[test]
    fn short_words_are_zero_extended_and_extra_leading_zeros_allowed() {
        assert_eq!(
            u32_words(&read_hex("1\nab\n000000000_0000_1234\n", 32).unwrap()),
            [1, 0xab, 0x1234]
        );
        assert_eq!(
            err("100012345\n", 32),
            "line 1: word `100012345` has 9 hex digits, wider than a 32-bit word"
        );
        assert_eq!(
            err("00\n11\n22\n33\n44\n55\n1ffff\n", 16),
            "line 7: word `1ffff` has 5 hex digits, wider than a 16-bit word"
        );
        // An extra leading `x` could hide bits, so only `0` may stand beyond the width.
        assert_eq!(
            err("x0000\n", 16),
            "line 1: word `x0000` has 5 hex digits, wider than a 16-bit word"
        );
        assert_eq!(
            err("0x10\n", 8),
            "line 1: word `0x10` has 4 hex digits, wider than an 8-bit word"
        );
    }

    #[test]
    fn address_lines_leave_gaps_absent() {
        let dump = read_hex("@2\n11 12\n@6\n16\n@0_4 14\n", 8).unwrap();
        assert_eq!(dump.data, [0, 0, 0x11, 0x12, 0x14, 0, 0x16]);
        assert_eq!(
            dump.state,
            [Absent, Absent, Written, Written, Written, Absent, Written]
        );
        let unknown = read_hex("@1 zZ 0x\n", 8).unwrap();
        assert_eq!(unknown.state, [Absent, Unknown, Unknown]);
        assert_eq!(unknown.data, [0, 0, 0]);
    }

    #[test]
    fn bad_tokens_are_named_with_their_line() {
        let cases = [
            (
                "00\n11\ng1\n",
                8,
                "line 3: `g1` is not a hex word: `g` is not a hex digit",
            ),
            (
                "1.0\n",
                8,
                "line 1: `1.0` is not a hex word: `.` is not a hex digit",
            ),
            (
                "g1ff\n",
                8,
                "line 1: `g1ff` is not a hex word: `g` is not a hex digit",
            ),
            (
                "_\n",
                8,
                "line 1: `_` has no hex digits",
            ),
            (
                "@ 10\n",
                8,
                "line 1: `@` is not a word address: no hex digits after `@` (write them right after it, as in `@1a0`)",
            ),
            (
                "\n@1g\n",
                8,
                "line 2: `@1g` is not a word address: it has a digit that is not hex",
            ),
            (
                "@x\n",
                8,
                "line 1: `@x` is not a word address: it has a digit that is not hex",
            ),
            (
                "@1_0000_0000_0000_0000\n",
                8,
                "line 1: `@1_0000_0000_0000_0000` is not a word address: it does not fit in 64 bits",
            ),
            (
                "00\n01\n02\n@1\n11\n",
                8,
                "line 5: word address @1 was already written earlier in the file",
            ),
            (
                "@ffffffff\n0000\n",
                16,
                "line 2: word address @ffffffff lies beyond the 67108864-byte limit of this dump",
            ),
            (
                "00\n/* never\nclosed\n",
                8,
                "line 2: `/*` comment is never closed",
            ),
        ];
        for (text, bits, message) in cases {
            assert_eq!(err(text, bits), message, "{text:?}");
        }
        assert_eq!(err("", 12), "word width 12 bits is not a multiple of 8");
    }

    #[test]
    fn icarus_reads_our_hex_and_we_read_its_dump() {
        if !external("Icarus Verilog (iverilog, vvp)", "iverilog", &["-V"]) {
            return;
        }
        let dir = TempDir::new("icarus");
        // 72-bit words: 18 digits, not a power of two; 3 of 20 words loaded.
        let bytes: Vec<u8> = (0..27u8).map(|i| i.wrapping_mul(37) ^ 0xa5).collect();
        let mut image = Vec::new();
        write_hex(&mut image, 9, &bytes).unwrap();
        std::fs::write(dir.join("in.hex"), image).unwrap();
        let bench = "module tb;\n  reg [71:0] mem [0:19];\n  initial begin\n\
                     $readmemh(\"in.hex\", mem);\n    mem[4][3:0] = 4'b10x1;\n\
                     $writememh(\"out.hex\", mem);\n    $finish;\n  end\nendmodule\n";
        std::fs::write(dir.join("tb.v"), bench).unwrap();
        let run = |program: &str, args: &[&str]| {
            let out = std::process::Command::new(program)
                .args(args)
                .current_dir(dir.path())
                .output()
                .unwrap();
            assert!(
                out.status.success(),
                "{program}: {}",
                String::from_utf8_lossy(&out.stderr)
            );
        };
        run("iverilog", &["-o", "tb.vvp", "tb.v"]);
        run("vvp", &["-n", "tb.vvp"]);
        let dump = read_hex(&std::fs::read_to_string(dir.join("out.hex")).unwrap(), 72).unwrap();
        // Source: Icarus Verilog — words $readmemh loaded come back as written; the rest of
        // the memory was never set and dumps as x.
        assert_eq!(dump.words(), 20);
        assert_eq!(&dump.data[..27], &bytes[..]);
        assert_eq!(&dump.state[..3], [Written; 3]);
        assert_eq!(&dump.state[3..], [Unknown; 17]);
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(64))]

        #[test]
        fn any_text_gives_a_consistent_dump_or_an_error(
            text in "[0-9a-fA-FxzXZg_@/* \t\r\n]{0,200}",
            word_bytes in 1u32..=4,
        ) {
            if let Ok(dump) = read_hex(&text, word_bytes * 8) {
                proptest::prop_assert_eq!(dump.data.len(), dump.words() * dump.word_bytes);
                let unset = |s: &WordState| *s != Written;
                for (i, _) in dump.state.iter().enumerate().filter(|(_, s)| unset(s)) {
                    proptest::prop_assert!(dump.word(i).iter().all(|b| *b == 0));
                }
            }
        }
    }
}
