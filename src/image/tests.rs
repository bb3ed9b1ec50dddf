//! Tests of word sizes, format names, file dispatch and round trips through every format;
//! also the temporary-directory and outside-program helpers the format tests share.

use std::path::PathBuf;
use std::process::Command;
use std::sync::atomic::{AtomicUsize, Ordering};

use proptest::prelude::*;

use super::*;

const ALL: [ImageFormat; 3] = [ImageFormat::Hex, ImageFormat::Bin, ImageFormat::Npy];

/// A fresh directory under the system temp dir, removed when dropped.
pub(super) struct TempDir(PathBuf);

impl TempDir {
    pub(super) fn new(tag: &str) -> TempDir {
        static NEXT: AtomicUsize = AtomicUsize::new(0);
        let n = NEXT.fetch_add(1, Ordering::Relaxed);
        let dir = std::env::temp_dir().join(format!("weir-{}-{n}-{tag}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        TempDir(dir)
    }

    pub(super) fn path(&self) -> &Path {
        &self.0
    }

    pub(super) fn join(&self, name: &str) -> PathBuf {
        self.0.join(name)
    }
}

impl Drop for TempDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// Whether `program probe...` runs successfully. When it does not, the test should return
/// early: this prints why, or panics if WEIR_REQUIRE_EXTERNAL=1 demands the reference.
pub(super) fn external(what: &str, program: &str, probe: &[&str]) -> bool {
    let works = Command::new(program)
        .args(probe)
        .output()
        .is_ok_and(|out| out.status.success());
    if !works {
        let required = std::env::var("WEIR_REQUIRE_EXTERNAL").is_ok_and(|v| v == "1");
        assert!(!required, "{what} not found, but WEIR_REQUIRE_EXTERNAL=1");
        println!("skipped: {what} not found");
    }
    works
}

/// `bytes` zero-padded to whole words.
fn padded(bytes: &[u8], word_bytes: usize) -> Vec<u8> {
    let mut out = bytes.to_vec();
    out.resize(bytes.len().div_ceil(word_bytes) * word_bytes, 0);
    out
}

#[test]
fn words_round_up() {
    assert_eq!(words_for(0, 4), 0);
    assert_eq!(words_for(1, 4), 1);
    assert_eq!(words_for(4, 4), 1);
    assert_eq!(words_for(5, 4), 2);
    assert_eq!(words_for(2000, 512), 4);
}

#[test]
fn word_widths_are_whole_bytes_from_8_to_4096_bits() {
    assert_eq!(check_word_bits(8).unwrap(), 1);
    assert_eq!(check_word_bits(64).unwrap(), 8);
    assert_eq!(check_word_bits(4096).unwrap(), 512);
    let err = |bits| check_word_bits(bits).unwrap_err().to_string();
    assert_eq!(err(500), "word width 500 bits is not a multiple of 8");
    assert_eq!(err(0), "word width 0 bits is outside 8..=4096");
    assert_eq!(err(4104), "word width 4104 bits is outside 8..=4096");
    let mut sink = Vec::new();
    for word_bytes in [0, 513] {
        for format in ALL {
            let err = write_image(&mut sink, format, word_bytes, &[1]).unwrap_err();
            assert_eq!(
                err.to_string(),
                format!("word size {word_bytes} bytes is outside 1..=512")
            );
        }
    }
    assert!(sink.is_empty());
}

#[test]
fn formats_are_named_by_their_extension() {
    for format in ALL {
        assert_eq!(format.to_string(), format.ext());
        assert_eq!(format.ext().parse::<ImageFormat>().unwrap(), format);
        let path = PathBuf::from(format!("out/ch0.{}", format.ext().to_uppercase()));
        assert_eq!(ImageFormat::from_path(&path), Some(format));
    }
    assert_eq!(
        "mem".parse::<ImageFormat>().unwrap_err().to_string(),
        "unknown image format `mem` (expected hex, bin or npy)"
    );
    assert_eq!(ImageFormat::from_path(Path::new("ch0.txt")), None);
    assert_eq!(ImageFormat::from_path(Path::new("hex")), None);
}

#[test]
fn read_dump_picks_the_format_by_extension() {
    let dir = TempDir::new("dump");
    let bytes = [1u8, 2, 3, 4, 5, 6];
    for format in ALL {
        let path = dir.join(&format!("ch0.{format}"));
        let mut file = Vec::new();
        write_image(&mut file, format, 4, &bytes).unwrap();
        std::fs::write(&path, file).unwrap();
        let dump = read_dump(&path, 32).unwrap();
        assert_eq!(dump.data, [1, 2, 3, 4, 5, 6, 0, 0], "{format}");
        assert_eq!(dump.word(1), [5, 6, 0, 0]);
    }
}

#[test]
fn read_dump_errors_name_the_path() {
    let dir = TempDir::new("dump-errors");
    let bad = dir.join("bad.hex");
    std::fs::write(&bad, "00\ng1\n").unwrap();
    assert_eq!(
        read_dump(&bad, 8).unwrap_err().to_string(),
        format!(
            "{}: line 2: `g1` is not a hex word: `g` is not a hex digit",
            bad.display()
        )
    );
    let missing = dir.join("missing.bin");
    let err = read_dump(&missing, 8).unwrap_err().to_string();
    assert!(
        err.starts_with(&format!("{}: I/O error: ", missing.display())),
        "{err}"
    );
    let text = dir.join("dump.txt");
    assert_eq!(
        read_dump(&text, 8).unwrap_err().to_string(),
        format!(
            "{}: cannot tell the image format from the extension (expected .hex, .bin or .npy)",
            text.display()
        )
    );
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn every_format_gives_back_the_padded_bytes(
        word_bytes in 1usize..=128,
        bytes in prop::collection::vec(any::<u8>(), 0..2000),
    ) {
        let expected = padded(&bytes, word_bytes);
        for format in ALL {
            let mut file = Vec::new();
            let words = write_image(&mut file, format, word_bytes, &bytes).unwrap();
            let dump = read_image(format, &file, word_bytes as u32 * 8).unwrap();
            prop_assert_eq!(dump.words() as u64, words, "{}", format);
            prop_assert_eq!(&dump.data, &expected, "{}", format);
            prop_assert!(dump.state.iter().all(|s| *s == WordState::Written));
        }
    }

    #[test]
    fn segments_land_at_their_word_addresses(
        word_bytes in 1usize..=128,
        parts in prop::collection::vec((0u64..4, prop::collection::vec(any::<u8>(), 0..300)), 0..6),
    ) {
        let labels: Vec<String> = (0..parts.len()).map(|i| format!("region {i}")).collect();
        let mut segments = Vec::new();
        let mut addr = 0;
        for ((gap, bytes), label) in parts.iter().zip(&labels) {
            addr += gap;
            segments.push(Segment { word_addr: addr, bytes, label });
            addr += words_for(bytes.len() as u64, word_bytes as u64);
        }
        let mut text = Vec::new();
        let words = write_hex_segments(&mut text, word_bytes, &segments).unwrap();
        let dump = read_hex(std::str::from_utf8(&text).unwrap(), word_bytes as u32 * 8).unwrap();
        let mut covered = vec![false; dump.words()];
        for seg in &segments {
            for (k, word) in padded(seg.bytes, word_bytes).chunks(word_bytes).enumerate() {
                let i = seg.word_addr as usize + k;
                prop_assert_eq!(dump.word(i), word);
                prop_assert_eq!(dump.state[i], WordState::Written);
                covered[i] = true;
            }
        }
        prop_assert_eq!(covered.iter().filter(|c| **c).count() as u64, words);
        prop_assert!(dump.state.last().is_none_or(|s| *s == WordState::Written));
        for (i, _) in covered.iter().enumerate().filter(|(_, c)| !**c) {
            prop_assert_eq!(dump.state[i], WordState::Absent);
            prop_assert!(dump.word(i).iter().all(|b| *b == 0));
        }
    }
}

#[test]
fn a_short_hex_text_cannot_reach_far_addresses() {
    // Ten bytes naming word 2^26 of 8-bit words would span 64 MiB + 1 byte densely.
    let e = read_hex("@4000000 1", 8).unwrap_err().to_string();
    assert!(e.contains("beyond the 67108864-byte limit"), "{e}");
    // Within the sparse allowance, a far address is fine and the gap is absent words.
    let d = read_hex("@80000 1", 512).unwrap();
    assert_eq!(d.words(), 0x80001);
    assert_eq!(d.state[0], WordState::Absent);
    assert_eq!(d.state[0x80000], WordState::Written);
    // A longer text may reach further: 8 bytes of dense form per byte of text.
    assert_eq!(dense_limit(16 << 20), 128 << 20);
    assert_eq!(dense_limit(1 << 40), MAX_DUMP_BYTES);
}
