//! Memory images: a byte stream in device order cut into little-endian words of one width,
//! written as `$readmemh` hex, raw binary or `.npy` rows, and device dumps read back.
//!
//! ```text
//! bytes      b0 b1 b2 b3 | b4 b5 b6 b7 | b8 00 00 00    word_bytes = 4, last word zero-padded
//! word            0      |      1      |      2
//! hex line    b3b2b1b0     b7b6b5b4      000000b8      most-significant digit first
//! ```
//!
//! Writers take any `io::Write` and return the number of words written; readers return a
//! [`WordDump`] indexed by word address, telling written, unknown (`x`/`z`) and absent words
//! apart.

mod bin;
mod hex;
mod hex_read;
mod npy_words;

pub use bin::{read_bin, write_bin};
pub use hex::{encode_hex_into, write_hex, write_hex_and_segment, write_hex_segments, Segment};
pub use hex_read::{dense_limit, read_hex, HexProblem, SPARSE_DUMP_BYTES};
pub use npy_words::{read_npy_words, write_npy_words};

use std::fmt;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::str::FromStr;

use crate::npy::NpyError;

/// Widest word, in bytes (4096 bits).
const MAX_WORD_BYTES: usize = 512;

/// Largest dump, in bytes of word data, that a reader builds. `@` addresses far beyond the
/// words a file holds would otherwise make a small file demand any amount of memory.
pub const MAX_DUMP_BYTES: u64 = 1 << 32;

/// Number of `word_bytes`-byte words that hold `bytes` bytes (the last one possibly partial).
pub fn words_for(bytes: u64, word_bytes: u64) -> u64 {
    bytes.div_ceil(word_bytes)
}

/// Checks a word width in bits (a multiple of 8 in 8..=4096) and returns its size in bytes.
pub fn check_word_bits(bits: u32) -> Result<u32, ImageError> {
    if !bits.is_multiple_of(8) {
        Err(ImageError::WordBitsNotBytes { bits })
    } else if !(8..=4096).contains(&bits) {
        Err(ImageError::WordBitsRange { bits })
    } else {
        Ok(bits / 8)
    }
}

/// Checks a word size in bytes given directly to a writer or reader.
fn check_word_bytes(word_bytes: usize) -> Result<(), ImageError> {
    if (1..=MAX_WORD_BYTES).contains(&word_bytes) {
        Ok(())
    } else {
        Err(ImageError::WordBytesRange { word_bytes })
    }
}

/// The three memory-image file formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ImageFormat {
    /// `$readmemh` text: one word per line, hex digits, most-significant first.
    Hex,
    /// Raw bytes in device order, zero-padded to whole words.
    Bin,
    /// `.npy` array of shape (words, word_bytes), dtype `|u1`.
    Npy,
}

impl ImageFormat {
    /// File extension without the dot; also the format's name.
    pub fn ext(self) -> &'static str {
        match self {
            ImageFormat::Hex => "hex",
            ImageFormat::Bin => "bin",
            ImageFormat::Npy => "npy",
        }
    }

    /// The format a path's extension names (`.hex`, `.bin`, `.npy`, any case), if any.
    pub fn from_path(path: &Path) -> Option<ImageFormat> {
        path.extension()?.to_str()?.parse().ok()
    }
}

impl fmt::Display for ImageFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.ext())
    }
}

impl FromStr for ImageFormat {
    type Err = ImageError;

    fn from_str(name: &str) -> Result<Self, Self::Err> {
        [ImageFormat::Hex, ImageFormat::Bin, ImageFormat::Npy]
            .into_iter()
            .find(|f| f.ext().eq_ignore_ascii_case(name))
            .ok_or_else(|| ImageError::UnknownFormat(name.to_string()))
    }
}

/// What a dump says about one word.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WordState {
    /// The dump gives the word's value.
    Written,
    /// The dump has the word but with `x` or `z` digits; its data bytes are zero.
    Unknown,
    /// The dump never mentions the word (a gap between `@` sections); its data bytes are zero.
    Absent,
}

/// Words read from a memory dump, indexed by word address.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct WordDump {
    /// Bytes per word.
    pub word_bytes: usize,
    /// `words() * word_bytes` bytes; each word little-endian (byte 0 least significant).
    pub data: Vec<u8>,
    /// One state per word.
    pub state: Vec<WordState>,
}

impl WordDump {
    /// Number of words, from address 0 to the last one the dump mentions.
    pub fn words(&self) -> usize {
        self.state.len()
    }

    /// The bytes of word `i`, least significant first. Panics if `i >= self.words()`, like
    /// slice indexing.
    pub fn word(&self, i: usize) -> &[u8] {
        &self.data[i * self.word_bytes..(i + 1) * self.word_bytes]
    }
}

/// Why an image could not be written or read.
#[derive(Debug, thiserror::Error)]
pub enum ImageError {
    /// A word width that is not whole bytes.
    #[error("word width {bits} bits is not a multiple of 8")]
    WordBitsNotBytes {
        /// The width asked for.
        bits: u32,
    },
    /// A word width outside 8..=4096 bits.
    #[error("word width {bits} bits is outside 8..=4096")]
    WordBitsRange {
        /// The width asked for.
        bits: u32,
    },
    /// A word size outside 1..=512 bytes.
    #[error("word size {word_bytes} bytes is outside 1..=512")]
    WordBytesRange {
        /// The size asked for.
        word_bytes: usize,
    },
    /// A format name other than hex, bin or npy.
    #[error("unknown image format `{0}` (expected hex, bin or npy)")]
    UnknownFormat(String),
    /// A path whose extension names no image format.
    #[error("{}: cannot tell the image format from the extension (expected .hex, .bin or .npy)", .0.display())]
    NoFormat(PathBuf),
    /// Segments of a hex image that are out of order or overlap.
    #[error("segment `{label}` starts at word @{start:x}, before the end (@{prev_end:x}) of segment `{prev_label}`")]
    SegmentOrder {
        /// The offending segment.
        label: String,
        /// Its first word address.
        start: u64,
        /// The segment before it.
        prev_label: String,
        /// First word address after the segment before it.
        prev_end: u64,
    },
    /// A segment whose words would run past the last word address.
    #[error("segment `{0}` runs past the last word address")]
    SegmentTooFar(String),
    /// A segment label that would break its comment line.
    #[error("segment label `{}` contains a line break", .0.escape_debug())]
    SegmentLabel(String),
    /// A problem on one line of a hex image.
    #[error("line {line}: {problem}")]
    Hex {
        /// 1-based line number.
        line: usize,
        /// What is wrong there.
        problem: HexProblem,
    },
    /// A binary image that is not whole words.
    #[error(
        "{} is not a whole number of {word_bytes}-byte words ({} and {})",
        count(*.len, "byte"), count(*.words, "word"), count(*.rest, "byte")
    )]
    BinLength {
        /// Bytes in the image.
        len: usize,
        /// Bytes per word.
        word_bytes: usize,
        /// Whole words present.
        words: usize,
        /// Bytes left over.
        rest: usize,
    },
    /// A `.npy` image that is not an array of bytes.
    #[error("npy image has dtype `{0}`, expected bytes (`|u1`)")]
    NpyDtype(String),
    /// A `.npy` image whose shape does not match the word size.
    #[error(
        "npy image has shape {shape}, expected (words, {word_bytes}) or (words * {word_bytes},)"
    )]
    NpyShape {
        /// Shape as Python tuple text.
        shape: String,
        /// Bytes per word.
        word_bytes: usize,
    },
    /// A malformed `.npy` file.
    #[error(transparent)]
    Npy(#[from] NpyError),
    /// Reading or writing failed.
    #[error("I/O error: {0}")]
    Io(#[from] std::io::Error),
    /// A problem with the named file.
    #[error("{}: {problem}", path.display())]
    File {
        /// The file.
        path: PathBuf,
        /// What is wrong with it.
        problem: Box<ImageError>,
    },
}

/// Writes `bytes` as an image of `format`; returns the number of words written.
pub fn write_image<W: Write + Send>(
    w: &mut W,
    format: ImageFormat,
    word_bytes: usize,
    bytes: &[u8],
) -> Result<u64, ImageError> {
    match format {
        ImageFormat::Hex => write_hex(w, word_bytes, bytes),
        ImageFormat::Bin => write_bin(w, word_bytes, bytes),
        ImageFormat::Npy => write_npy_words(w, word_bytes, bytes),
    }
}

/// Reads an image of `format` held in memory, with words of `word_bits` bits.
pub fn read_image(
    format: ImageFormat,
    bytes: &[u8],
    word_bits: u32,
) -> Result<WordDump, ImageError> {
    let word_bytes = check_word_bits(word_bits)? as usize;
    match format {
        // Bytes that are not UTF-8 can only sit in comments of a valid file; inside a word
        // they become U+FFFD and are reported as a bad digit on their line.
        ImageFormat::Hex => read_hex(&String::from_utf8_lossy(bytes), word_bits),
        ImageFormat::Bin => read_bin(bytes, word_bytes),
        ImageFormat::Npy => read_npy_words(bytes, word_bytes),
    }
}

/// `n` and a noun, plural unless `n` is 1.
fn count(n: usize, noun: &str) -> String {
    format!("{n} {noun}{}", if n == 1 { "" } else { "s" })
}

/// Reads a device dump file, choosing the format by its extension; errors name the path.
pub fn read_dump(path: &Path, word_bits: u32) -> Result<WordDump, ImageError> {
    check_word_bits(word_bits)?;
    let format = ImageFormat::from_path(path).ok_or_else(|| ImageError::NoFormat(path.into()))?;
    let in_file = |problem| ImageError::File {
        path: path.into(),
        problem: Box::new(problem),
    };
    let bytes = std::fs::read(path).map_err(|e| in_file(e.into()))?;
    read_image(format, &bytes, word_bits).map_err(in_file)
}

#[cfg(test)]
mod tests;
