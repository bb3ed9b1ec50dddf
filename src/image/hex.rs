//! `$readmemh` hex writers: one word per line, exactly two lowercase digits per byte,
//! most-significant digit first, LF line ends; per-channel images get a `// label` comment
//! and an `@word_address` line before each segment.

use std::io::Write;

use super::{check_word_bytes, words_for, ImageError};

/// Text written per call: large, since each call hands work between threads (see
/// [`Lines`]), and at least the 1 MiB of a buffered writer's buffer, so that it passes the
/// text straight through instead of copying it into its own buffer.
const TEXT_BYTES: usize = 1 << 20;

/// Payload bytes formatted per block: at least two digits per byte make at least
/// [`TEXT_BYTES`] of text.
const BLOCK_BYTES: usize = TEXT_BYTES / 2;

/// Two lowercase hex digits of each byte value, most-significant first.
const DIGITS: [[u8; 2]; 256] = {
    let hex = b"0123456789abcdef";
    let mut t = [[0u8; 2]; 256];
    let mut b = 0;
    while b < 256 {
        t[b] = [hex[b >> 4], hex[b & 0xf]];
        b += 1;
    }
    t
};

/// Appends `bytes` to `out` as hex lines of `word_bytes`-byte words (the format of
/// [`write_hex`], without segment lines); a short last word is zero-padded. Callers may
/// format disjoint word-aligned pieces in parallel and join them in order: the text of a
/// concatenation is the concatenation of the texts. `word_bytes` must be at least 1.
pub fn encode_hex_into(out: &mut Vec<u8>, word_bytes: usize, bytes: &[u8]) {
    let line = 2 * word_bytes + 1;
    let start = out.len();
    out.resize(start + bytes.len().div_ceil(word_bytes) * line, 0);
    let text = &mut out[start..];
    let (whole, rest) = bytes.split_at(bytes.len() / word_bytes * word_bytes);
    for (o, w) in text
        .chunks_exact_mut(line)
        .zip(whole.chunks_exact(word_bytes))
    {
        encode_word(o, w);
    }
    if !rest.is_empty() {
        let mut padded = [0u8; super::MAX_WORD_BYTES];
        padded[..rest.len()].copy_from_slice(rest);
        let last = text.len() - line;
        encode_word(&mut text[last..], &padded[..word_bytes]);
    }
}

/// One line: the digits of `word` from its last byte to its first, then LF. Four bytes
/// at a time become eight digits in one 64-bit register; the at most three bytes at the
/// word's low end that do not fill a group go through the table.
#[inline(always)]
fn encode_word(line: &mut [u8], word: &[u8]) {
    let (digits, lf) = line.split_at_mut(2 * word.len());
    let (low, groups) = word.split_at(word.len() % 4);
    let (group_digits, low_digits) = digits.split_at_mut(2 * groups.len());
    for (d, g) in group_digits
        .chunks_exact_mut(8)
        .zip(groups.rchunks_exact(4))
    {
        let g: [u8; 4] = g.try_into().expect("four bytes");
        d.copy_from_slice(&digits4(u32::from_be_bytes(g)));
    }
    for (d, &b) in low_digits.chunks_exact_mut(2).zip(low.iter().rev()) {
        d.copy_from_slice(&DIGITS[usize::from(b)]);
    }
    lf[0] = b'\n';
}

/// The eight hex digits of four bytes, the byte printed first in the low eight bits of
/// `v`: each byte is spread to its own 16-bit lane, its nibbles swapped so the high one
/// prints first, and every nibble turned into `0`..`9` or `a`..`f` without a branch
/// (nibbles of 10 and more carry into bit 4 when 6 is added, and those get 0x27 more).
#[inline(always)]
fn digits4(v: u32) -> [u8; 8] {
    const LOW_NIBBLES: u64 = 0x000f_000f_000f_000f;
    const EACH: u64 = 0x0101_0101_0101_0101;
    let mut x = u64::from(v);
    x = (x | x << 16) & 0x0000_ffff_0000_ffff;
    x = (x | x << 8) & 0x00ff_00ff_00ff_00ff;
    let n = (x >> 4 & LOW_NIBBLES) | (x & LOW_NIBBLES) << 8;
    let letters = (n + 6 * EACH) >> 4 & EACH;
    (n + u64::from(b'0') * EACH + letters * u64::from(b'a' - b'0' - 10)).to_le_bytes()
}

/// One region of a per-channel hex image.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Segment<'a> {
    /// Word address of the region's first word.
    pub word_addr: u64,
    /// The region's bytes in device order; the last word is zero-padded.
    pub bytes: &'a [u8],
    /// Name written in the comment line before the region (no line breaks).
    pub label: &'a str,
}

/// Writes `bytes` as hex words from address 0; returns the number of words written.
pub fn write_hex<W: Write + Send>(
    w: &mut W,
    word_bytes: usize,
    bytes: &[u8],
) -> Result<u64, ImageError> {
    check_word_bytes(word_bytes)?;
    let mut out = Lines::new(w);
    out.words(word_bytes, bytes)?;
    out.finish()?;
    Ok(words_for(bytes.len() as u64, word_bytes as u64))
}

/// Writes segments, each as `// label`, `@addr` (lowercase hex word address) and its words
/// (an empty segment only as its label line);
/// returns the number of words written.
///
/// Segments must be sorted by address and must not overlap; this is checked before anything
/// is written, so a refused image leaves the writer untouched.
pub fn write_hex_segments<W: Write + Send>(
    w: &mut W,
    word_bytes: usize,
    segments: &[Segment],
) -> Result<u64, ImageError> {
    let total = check_segments(word_bytes, segments)?;
    let mut out = Lines::new(w);
    for seg in segments {
        out.text(&segment_head(seg))?;
        if !seg.bytes.is_empty() {
            out.words(word_bytes, seg.bytes)?;
        }
    }
    out.finish()?;
    Ok(total)
}

/// Writes one region twice from a single formatting of its words: to `image` as a hex
/// image from address 0 (what [`write_hex`] writes) and to `channel` as one segment (what
/// [`write_hex_segments`] writes for it); returns the number of words. The two writers
/// take each block of text side by side. A refused segment leaves both untouched.
pub fn write_hex_and_segment<A: Write + Send, B: Write + Send>(
    image: &mut A,
    channel: &mut B,
    word_bytes: usize,
    seg: &Segment,
) -> Result<u64, ImageError> {
    let words = check_segments(word_bytes, std::slice::from_ref(seg))?;
    channel.write_all(segment_head(seg).as_bytes())?;
    let mut out = Lines::new(Both { image, channel });
    out.words(word_bytes, seg.bytes)?;
    out.finish()?;
    Ok(words)
}

/// Checks a word size and the segments of a per-channel image (labels on one line, sorted,
/// not overlapping, within the address space); returns their words in all.
fn check_segments(word_bytes: usize, segments: &[Segment]) -> Result<u64, ImageError> {
    check_word_bytes(word_bytes)?;
    let mut total = 0u64;
    let mut prev: Option<(&Segment, u64)> = None;
    for seg in segments {
        if seg.label.contains(['\n', '\r']) {
            return Err(ImageError::SegmentLabel(seg.label.to_string()));
        }
        let words = words_for(seg.bytes.len() as u64, word_bytes as u64);
        let end = seg
            .word_addr
            .checked_add(words)
            .ok_or_else(|| ImageError::SegmentTooFar(seg.label.to_string()))?;
        if let Some((before, prev_end)) = prev {
            if seg.word_addr < prev_end {
                return Err(ImageError::SegmentOrder {
                    label: seg.label.to_string(),
                    start: seg.word_addr,
                    prev_label: before.label.to_string(),
                    prev_end,
                });
            }
        }
        prev = Some((seg, end));
        total += words;
    }
    Ok(total)
}

/// The lines before a segment's words: its label, then its address unless it is empty (an
/// address line with no words after it would point past the end of a memory sized to the
/// words present; simulators report it as out of range).
fn segment_head(seg: &Segment) -> String {
    if seg.bytes.is_empty() {
        format!("// {} (empty)\n", seg.label)
    } else {
        format!("// {}\n@{:x}\n", seg.label, seg.word_addr)
    }
}

/// Two writers that receive the same bytes, each large write on its own thread.
struct Both<'a, A, B> {
    image: &'a mut A,
    channel: &'a mut B,
}

impl<A: Write + Send, B: Write + Send> Write for Both<'_, A, B> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let (image, channel) = (&mut *self.image, &mut *self.channel);
        let (a, b) = rayon::join(|| image.write_all(buf), || channel.write_all(buf));
        a.and(b).map(|()| buf.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.image.flush().and(self.channel.flush())
    }
}

/// Hex lines gathered in a buffer in front of a writer. While one block of text is being
/// written the next is formatted into the spare buffer, so formatting overlaps the write.
struct Lines<W: Write + Send> {
    w: W,
    buf: Vec<u8>,
    spare: Vec<u8>,
}

impl<W: Write + Send> Lines<W> {
    fn new(w: W) -> Self {
        Lines {
            w,
            buf: Vec::new(),
            spare: Vec::new(),
        }
    }

    fn text(&mut self, text: &str) -> std::io::Result<()> {
        self.buf.extend_from_slice(text.as_bytes());
        if self.buf.len() >= TEXT_BYTES {
            self.w.write_all(&self.buf)?;
            self.buf.clear();
        }
        Ok(())
    }

    /// One line per word; bytes missing from a short last word print as `00`.
    fn words(&mut self, word_bytes: usize, bytes: &[u8]) -> std::io::Result<()> {
        let block = (BLOCK_BYTES / word_bytes).max(1) * word_bytes;
        for piece in bytes.chunks(block) {
            if self.buf.len() < TEXT_BYTES {
                encode_hex_into(&mut self.buf, word_bytes, piece);
                continue;
            }
            self.spare.clear();
            let (w, buf, spare) = (&mut self.w, &self.buf, &mut self.spare);
            let (written, ()) = rayon::join(
                || w.write_all(buf),
                || encode_hex_into(spare, word_bytes, piece),
            );
            written?;
            std::mem::swap(&mut self.buf, &mut self.spare);
        }
        Ok(())
    }

    fn finish(mut self) -> std::io::Result<()> {
        self.w.write_all(&self.buf)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn hex(word_bytes: usize, bytes: &[u8]) -> (u64, String) {
        let mut out = Vec::new();
        let words = write_hex(&mut out, word_bytes, bytes).unwrap();
        (words, String::from_utf8(out).unwrap())
    }

    #[test]
    fn two_u32_elements_share_a_64_bit_word_element_0_low() {
        // Common practice: byte 0 of the stream is the least-significant byte of word 0, so
        // element 0 of a u32 array fills the low half and prints last.
        let bytes = [0x1122_3344u32.to_le_bytes(), 0xAABB_CCDDu32.to_le_bytes()].concat();
        assert_eq!(hex(8, &bytes), (1, "aabbccdd11223344\n".to_string()));
    }

    #[test]
    fn narrowest_and_widest_words() {
        assert_eq!(hex(1, &[0x00, 0xff, 0x5a]), (3, "00\nff\n5a\n".to_string()));
        let bytes: Vec<u8> = (0..1024u32).map(|i| i as u8).collect();
        let (words, text) = hex(512, &bytes);
        assert_eq!(words, 2);
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 2);
        for line in lines {
            // 4096 bits = 1024 digits; byte 511 (0xff) first, byte 0 (0x00) last.
            assert_eq!(line.len(), 1024);
            assert!(line.starts_with("fffefdfc") && line.ends_with("03020100"));
            // Digits 510..514 are bytes 256 (0x00) and 255 (0xff).
            assert_eq!(&line[510..514], "00ff");
        }
    }

    #[test]
    fn table_encoder_matches_formatted_digits_for_every_width_and_length() {
        // The reference is the standard library's `{:02x}` formatting, word by word.
        let bytes: Vec<u8> = (0..2000u32).map(|i| (i * 37 % 256) as u8).collect();
        for word_bytes in [1, 2, 3, 4, 5, 7, 8, 64, 511, 512] {
            for len in [0, 1, word_bytes - 1, word_bytes, 3 * word_bytes + 1, 700] {
                let mut got = b"keep".to_vec();
                encode_hex_into(&mut got, word_bytes, &bytes[..len]);
                let mut want = "keep".to_string();
                for w in bytes[..len].chunks(word_bytes) {
                    for i in (0..word_bytes).rev() {
                        want += &format!("{:02x}", w.get(i).copied().unwrap_or(0));
                    }
                    want.push('\n');
                }
                assert_eq!(String::from_utf8(got).unwrap(), want, "{word_bytes} {len}");
            }
        }
    }

    #[test]
    fn text_written_in_overlapping_blocks_joins_in_order() {
        // Enough words for three full blocks and a part, so the write of one block runs
        // beside the formatting of the next at every seam.
        let word_bytes = 3;
        let bytes: Vec<u8> = (0..3 * BLOCK_BYTES as u32 + 1001)
            .map(|i| (i.wrapping_mul(2_654_435_761) >> 13) as u8)
            .collect();
        let mut whole = Vec::new();
        encode_hex_into(&mut whole, word_bytes, &bytes);
        let mut out = b"keep".to_vec();
        let seg = Segment {
            word_addr: 5,
            bytes: &bytes,
            label: "big",
        };
        write_hex_segments(&mut out, word_bytes, &[seg]).unwrap();
        assert_eq!(&out[..14], b"keep// big\n@5\n");
        assert!(out[14..] == whole[..], "blocks differ from one-piece text");
    }

    #[test]
    fn one_formatting_feeds_the_image_and_the_channel_segment() {
        for bytes in [&[][..], &[0x11, 0x22, 0x33, 0x44, 0x55][..]] {
            let seg = Segment {
                word_addr: 0x1a0,
                bytes,
                label: "p0 keys",
            };
            let (mut image, mut channel) = (Vec::new(), b"// earlier\n".to_vec());
            let words = write_hex_and_segment(&mut image, &mut channel, 4, &seg).unwrap();
            let (mut alone, mut segments) = (Vec::new(), b"// earlier\n".to_vec());
            assert_eq!(words, write_hex(&mut alone, 4, bytes).unwrap());
            write_hex_segments(&mut segments, 4, &[seg]).unwrap();
            assert_eq!((image, channel), (alone, segments));
        }
        let bad = Segment {
            word_addr: 0,
            bytes: &[1],
            label: "a\nb",
        };
        let (mut image, mut channel) = (Vec::new(), Vec::new());
        assert!(write_hex_and_segment(&mut image, &mut channel, 4, &bad).is_err());
        assert!(image.is_empty() && channel.is_empty());
    }

    #[test]
    fn empty_input_writes_no_words() {
        assert_eq!(hex(4, &[]), (0, String::new()));
    }

    #[test]
    fn the_last_word_is_zero_padded() {
        assert_eq!(
            hex(4, &[1, 2, 3, 4, 0xaa, 0xbb, 0xcc]),
            (2, "04030201\n00ccbbaa\n".to_string())
        );
    }

    #[test]
    fn segments_get_a_label_and_an_address_line() {
        let segments = [
            Segment {
                word_addr: 0,
                bytes: &[0x11, 0x22, 0x33, 0x44, 0x55],
                label: "ch0 keys",
            },
            Segment {
                word_addr: 0x1a0,
                bytes: &[0xaa, 0xbb, 0xcc, 0xdd],
                label: "ch1 keys",
            },
        ];
        let mut out = Vec::new();
        assert_eq!(write_hex_segments(&mut out, 4, &segments).unwrap(), 3);
        assert_eq!(
            String::from_utf8(out).unwrap(),
            "// ch0 keys\n@0\n44332211\n00000055\n// ch1 keys\n@1a0\nddccbbaa\n"
        );
    }

    #[test]
    fn segments_out_of_order_or_overlapping_are_refused() {
        let seg = |word_addr, label| Segment {
            word_addr,
            bytes: &[0; 8],
            label,
        };
        let err = |segments: &[Segment]| {
            let mut out = Vec::new();
            let err = write_hex_segments(&mut out, 4, segments).unwrap_err();
            assert!(out.is_empty(), "nothing is written before the check");
            err.to_string()
        };
        assert_eq!(
            err(&[seg(0, "a"), seg(1, "b")]),
            "segment `b` starts at word @1, before the end (@2) of segment `a`"
        );
        assert_eq!(
            err(&[seg(0x10, "a"), seg(0, "b")]),
            "segment `b` starts at word @0, before the end (@12) of segment `a`"
        );
        assert_eq!(
            err(&[seg(u64::MAX, "top")]),
            "segment `top` runs past the last word address"
        );
        assert_eq!(
            err(&[seg(0, "a\nb")]),
            "segment label `a\\nb` contains a line break"
        );
        let mut out = Vec::new();
        assert_eq!(
            write_hex_segments(&mut out, 4, &[seg(0, "a"), seg(2, "b")]).unwrap(),
            4
        );
    }

    #[test]
    fn writer_failures_are_reported() {
        struct Full;
        impl Write for Full {
            fn write(&mut self, _: &[u8]) -> std::io::Result<usize> {
                Err(std::io::Error::other("disk full"))
            }
            fn flush(&mut self) -> std::io::Result<()> {
                Ok(())
            }
        }
        let err = write_hex(&mut Full, 4, &[1, 2, 3, 4]).unwrap_err();
        assert_eq!(err.to_string(), "I/O error: disk full");
    }
}
