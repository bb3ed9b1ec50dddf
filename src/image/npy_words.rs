//! `.npy` word images: an array of shape (words, word_bytes) and dtype `|u1`, row i holding
//! word i's bytes with byte 0 the least significant — wide words have no NumPy dtype.

use std::io::Write;

use super::{check_word_bytes, read_bin, words_for, write_bin, ImageError, WordDump};
use crate::npy::{header_bytes, read_npy, shape_text};

/// Writes `bytes` as a (words, word_bytes) `|u1` array, the last row zero-padded; returns the
/// number of words.
pub fn write_npy_words<W: Write>(
    w: &mut W,
    word_bytes: usize,
    bytes: &[u8],
) -> Result<u64, ImageError> {
    check_word_bytes(word_bytes)?;
    let words = words_for(bytes.len() as u64, word_bytes as u64);
    w.write_all(&header_bytes("|u1", &[words, word_bytes as u64]))?;
    write_bin(w, word_bytes, bytes)
}

/// Reads a `|u1` (or `<u1`) array of shape (words, word_bytes), or a flat one of
/// words × word_bytes bytes.
pub fn read_npy_words(bytes: &[u8], word_bytes: usize) -> Result<WordDump, ImageError> {
    check_word_bytes(word_bytes)?;
    let (header, data) = read_npy(bytes)?;
    if !matches!(header.descr.as_str(), "|u1" | "<u1") {
        return Err(ImageError::NpyDtype(header.descr));
    }
    match header.shape.as_slice() {
        [_] => {}
        [_, row] if *row == word_bytes as u64 => {}
        shape => {
            return Err(ImageError::NpyShape {
                shape: shape_text(shape),
                word_bytes,
            })
        }
    }
    // read_npy checked the data against the shape; a flat array must still be whole words.
    read_bin(data, word_bytes)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::image::tests::{external, TempDir};
    use crate::image::WordState;
    use crate::npy::write_npy;
    use std::process::Command;

    fn npy(descr: &str, shape: &[u64], data: &[u8]) -> Vec<u8> {
        let mut file = Vec::new();
        write_npy(&mut file, descr, shape, data).unwrap();
        file
    }

    #[test]
    fn rows_are_words_and_the_last_row_is_padded() {
        let mut file = Vec::new();
        assert_eq!(
            write_npy_words(&mut file, 3, &[1, 2, 3, 4, 5, 6, 7]).unwrap(),
            3
        );
        let (header, data) = read_npy(&file).unwrap();
        assert_eq!((header.descr.as_str(), header.shape), ("|u1", vec![3, 3]));
        assert_eq!(data, [1, 2, 3, 4, 5, 6, 7, 0, 0]);
        file.clear();
        assert_eq!(write_npy_words(&mut file, 8, &[]).unwrap(), 0);
        assert_eq!(read_npy(&file).unwrap().0.shape, [0, 8]);
    }

    #[test]
    fn flat_and_little_endian_byte_arrays_are_read_too() {
        for (descr, shape) in [
            ("|u1", vec![2u64, 2]),
            ("<u1", vec![2, 2]),
            ("|u1", vec![4]),
        ] {
            let dump = read_npy_words(&npy(descr, &shape, &[1, 2, 3, 4]), 2).unwrap();
            assert_eq!(dump.data, [1, 2, 3, 4], "{descr} {shape:?}");
            assert_eq!(dump.state, [WordState::Written; 2]);
        }
    }

    #[test]
    fn other_dtypes_and_shapes_are_refused() {
        let err = |file: Vec<u8>| read_npy_words(&file, 4).unwrap_err().to_string();
        assert_eq!(
            err(npy("<u4", &[2], &[0; 8])),
            "npy image has dtype `<u4`, expected bytes (`|u1`)"
        );
        assert_eq!(
            err(npy("|i1", &[4], &[0; 4])),
            "npy image has dtype `|i1`, expected bytes (`|u1`)"
        );
        let shape_err = |shape: &str| {
            format!("npy image has shape {shape}, expected (words, 4) or (words * 4,)")
        };
        assert_eq!(err(npy("|u1", &[2, 8], &[0; 16])), shape_err("(2, 8)"));
        assert_eq!(err(npy("|u1", &[], &[0])), shape_err("()"));
        assert_eq!(err(npy("|u1", &[1, 2, 4], &[0; 8])), shape_err("(1, 2, 4)"));
        assert_eq!(
            err(npy("|u1", &[5], &[0; 5])),
            "5 bytes is not a whole number of 4-byte words (1 word and 1 byte)"
        );
        assert_eq!(err(b"not npy".to_vec()), "not a .npy file (bad magic)");
    }

    /// Runs `script` with numpy imported and the file as argv[1]; None when numpy is missing.
    fn numpy(script: &str, file: &std::path::Path) -> Option<String> {
        if !external("python3 with numpy", "python3", &["-c", "import numpy"]) {
            return None;
        }
        let out = Command::new("python3")
            .args(["-c", &format!("import sys, numpy\n{script}")])
            .arg(file)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        Some(String::from_utf8(out.stdout).unwrap())
    }

    #[test]
    fn numpy_loads_our_word_rows() {
        let dir = TempDir::new("numpy-load");
        let path = dir.join("words.npy");
        let bytes: Vec<u8> = (0..203u32).map(|i| (i * 7 + 3) as u8).collect();
        let mut file = Vec::new();
        write_npy_words(&mut file, 12, &bytes).unwrap();
        std::fs::write(&path, file).unwrap();
        let script = "a = numpy.load(sys.argv[1])\nprint(a.dtype.str, a.shape, a.tobytes().hex())";
        let Some(out) = numpy(script, &path) else {
            return;
        };
        // Source: numpy.load, the NumPy reference implementation.
        let mut padded = bytes.clone();
        padded.resize(17 * 12, 0);
        let hex: String = padded.iter().map(|b| format!("{b:02x}")).collect();
        assert_eq!(out.trim(), format!("|u1 (17, 12) {hex}"));
    }

    #[test]
    fn numpy_saved_byte_arrays_read_as_words() {
        let dir = TempDir::new("numpy-save");
        let path = dir.join("saved.npy");
        let script = "a = (numpy.arange(60) * 5 % 256).astype(numpy.uint8)\n\
                      numpy.save(sys.argv[1], a.reshape(20, 3))";
        if numpy(script, &path).is_none() {
            return;
        }
        // Source: numpy.save writes the header (with its own padding) and the rows in order.
        let dump = read_npy_words(&std::fs::read(&path).unwrap(), 3).unwrap();
        let expected: Vec<u8> = (0..60u32).map(|i| (i * 5 % 256) as u8).collect();
        assert_eq!(dump.words(), 20);
        assert_eq!(dump.data, expected);
    }
}
