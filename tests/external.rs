//! Outside references for the file forms: NumPy loads weir's typed `.npy` columns and word
//! images, and Icarus Verilog loads a per-channel `@address` hex image and dumps it back.
//!
//! A missing program skips its test with a note, unless `WEIR_REQUIRE_EXTERNAL=1` asks for
//! every reference to be present.

use std::path::{Path, PathBuf};
use std::process::Command;

use weir::image::{read_hex, write_hex_segments, write_image, ImageFormat, Segment, WordState};
use weir::table::{column_bytes, write_npy_column, Column, ColumnData, ElemType};

/// Whether the check can run: false (after printing why) when `what` is missing, a panic
/// instead when `WEIR_REQUIRE_EXTERNAL=1`.
fn available(what: &str, present: bool) -> bool {
    if !present {
        let required = std::env::var("WEIR_REQUIRE_EXTERNAL").is_ok_and(|v| v == "1");
        assert!(!required, "{what} not found, but WEIR_REQUIRE_EXTERNAL=1");
        println!("skipped: {what} not found");
    }
    present
}

/// Whether `program` is an executable file on `PATH` (see [`available`] for a missing one).
fn require(program: &str) -> bool {
    let found = std::env::var_os("PATH")
        .is_some_and(|paths| std::env::split_paths(&paths).any(|dir| dir.join(program).is_file()));
    available(program, found)
}

/// A directory of its own under the system temp dir (process id and test name), removed
/// when dropped.
struct Scratch(PathBuf);

impl Scratch {
    fn new(test: &str) -> Scratch {
        let dir = std::env::temp_dir().join(format!("weir-external-{}-{test}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        Scratch(dir)
    }

    fn path(&self) -> &Path {
        &self.0
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// Runs `program args` in `dir`, asserting success; returns its standard output.
fn run(dir: &Path, program: &str, args: &[&str]) -> String {
    let out = Command::new(program)
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap_or_else(|e| panic!("running {program}: {e}"));
    assert!(
        out.status.success(),
        "{program} {args:?} failed ({}):\n{}\n{}",
        out.status,
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// One column of every whole-byte type, holding its extremes, zero and a spread of values;
/// the float columns also NaN, both zeros, both infinities and the smallest subnormal.
fn typed_columns() -> Vec<Column> {
    let n = 37u32;
    let col = |ty: ElemType, data| Column::new(&format!("c_{ty}"), ty, data).unwrap();
    macro_rules! ints {
        ($t:ty) => {{
            let mut v: Vec<$t> = vec![<$t>::MIN, <$t>::MAX, 0, 1, <$t>::MAX - 1];
            v.extend((0..n).map(|i| (i as $t).wrapping_mul(97).wrapping_sub(13)));
            v
        }};
    }
    macro_rules! floats {
        ($t:ty) => {{
            let mut v: Vec<$t> = vec![
                <$t>::NAN,
                -0.0,
                0.0,
                <$t>::INFINITY,
                <$t>::NEG_INFINITY,
                <$t>::MAX,
                <$t>::MIN,
                <$t>::MIN_POSITIVE,
                <$t>::from_bits(1),
                0.1,
                -1.5,
            ];
            v.extend((0..n).map(|i| (i as $t - 17.0) * 0.37));
            v
        }};
    }
    vec![
        col(ElemType::U8, ColumnData::U8(ints!(u8))),
        col(ElemType::U16, ColumnData::U16(ints!(u16))),
        col(ElemType::U32, ColumnData::U32(ints!(u32))),
        col(ElemType::U64, ColumnData::U64(ints!(u64))),
        col(ElemType::I8, ColumnData::I8(ints!(i8))),
        col(ElemType::I16, ColumnData::I16(ints!(i16))),
        col(ElemType::I32, ColumnData::I32(ints!(i32))),
        col(ElemType::I64, ColumnData::I64(ints!(i64))),
        col(ElemType::F32, ColumnData::F32(floats!(f32))),
        col(ElemType::F64, ColumnData::F64(floats!(f64))),
        col(ElemType::U16, ColumnData::U16(Vec::new())),
    ]
}

/// What numpy should report for a column: integers as JSON numbers, floats as the bit
/// pattern of the value widened to a Python float (`None` for NaN, whose payload numpy
/// need not keep when widening).
fn expected_values(col: &Column) -> Vec<serde_json::Value> {
    use serde_json::Value as J;
    let float = |x: f64| {
        if x.is_nan() {
            J::Null
        } else {
            J::from(x.to_bits())
        }
    };
    match &col.data {
        ColumnData::U8(v) => v.iter().map(|&x| J::from(x)).collect(),
        ColumnData::U16(v) => v.iter().map(|&x| J::from(x)).collect(),
        ColumnData::U32(v) => v.iter().map(|&x| J::from(x)).collect(),
        ColumnData::U64(v) => v.iter().map(|&x| J::from(x)).collect(),
        ColumnData::I8(v) => v.iter().map(|&x| J::from(x)).collect(),
        ColumnData::I16(v) => v.iter().map(|&x| J::from(x)).collect(),
        ColumnData::I32(v) => v.iter().map(|&x| J::from(x)).collect(),
        ColumnData::I64(v) => v.iter().map(|&x| J::from(x)).collect(),
        ColumnData::F32(v) => v.iter().map(|&x| float(f64::from(x))).collect(),
        ColumnData::F64(v) => v.iter().map(|&x| float(x)).collect(),
    }
}

/// Loads each file named on the command line with numpy.load and prints, as one JSON list,
/// its dtype, shape and values (floats as the bits of the Python float, NaN as null).
const NUMPY_SCRIPT: &str = r#"
import json, struct, sys
import numpy
def value(x):
    if isinstance(x, float):
        return None if x != x else struct.unpack('<Q', struct.pack('<d', x))[0]
    return x
out = []
for p in sys.argv[1:]:
    a = numpy.load(p)
    flat = a.reshape(-1).tolist()
    out.append({'descr': a.dtype.str, 'shape': list(a.shape), 'values': [value(x) for x in flat]})
print(json.dumps(out))
"#;

#[test]
fn numpy_loads_typed_columns_and_word_images() {
    if !require("python3") {
        return;
    }
    let has_numpy = Command::new("python3")
        .args(["-c", "import numpy"])
        .output()
        .is_ok_and(|o| o.status.success());
    if !available("numpy", has_numpy) {
        return;
    }
    let dir = Scratch::new("numpy");
    let columns = typed_columns();
    let mut files = Vec::new();
    let mut expected = Vec::new();
    for (i, col) in columns.iter().enumerate() {
        let name = format!("col{i}_{}.npy", col.ty);
        let mut file = Vec::new();
        write_npy_column(&mut file, col).unwrap();
        std::fs::write(dir.path().join(&name), file).unwrap();
        files.push(name);
        expected.push(serde_json::json!({
            "descr": col.ty.npy_descr(),
            "shape": [col.len()],
            "values": expected_values(col),
        }));
    }
    // Word images of the i16 and f64 columns' bytes: 64-bit words, 72-bit words (not a
    // power of two) and the widest, 4096-bit words; the last row is zero-padded.
    for (c, word_bytes) in [(5usize, 8usize), (9, 9), (9, 512), (2, 3)] {
        let col = &columns[c];
        let mut bytes = Vec::new();
        column_bytes(col, 0..col.len(), &mut bytes);
        let words = bytes.len().div_ceil(word_bytes);
        let mut file = Vec::new();
        write_image(&mut file, ImageFormat::Npy, word_bytes, &bytes).unwrap();
        let name = format!("image_{c}_{word_bytes}.npy");
        std::fs::write(dir.path().join(&name), file).unwrap();
        files.push(name);
        bytes.resize(words * word_bytes, 0);
        expected.push(serde_json::json!({
            "descr": "|u1",
            "shape": [words, word_bytes],
            "values": bytes,
        }));
    }
    let mut args = vec!["-c", NUMPY_SCRIPT];
    args.extend(files.iter().map(String::as_str));
    let out = run(dir.path(), "python3", &args);
    let got: Vec<serde_json::Value> = serde_json::from_str(out.trim()).unwrap();
    assert_eq!(got.len(), expected.len());
    for ((file, g), e) in files.iter().zip(&got).zip(&expected) {
        // Reference: numpy.load, NumPy's own reader of its format (dtype, shape, values).
        assert_eq!(g, e, "{file}");
    }
}

/// Word `i` of an image as `%h` prints it: most-significant byte first, two digits a byte.
fn hex_word(word: &[u8]) -> String {
    word.iter().rev().map(|b| format!("{b:02x}")).collect()
}

#[test]
fn icarus_loads_a_per_channel_image_at_its_addresses_and_dumps_it_back() {
    if !require("iverilog") || !require("vvp") {
        return;
    }
    const WORD_BYTES: usize = 16; // 128-bit words
    const DEPTH: usize = 64;
    let dir = Scratch::new("icarus");
    let data = |n: usize, salt: u8| -> Vec<u8> {
        (0..n)
            .map(|i| (i as u8).wrapping_mul(29).wrapping_add(salt) ^ 0x5a)
            .collect()
    };
    // Words 0..3, a two-word gap (3 and 4), words 5..9, then 40..42; the last word of each
    // segment is partial and zero-padded.
    let (a, b, c) = (data(40, 1), data(70, 2), data(20, 3));
    let segments = [
        Segment {
            word_addr: 0,
            bytes: &a,
            label: "scan.p0.v",
        },
        Segment {
            word_addr: 5,
            bytes: &b,
            label: "scan.p0.w",
        },
        Segment {
            word_addr: 40,
            bytes: &c,
            label: "scan.p0.out",
        },
    ];
    let mut image = Vec::new();
    assert_eq!(
        write_hex_segments(&mut image, WORD_BYTES, &segments).unwrap(),
        3 + 5 + 2
    );
    std::fs::write(dir.path().join("ch0.hex"), &image).unwrap();

    // The memory as weir means it: Some(word bytes) where a segment puts one, None elsewhere.
    let mut memory: Vec<Option<Vec<u8>>> = vec![None; DEPTH];
    for seg in &segments {
        for (k, chunk) in seg.bytes.chunks(WORD_BYTES).enumerate() {
            let mut word = chunk.to_vec();
            word.resize(WORD_BYTES, 0);
            memory[seg.word_addr as usize + k] = Some(word);
        }
    }
    let shown = [0usize, 2, 3, 4, 5, 9, 10, 39, 40, 41, 42, 63];
    let displays: String = shown
        .iter()
        .map(|i| format!("    $display(\"word {i} %h\", mem[{i}]);\n"))
        .collect();
    let bench = format!(
        "module tb;\n  reg [127:0] mem [0:{}];\n  initial begin\n    $readmemh(\"ch0.hex\", mem);\n{displays}    $writememh(\"dump.hex\", mem);\n    $finish;\n  end\nendmodule\n",
        DEPTH - 1
    );
    std::fs::write(dir.path().join("tb.v"), bench).unwrap();
    run(dir.path(), "iverilog", &["-g2012", "-o", "tb.vvp", "tb.v"]);
    let out = run(dir.path(), "vvp", &["-n", "tb.vvp"]);

    let printed: Vec<(usize, String)> = out
        .lines()
        .filter_map(|l| l.strip_prefix("word "))
        .map(|l| {
            let (i, h) = l.split_once(' ').unwrap();
            (i.parse().unwrap(), h.to_string())
        })
        .collect();
    assert_eq!(
        printed.iter().map(|p| p.0).collect::<Vec<_>>(),
        shown,
        "{out}"
    );
    for (i, text) in &printed {
        // Reference: Icarus Verilog's $readmemh (IEEE 1364-2005 §17.2.9; section number
        // recalled from memory): `@addr` moves the load address, so each segment lands at
        // its word address and words no segment reaches keep their initial x.
        let want = match &memory[*i] {
            Some(word) => hex_word(word),
            None => "x".repeat(2 * WORD_BYTES),
        };
        assert_eq!(text, &want, "word {i}");
    }

    let dump = read_hex(
        &std::fs::read_to_string(dir.path().join("dump.hex")).unwrap(),
        128,
    )
    .unwrap();
    // Reference: Icarus Verilog's $writememh (IEEE 1800-2017 §21.4; section number recalled
    // from memory) writes every word of the memory: loaded words come back as weir wrote
    // them, the rest are all x, which the reader keeps apart as unknown.
    assert_eq!(dump.words(), DEPTH);
    for (i, want) in memory.iter().enumerate() {
        match want {
            Some(word) => {
                assert_eq!(dump.state[i], WordState::Written, "word {i}");
                assert_eq!(dump.word(i), &word[..], "word {i}");
            }
            None => assert_eq!(dump.state[i], WordState::Unknown, "word {i}"),
        }
    }
}
