//! Reading a device dump as memory words: `$readmemh` text, raw binary, `.npy` word
//! images (`|u1`), and typed `.npy` arrays holding the output's records with their own
//! dtype (`<u4` row ids), which are laid into words like the device would.

use std::path::Path;

use super::shape::Shape;
use crate::error::{Error, Result};
use crate::image::{self, ImageFormat, WordDump, WordState};
use crate::npy::read_npy;
use crate::table::ElemType;

/// The NumPy dtype of `shape`'s records when they are one plain element, if any.
fn record_descr(shape: &Shape) -> Option<&'static str> {
    let ty: ElemType = shape.elem.parse().ok()?;
    (shape.fields.is_empty() && !ty.is_sub_byte() && u64::from(ty.bits() / 8) == shape.rec)
        .then(|| ty.npy_descr())
}

/// Reads `path` as words of `shape`.
pub fn read(path: &Path, shape: &Shape) -> Result<WordDump> {
    let word_bits = (shape.word_bytes * 8) as u32;
    if ImageFormat::from_path(path) != Some(ImageFormat::Npy) {
        return image::read_dump(path, word_bits).map_err(|e| Error::input(e.to_string()));
    }
    let bytes = std::fs::read(path).map_err(|e| Error::read(path, e))?;
    let (header, data) =
        read_npy(&bytes).map_err(|e| Error::input(format!("{}: {e}", path.display())))?;
    if matches!(header.descr.as_str(), "|u1" | "<u1") {
        return image::read_image(ImageFormat::Npy, &bytes, word_bits)
            .map_err(|e| Error::input(format!("{}: {e}", path.display())));
    }
    match record_descr(shape) {
        Some(d) if d == header.descr && header.shape.len() == 1 => Ok(words_of(data, shape)),
        want => Err(Error::input(format!(
            "{}: npy dump has dtype `{}` and shape {:?}, expected a 1-D array of `{}` records or a `|u1` word image",
            path.display(),
            header.descr,
            header.shape,
            want.unwrap_or("|u1")
        ))),
    }
}

/// Packed records laid into zero-padded words, all written.
fn words_of(data: &[u8], shape: &Shape) -> WordDump {
    let wb = shape.word_bytes as usize;
    let words = data.len().div_ceil(wb);
    let mut d = data.to_vec();
    d.resize(words * wb, 0);
    WordDump {
        word_bytes: wb,
        data: d,
        state: vec![WordState::Written; words],
    }
}

/// The first word address at which two dumps of one output disagree, if any: a word
/// differs when its state differs or when both are written with other bytes.
pub fn first_disagreement(a: &WordDump, b: &WordDump) -> Option<u64> {
    let n = a.words().max(b.words());
    (0..n)
        .find(|&w| {
            let sa = a.state.get(w).copied().unwrap_or(WordState::Absent);
            let sb = b.state.get(w).copied().unwrap_or(WordState::Absent);
            sa != sb || (sa == WordState::Written && a.word(w) != b.word(w))
        })
        .map(|w| w as u64)
}
