//! NumPy `.npy` codec: writes the header of a plain numeric array and reads the headers that
//! NumPy (and others) write, checking the data size against the shape.
//!
//! ```text
//! \x93NUMPY | major minor | header length      | {'descr': ..., 'shape': (..), } ␠␠␠\n | data
//!  6 bytes  |  2 bytes    | u16 LE (v1.0)      | Python dict text, padded so the data   |
//!           |             | u32 LE (v2.0, 3.0) | starts on a multiple of 64 bytes       |
//! ```
//!
//! Only the layout of numpy.lib.format is used; no Python is involved. Structured, complex,
//! string and object dtypes are refused: weir's arrays are plain integers, floats and bools.

use std::io::{self, Write};

/// The six bytes every `.npy` file starts with.
const MAGIC: &[u8; 6] = b"\x93NUMPY";
/// Current NumPy starts the data on a multiple of 64 bytes (older documents say 16).
const ALIGN: usize = 64;
/// Magic, two version bytes and the u16 header length of version 1.0.
const V1_PREFIX: usize = MAGIC.len() + 2 + 2;
/// Magic, two version bytes and the u32 header length of versions 2.0 and 3.0.
const V2_PREFIX: usize = MAGIC.len() + 2 + 4;

/// The parsed header dict of a `.npy` file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NpyHeader {
    /// Dtype string such as `<u4` or `|u1` (byte order, kind, item size).
    pub descr: String,
    /// Whether the data is stored column-major; only accepted where it makes no difference.
    pub fortran_order: bool,
    /// Array dimensions; empty for a 0-d array.
    pub shape: Vec<u64>,
}

/// Why a `.npy` file could not be read (or an array could not be written).
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum NpyError {
    /// The file does not start with `\x93NUMPY`.
    #[error("not a .npy file (bad magic)")]
    BadMagic,
    /// The file ends inside the version bytes or the header length.
    #[error("not a .npy file ({len} bytes, shorter than the {need}-byte preamble)")]
    ShortPreamble {
        /// Bytes in the file.
        len: usize,
        /// Bytes the preamble needs.
        need: usize,
    },
    /// A format version other than 1.0, 2.0 or 3.0.
    #[error("unsupported .npy version {major}.{minor} (1.0, 2.0 and 3.0 are read)")]
    Version {
        /// Major version byte.
        major: u8,
        /// Minor version byte.
        minor: u8,
    },
    /// The stored header length runs past the end of the file.
    #[error("truncated header: its length says {declared} bytes but {available} bytes follow")]
    ShortHeader {
        /// Header length stored in the preamble.
        declared: usize,
        /// Bytes left after the preamble.
        available: usize,
    },
    /// The header dict is malformed.
    #[error("bad .npy header: {0}")]
    Header(String),
    /// Column-major data of more than one dimension.
    #[error("fortran_order=True is not supported for a {ndim}-d array (save it in C order)")]
    FortranOrder {
        /// Number of dimensions.
        ndim: usize,
    },
    /// A dtype other than a plain bool, integer or float.
    #[error("unsupported dtype `{0}`")]
    Dtype(String),
    /// The shape times the item size does not fit in 64 bits.
    #[error("shape {shape} of {itemsize}-byte elements is too large")]
    Overflow {
        /// Shape as Python tuple text.
        shape: String,
        /// Bytes per element.
        itemsize: u64,
    },
    /// Fewer data bytes than the shape needs.
    #[error("truncated: header says {elements} elements of {itemsize} bytes ({expected} bytes) but {actual} bytes follow")]
    Truncated {
        /// Elements the shape holds.
        elements: u64,
        /// Bytes per element.
        itemsize: u64,
        /// Data bytes the shape needs.
        expected: u64,
        /// Data bytes present.
        actual: u64,
    },
    /// More data bytes than the shape needs.
    #[error("wrong size: header says {elements} elements of {itemsize} bytes ({expected} bytes) but {actual} bytes follow")]
    TrailingBytes {
        /// Elements the shape holds.
        elements: u64,
        /// Bytes per element.
        itemsize: u64,
        /// Data bytes the shape needs.
        expected: u64,
        /// Data bytes present.
        actual: u64,
    },
}

/// Bytes per element of a plain `descr`: byte order `<`, `>` or `|`, then `b1` or `?` (bool),
/// `i`/`u` with 1, 2, 4 or 8, or `f` with 2, 4 or 8.
pub fn itemsize(descr: &str) -> Result<u64, NpyError> {
    let unsupported = || NpyError::Dtype(descr.to_string());
    let mut chars = descr.chars();
    let (Some('<' | '>' | '|'), Some(kind)) = (chars.next(), chars.next()) else {
        return Err(unsupported());
    };
    let digits = chars.as_str();
    let size = match (kind, digits) {
        ('?', "") => 1,
        (_, d) if !d.is_empty() && d.bytes().all(|b| b.is_ascii_digit()) => {
            d.parse::<u64>().map_err(|_| unsupported())?
        }
        _ => return Err(unsupported()),
    };
    let known = match kind {
        '?' | 'b' => size == 1,
        'i' | 'u' => matches!(size, 1 | 2 | 4 | 8),
        'f' => matches!(size, 2 | 4 | 8),
        _ => false,
    };
    if known {
        Ok(size)
    } else {
        Err(unsupported())
    }
}

/// A shape as the Python tuple NumPy writes: `()`, `(3,)`, `(2, 3)`.
pub fn shape_text(shape: &[u64]) -> String {
    match shape {
        [] => "()".to_string(),
        [n] => format!("({n},)"),
        dims => {
            let parts: Vec<String> = dims.iter().map(u64::to_string).collect();
            format!("({})", parts.join(", "))
        }
    }
}

/// The full header (magic, version, length, padded dict) of a C-order array.
///
/// Version 1.0 is used unless the header would not fit its u16 length, then 2.0. The data
/// that follows starts on a multiple of 64 bytes. `descr` is written as given (it must not
/// contain a quote); [`write_npy`] checks it.
pub fn header_bytes(descr: &str, shape: &[u64]) -> Vec<u8> {
    let dict = format!(
        "{{'descr': '{descr}', 'fortran_order': False, 'shape': {}, }}",
        shape_text(shape)
    );
    // Header length after the prefix: dict, spaces, and the final newline, so that prefix +
    // header is a whole number of ALIGN-byte blocks.
    let padded = |prefix: usize| (prefix + dict.len() + 1).div_ceil(ALIGN) * ALIGN - prefix;
    let mut out = Vec::with_capacity(V2_PREFIX + padded(V2_PREFIX));
    out.extend_from_slice(MAGIC);
    let v1_len = padded(V1_PREFIX);
    let header_len = match u16::try_from(v1_len) {
        Ok(len) => {
            out.extend_from_slice(&[1, 0]);
            out.extend_from_slice(&len.to_le_bytes());
            v1_len
        }
        Err(_) => {
            let len = padded(V2_PREFIX);
            out.extend_from_slice(&[2, 0]);
            // A header over 4 GiB would need a shape of about 10^9 dimensions.
            out.extend_from_slice(&(len as u32).to_le_bytes());
            len
        }
    };
    let end = out.len() + header_len;
    out.extend_from_slice(dict.as_bytes());
    out.resize(end - 1, b' ');
    out.push(b'\n');
    out
}

/// Writes a C-order array: header, then `data` as given (already in `descr`'s byte order).
///
/// Fails with `InvalidInput` if `descr` is unsupported or `data` is not exactly
/// product(shape) × itemsize bytes, so no inconsistent file is ever written.
pub fn write_npy<W: Write>(w: &mut W, descr: &str, shape: &[u64], data: &[u8]) -> io::Result<()> {
    check_data_len(descr, shape, data.len())
        .map_err(|e| io::Error::new(io::ErrorKind::InvalidInput, e))?;
    w.write_all(&header_bytes(descr, shape))?;
    w.write_all(data)
}

/// Parses a `.npy` file held in memory and returns its header and its data bytes.
///
/// Reads versions 1.0, 2.0 and 3.0 using the stored header length. The data must be exactly
/// product(shape) × itemsize bytes; `fortran_order=True` is refused for more than one
/// dimension (for 0-d and 1-d arrays both orders are the same bytes).
pub fn read_npy(bytes: &[u8]) -> Result<(NpyHeader, &[u8]), NpyError> {
    if !bytes.starts_with(MAGIC) {
        return Err(NpyError::BadMagic);
    }
    let short = |need| NpyError::ShortPreamble {
        len: bytes.len(),
        need,
    };
    let (major, minor) = match bytes.get(MAGIC.len()..MAGIC.len() + 2) {
        Some(&[major, minor]) => (major, minor),
        _ => return Err(short(V1_PREFIX)),
    };
    let prefix = match (major, minor) {
        (1, 0) => V1_PREFIX,
        (2, 0) | (3, 0) => V2_PREFIX,
        _ => return Err(NpyError::Version { major, minor }),
    };
    let len_field = bytes.get(MAGIC.len() + 2..prefix).ok_or(short(prefix))?;
    let declared = len_field
        .iter()
        .rev()
        .fold(0usize, |acc, &b| (acc << 8) | usize::from(b));
    let rest = &bytes[prefix..];
    if declared > rest.len() {
        return Err(NpyError::ShortHeader {
            declared,
            available: rest.len(),
        });
    }
    let (text, data) = rest.split_at(declared);
    let text = std::str::from_utf8(text)
        .map_err(|_| NpyError::Header("the header is not UTF-8 text".to_string()))?;
    let header = parse_dict(text)?;
    if header.fortran_order && header.shape.len() > 1 {
        return Err(NpyError::FortranOrder {
            ndim: header.shape.len(),
        });
    }
    check_data_len(&header.descr, &header.shape, data.len())?;
    Ok((header, data))
}

/// Checks that `actual` data bytes are exactly what `shape` of `descr` elements needs.
fn check_data_len(descr: &str, shape: &[u64], actual: usize) -> Result<(), NpyError> {
    let itemsize = itemsize(descr)?;
    let overflow = || NpyError::Overflow {
        shape: shape_text(shape),
        itemsize,
    };
    let elements = shape
        .iter()
        .try_fold(1u64, |acc, &d| acc.checked_mul(d))
        .ok_or_else(overflow)?;
    let expected = elements.checked_mul(itemsize).ok_or_else(overflow)?;
    let actual = actual as u64;
    match actual.cmp(&expected) {
        std::cmp::Ordering::Equal => Ok(()),
        std::cmp::Ordering::Less => Err(NpyError::Truncated {
            elements,
            itemsize,
            expected,
            actual,
        }),
        std::cmp::Ordering::Greater => Err(NpyError::TrailingBytes {
            elements,
            itemsize,
            expected,
            actual,
        }),
    }
}

/// Parses the header dict: `{'descr': .., 'fortran_order': .., 'shape': (..), }`, keys in any
/// order, each exactly once, trailing comma and surrounding whitespace allowed.
fn parse_dict(text: &str) -> Result<NpyHeader, NpyError> {
    let mut c = Cursor { text, pos: 0 };
    let (mut descr, mut fortran_order, mut shape) = (None, None, None);
    c.skip_ws();
    c.expect('{')?;
    loop {
        c.skip_ws();
        if c.eat('}') {
            break;
        }
        let key_at = c.pos;
        let key = c.string()?;
        c.skip_ws();
        c.expect(':')?;
        c.skip_ws();
        let fresh = match key {
            "descr" => descr.replace(c.descr()?).is_none(),
            "fortran_order" => fortran_order.replace(c.boolean()?).is_none(),
            "shape" => shape.replace(c.shape()?).is_none(),
            other => return Err(bad_at(key_at, &format!("unexpected key `{other}`"))),
        };
        if !fresh {
            return Err(bad_at(key_at, &format!("key `{key}` appears twice")));
        }
        c.skip_ws();
        if !c.eat(',') {
            c.expect('}')?;
            break;
        }
    }
    c.skip_ws();
    if c.pos != text.len() {
        return Err(c.bad("text after the closing `}`"));
    }
    let missing = |key: &str| NpyError::Header(format!("the header has no `{key}` key"));
    Ok(NpyHeader {
        descr: descr.ok_or_else(|| missing("descr"))?,
        fortran_order: fortran_order.ok_or_else(|| missing("fortran_order"))?,
        shape: shape.ok_or_else(|| missing("shape"))?,
    })
}

/// A header error at byte `at` of the header text.
fn bad_at(at: usize, what: &str) -> NpyError {
    NpyError::Header(format!("{what} at byte {at} of the header"))
}

/// A position in the header text, with the few Python-literal readers the dict needs.
struct Cursor<'a> {
    text: &'a str,
    pos: usize,
}

impl<'a> Cursor<'a> {
    fn rest(&self) -> &'a str {
        &self.text[self.pos..]
    }

    fn bad(&self, what: &str) -> NpyError {
        bad_at(self.pos, what)
    }

    fn skip_ws(&mut self) {
        let rest = self.rest();
        self.pos += rest.len() - rest.trim_start().len();
    }

    fn eat(&mut self, ch: char) -> bool {
        let found = self.rest().starts_with(ch);
        if found {
            self.pos += ch.len_utf8();
        }
        found
    }

    fn expect(&mut self, ch: char) -> Result<(), NpyError> {
        if self.eat(ch) {
            Ok(())
        } else {
            Err(self.bad(&format!("expected `{ch}`")))
        }
    }

    /// Takes the longest prefix whose characters satisfy `keep`.
    fn take_while(&mut self, keep: impl Fn(char) -> bool) -> &'a str {
        let rest = self.rest();
        let len = rest.find(|ch| !keep(ch)).unwrap_or(rest.len());
        self.pos += len;
        &rest[..len]
    }

    /// A quoted string without escapes (none of the three keys or plain dtypes need them).
    fn string(&mut self) -> Result<&'a str, NpyError> {
        let Some(quote) = self
            .rest()
            .chars()
            .next()
            .filter(|q| matches!(q, '\'' | '"'))
        else {
            return Err(self.bad("expected a quoted string"));
        };
        self.pos += 1;
        let body = self.take_while(|ch| ch != quote);
        if !self.eat(quote) {
            return Err(self.bad("unterminated string"));
        }
        Ok(body)
    }

    /// The `descr` value: a dtype string; a list (a structured dtype) is refused by name.
    fn descr(&mut self) -> Result<String, NpyError> {
        if self.rest().starts_with('[') {
            let rest = self.rest();
            let mut depth = 0usize;
            let end = rest
                .char_indices()
                .find(|&(_, ch)| {
                    match ch {
                        '[' => depth += 1,
                        ']' => depth -= 1,
                        _ => {}
                    }
                    depth == 0
                })
                .map_or(rest.len(), |(i, _)| i + 1);
            return Err(NpyError::Dtype(rest[..end].to_string()));
        }
        Ok(self.string()?.to_string())
    }

    fn boolean(&mut self) -> Result<bool, NpyError> {
        match self.take_while(|ch| ch.is_ascii_alphanumeric()) {
            "True" => Ok(true),
            "False" => Ok(false),
            other => Err(self.bad(&format!("fortran_order `{other}` is not True or False"))),
        }
    }

    /// A tuple of non-negative integers, trailing comma optional, Python 2 `L` suffix allowed.
    fn shape(&mut self) -> Result<Vec<u64>, NpyError> {
        self.expect('(')?;
        let mut dims = Vec::new();
        loop {
            self.skip_ws();
            if self.eat(')') {
                return Ok(dims);
            }
            let at = self.pos;
            let digits = self.take_while(|ch| ch.is_ascii_digit());
            if digits.is_empty() {
                return Err(self.bad("expected a dimension"));
            }
            let dim = digits
                .parse::<u64>()
                .map_err(|_| bad_at(at, &format!("dimension {digits} does not fit in 64 bits")))?;
            dims.push(dim);
            let _ = self.eat('L') || self.eat('l');
            self.skip_ws();
            if !self.eat(',') {
                self.skip_ws();
                self.expect(')')?;
                return Ok(dims);
            }
        }
    }
}

#[cfg(test)]
mod tests;
