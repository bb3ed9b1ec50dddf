//! Raw binary images: the bytes in device order, zero-padded to whole words.

use std::io::Write;

use super::{check_word_bytes, words_for, ImageError, WordDump, WordState};

/// Writes `bytes` and the zeros that complete the last word; returns the number of words.
pub fn write_bin<W: Write>(w: &mut W, word_bytes: usize, bytes: &[u8]) -> Result<u64, ImageError> {
    check_word_bytes(word_bytes)?;
    w.write_all(bytes)?;
    let pad = (word_bytes - bytes.len() % word_bytes) % word_bytes;
    w.write_all(&[0u8; super::MAX_WORD_BYTES][..pad])?;
    Ok(words_for(bytes.len() as u64, word_bytes as u64))
}

/// Reads a raw image; every word is written, and the length must be whole words.
pub fn read_bin(bytes: &[u8], word_bytes: usize) -> Result<WordDump, ImageError> {
    check_word_bytes(word_bytes)?;
    let words = bytes.len() / word_bytes;
    let rest = bytes.len() % word_bytes;
    if rest != 0 {
        return Err(ImageError::BinLength {
            len: bytes.len(),
            word_bytes,
            words,
            rest,
        });
    }
    Ok(WordDump {
        word_bytes,
        data: bytes.to_vec(),
        state: vec![WordState::Written; words],
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_last_word_is_padded_with_zeros() {
        let mut out = Vec::new();
        assert_eq!(write_bin(&mut out, 4, &[1, 2, 3, 4, 5]).unwrap(), 2);
        assert_eq!(out, [1, 2, 3, 4, 5, 0, 0, 0]);
        out.clear();
        assert_eq!(write_bin(&mut out, 512, &[]).unwrap(), 0);
        assert!(out.is_empty());
    }

    #[test]
    fn every_word_of_a_binary_image_is_written() {
        let dump = read_bin(&[9, 8, 7, 6, 5, 4], 2).unwrap();
        assert_eq!(dump.words(), 3);
        assert_eq!(dump.word(2), [5, 4]);
        assert_eq!(dump.state, [WordState::Written; 3]);
    }

    #[test]
    fn a_partial_word_is_an_error() {
        assert_eq!(
            read_bin(&[0; 1000], 64).unwrap_err().to_string(),
            "1000 bytes is not a whole number of 64-byte words (15 words and 40 bytes)"
        );
    }
}
