//! `weir check` on dumps broken on purpose: each diagnosis class from a dump broken in
//! exactly that way, no diagnosis on clean dumps or random damage, aiming (one dump under
//! any name, subsets, run directories), golden files verified, typed `.npy` dumps, trailing
//! data, unordered missing/surplus records, and `memory_map.vh` under Verilator's lint.
//!
//! The job is `data/jobs/scan-testbench.toml`: u32 row ids (global), 512-bit words (16 ids
//! per word), partition 3 has 36 records in 3 words starting at row 1408 on channel 1.

mod util;

use std::path::{Path, PathBuf};

use serde_json::Value;
use util::{weir, TempDir};

const TB_JOB: &str = "data/jobs/scan-testbench.toml";
const P3: &str = "scan.p3.out";
const P3_ROW_START: u32 = 1408;
const WORD: usize = 64;

fn run(t: &TempDir, job: &str) -> PathBuf {
    let gold = t.join("gold");
    let o = weir(&["run", job, "--out", gold.to_str().unwrap()]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    gold
}

/// Golden bytes from the `.bin` image, or from the `.hex` one when the job writes only hex.
fn golden(gold: &Path, stem: &str) -> Vec<u8> {
    let bin = gold.join(format!("golden/{stem}.bin"));
    if bin.is_file() {
        return std::fs::read(bin).unwrap();
    }
    let text = std::fs::read_to_string(gold.join(format!("golden/{stem}.hex"))).unwrap();
    text.lines()
        .map(|l| l.split("//").next().unwrap().trim())
        .filter(|l| !l.is_empty() && !l.starts_with('@'))
        .flat_map(|l| {
            let mut b: Vec<u8> = (0..l.len() / 2)
                .map(|i| u8::from_str_radix(&l[2 * i..2 * i + 2], 16).unwrap())
                .collect();
            b.reverse();
            b
        })
        .collect()
}

fn ids(bytes: &[u8], n: usize) -> Vec<u32> {
    bytes[..n * 4]
        .chunks(4)
        .map(|c| u32::from_le_bytes(c.try_into().unwrap()))
        .collect()
}

/// Ids packed into `words` zero-padded words.
fn words_of(ids: &[u32], words: usize) -> Vec<u8> {
    let mut b: Vec<u8> = ids.iter().flat_map(|v| v.to_le_bytes()).collect();
    b.resize(words * WORD, 0);
    b
}

/// Words as `$readmemh` lines, most significant digit first.
fn hex_lines(bytes: &[u8], word: usize) -> String {
    bytes
        .chunks(word)
        .map(|w| {
            w.iter()
                .rev()
                .map(|b| format!("{b:02x}"))
                .collect::<String>()
                + "\n"
        })
        .collect()
}

fn check(gold: &Path, dump: &Path, extra: &[&str]) -> (i32, Value, String) {
    let mut args = vec!["check", gold.to_str().unwrap(), dump.to_str().unwrap()];
    args.extend_from_slice(extra);
    let text = weir(&args);
    args.push("--json");
    let j = weir(&args);
    assert_eq!(j.code, text.code, "{}", j.stderr);
    let v = serde_json::from_str(&j.stdout).unwrap_or(Value::Null);
    (text.code, v, text.stdout + &text.stderr)
}

/// The diagnosis of the one output checked: (class, line).
fn diagnosis(t: &TempDir, gold: &Path, name: &str, dump: &[u8]) -> Option<(String, String)> {
    let p = t.join(name);
    std::fs::write(&p, dump).unwrap();
    let (code, v, text) = check(gold, &p, &["--output", P3]);
    assert_eq!(code, 1, "a broken dump is a mismatch: {text}");
    let d = &v["outputs"][0]["diagnosis"];
    assert!(
        d.is_null() || text.contains(d["line"].as_str().unwrap()),
        "the text report carries the diagnosis: {text}"
    );
    (!d.is_null()).then(|| {
        (
            d["class"].as_str().unwrap().to_string(),
            d["line"].as_str().unwrap().to_string(),
        )
    })
}

fn p3(gold: &Path) -> Vec<u32> {
    ids(&golden(gold, P3), 36)
}

fn expect(got: Option<(String, String)>, class: &str, words: &[&str]) {
    let (c, line) = got.unwrap_or_else(|| panic!("no diagnosis, expected {class}"));
    assert_eq!(c, class, "{line}");
    for w in words {
        assert!(line.contains(w), "`{w}` not in: {line}");
    }
}

#[test]
fn a_dropped_or_an_extra_record_is_a_shift_after_its_index() {
    let t = TempDir::new("check-shift");
    let gold = run(&t, TB_JOB);
    let mut v = p3(&gold);
    v.remove(5);
    expect(
        diagnosis(&t, &gold, "a.bin", &words_of(&v, 3)),
        "shifted",
        &["after index 5", "1 golden record(s) from 5 on are missing"],
    );
    let mut v = p3(&gold);
    v.insert(7, 0x7777);
    v.truncate(36);
    expect(
        diagnosis(&t, &gold, "b.bin", &words_of(&v, 3)),
        "shifted",
        &["after index 7", "1 extra record(s)", "0x00007777"],
    );
}

#[test]
fn local_row_ids_are_an_offset_of_the_row_start() {
    let t = TempDir::new("check-offset");
    let gold = run(&t, TB_JOB);
    let v: Vec<u32> = p3(&gold).iter().map(|x| x - P3_ROW_START).collect();
    expect(
        diagnosis(&t, &gold, "a.bin", &words_of(&v, 3)),
        "offset",
        &[
            "all 36 differing records",
            "- 0x580",
            "P3_ROW_START (1408)",
            "local row ids",
        ],
    );
    // Any other constant is named as a constant, not as a row start.
    let v: Vec<u32> = p3(&gold).iter().map(|x| x + 3).collect();
    expect(
        diagnosis(&t, &gold, "b.bin", &words_of(&v, 3)),
        "offset",
        &["+ 0x3"],
    );
}

#[test]
fn swapped_bytes_and_reversed_words_are_named() {
    let t = TempDir::new("check-order");
    let gold = run(&t, TB_JOB);
    let v: Vec<u32> = p3(&gold).iter().map(|x| x.swap_bytes()).collect();
    expect(
        diagnosis(&t, &gold, "a.bin", &words_of(&v, 3)),
        "byte_order",
        &["within each 4-byte element", "all 3 differing words"],
    );
    let g = golden(&gold, P3);
    let swapped: Vec<u8> = g
        .chunks(WORD)
        .flat_map(|w| w.iter().rev().copied())
        .collect();
    // Each u32 lane reversed too, so only the whole-word reading explains it.
    expect(
        diagnosis(&t, &gold, "b.bin", &swapped),
        "byte_order",
        &["within each 64-byte word"],
    );
    let rev: Vec<u8> = g.chunks(WORD).rev().flatten().copied().collect();
    expect(
        diagnosis(&t, &gold, "c.bin", &rev),
        "word_order",
        &["word order reversed", "all 3 words"],
    );
}

#[test]
fn a_bit_stuck_in_one_lane_is_found() {
    let t = TempDir::new("check-bit");
    let gold = run(&t, TB_JOB);
    let mut v = p3(&gold);
    // Lane 1 of every word: word bit 32 + 20 = 52 (ids < 2^20, so the bit is 0 in golden).
    for r in [1, 17, 33] {
        v[r] |= 1 << 20;
    }
    expect(
        diagnosis(&t, &gold, "a.bin", &words_of(&v, 3)),
        "bit",
        &[
            "bit 52 of the word (byte 6, bit 4) is stuck at 1",
            "all 3 differing words",
        ],
    );
    let mut v = p3(&gold);
    v[1] ^= 1 << 3;
    v[17] ^= 1 << 3;
    let line = diagnosis(&t, &gold, "b.bin", &words_of(&v, 3));
    expect(line, "bit", &["bit 35"]);
}

#[test]
fn narrow_lines_and_absolute_addresses_are_recognised() {
    let t = TempDir::new("check-shape");
    let gold = run(&t, TB_JOB);
    let g = golden(&gold, P3);
    // One 32-bit id per line: each is zero-extended to a 512-bit word.
    let narrow = hex_lines(&g[..36 * 4], 4);
    expect(
        diagnosis(&t, &gold, "a.hex", narrow.as_bytes()),
        "width",
        &["32 bits wide, not 512", "all 36 records match"],
    );
    // P3_OUT_BASE = 0x16c0 bytes = word 0x5b on channel 1.
    let abs = format!("@5b\n{}", hex_lines(&g, WORD));
    expect(
        diagnosis(&t, &gold, "b.hex", abs.as_bytes()),
        "absolute_addresses",
        &["@5b", "rebased to the region, all 36 records match"],
    );
}

#[test]
fn stale_words_and_truncation_are_told_apart() {
    let t = TempDir::new("check-stale");
    let gold = run(&t, TB_JOB);
    let mut g = golden(&gold, P3);
    let p0 = golden(&gold, "scan.p0.out");
    g[WORD..3 * WORD].copy_from_slice(&p0[WORD..3 * WORD]);
    expect(
        diagnosis(&t, &gold, "a.bin", &g),
        "stale",
        &[
            "all 2 differing words",
            "word 1 (channel word 0x5c)",
            "scan.p0.out",
        ],
    );
    let g = golden(&gold, P3);
    let half = hex_lines(&g[..WORD], WORD) + &"x".repeat(128) + "\n";
    expect(
        diagnosis(&t, &gold, "b.hex", half.as_bytes()),
        "truncated",
        &[
            "word 1 (channel word 0x5c)",
            "2 of 3 words missing (1 unwritten or x, 1 past the end",
        ],
    );
}

/// A small portable generator for random damage (SplitMix64, common practice).
fn splitmix(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

#[test]
fn clean_dumps_match_and_random_damage_gets_no_diagnosis() {
    let t = TempDir::new("check-clean");
    let gold = run(&t, TB_JOB);
    let (code, v, text) = check(&gold, &gold.join("golden").join(format!("{P3}.hex")), &[]);
    assert_eq!(code, 0, "{text}");
    assert!(v["outputs"][0]["diagnosis"].is_null());
    assert!(v["outputs"][0]["notes"].as_array().unwrap().is_empty());
    for seed in 1..=8u64 {
        let mut s = seed;
        let mut g = golden(&gold, P3);
        // Random bytes in three records of three different lanes.
        for k in 0..3 {
            let r = (k * 12 + (splitmix(&mut s) % 12) as usize) % 36;
            g[r * 4 + (splitmix(&mut s) % 2) as usize] ^= (splitmix(&mut s) % 255 + 1) as u8;
        }
        let got = diagnosis(&t, &gold, &format!("r{seed}.bin"), &g);
        assert_eq!(got, None, "seed {seed}");
    }
}

#[test]
fn the_device_side_is_aimed_by_name_subset_or_run_directory() {
    let t = TempDir::new("check-aim");
    let gold = run(&t, TB_JOB);
    // One dump under its own name, named with --output.
    let mine = t.join("engine3_dump.hex");
    std::fs::copy(gold.join(format!("golden/{P3}.hex")), &mine).unwrap();
    let (code, _, text) = check(&gold, &mine, &[]);
    assert_eq!(code, 2, "{text}");
    assert!(text.contains("--output"), "{text}");
    let (code, v, text) = check(&gold, &mine, &["--output", P3]);
    assert_eq!(code, 0, "{text}");
    assert_eq!(v["outputs"][0]["device_file"], mine.to_str().unwrap());
    // A directory holding a subset: the others are not checked, never matching.
    let dev = t.join("dev");
    std::fs::create_dir_all(&dev).unwrap();
    std::fs::copy(&mine, dev.join(format!("{P3}.hex"))).unwrap();
    let (code, v, text) = check(&gold, &dev, &[]);
    assert_eq!(code, 0, "{text}");
    assert!(
        text.contains("all 1 checked outputs match; 7 not checked"),
        "{text}"
    );
    let verdicts: Vec<&str> = v["outputs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|o| o["verdict"].as_str().unwrap())
        .collect();
    assert_eq!(verdicts.iter().filter(|v| **v == "match").count(), 1);
    assert_eq!(verdicts.iter().filter(|v| **v == "not_checked").count(), 7);
    // The summary table names engine and channel of the output.
    assert!(
        text.lines()
            .any(|l| l.split_whitespace().collect::<Vec<_>>()
                == ["scan.p3.out", "3", "1", "36", "0", "match"]),
        "{text}"
    );
    // Two formats of one dump that disagree are an error.
    let mut g = golden(&gold, P3);
    g[0] ^= 1;
    std::fs::write(dev.join(format!("{P3}.bin")), &g).unwrap();
    let (code, _, text) = check(&gold, &dev, &[]);
    assert_eq!(code, 2, "{text}");
    assert!(text.contains("disagree from word 0"), "{text}");
    // Another run directory (its golden/), and GOLDEN given as golden/.
    let (code, v, text) = check(&gold.join("golden"), &gold, &[]);
    assert_eq!(code, 0, "{text}");
    assert_eq!(v["outputs"].as_array().unwrap().len(), 8);
    assert!(text.contains("all 8 outputs match"), "{text}");
}

#[test]
fn changed_golden_files_are_their_own_error() {
    for file in ["bin", "hex"] {
        let t = TempDir::new(&format!("check-tamper-{file}"));
        let gold = run(&t, TB_JOB);
        let dump = t.join("d.bin");
        std::fs::copy(gold.join(format!("golden/{P3}.bin")), &dump).unwrap();
        let p = gold.join(format!("golden/{P3}.{file}"));
        let mut b = std::fs::read(&p).unwrap();
        b[3] ^= 0x01;
        std::fs::write(&p, b).unwrap();
        let (code, _, text) = check(&gold, &dump, &["--output", P3]);
        assert_eq!(code, 2, "{text}");
        assert!(text.contains("golden file changed since the run"), "{text}");
        assert!(text.contains(&format!("{P3}.{file}")), "{text}");
    }
}

#[test]
fn typed_npy_dumps_and_trailing_data() {
    let t = TempDir::new("check-typed");
    let gold = run(&t, TB_JOB);
    let typed = gold.join(format!("arrays/{P3}.npy"));
    let (code, _, text) = check(&gold, &typed, &[]);
    assert_eq!(
        code, 0,
        "the typed array of the golden ids is a valid dump: {text}"
    );
    // An id right after the last record, inside the last word.
    let mut v = p3(&gold);
    v.push(0x55);
    let p = t.join("trail.bin");
    std::fs::write(&p, words_of(&v, 3)).unwrap();
    let (code, v, text) = check(&gold, &p, &["--output", P3]);
    assert_eq!(code, 0, "{text}");
    let note = v["outputs"][0]["notes"][0].as_str().unwrap();
    assert!(
        note.contains("data after the last record: bytes 144..145"),
        "{note}"
    );
    let (code, _, text) = check(&gold, &p, &["--output", P3, "--strict"]);
    assert_eq!(code, 1, "{text}");
}

#[test]
fn bitmap_bits_past_the_last_row_are_noted() {
    let t = TempDir::new("check-bitmap");
    let gold = run(&t, "data/jobs/registry-bitmap.toml");
    let m: Value =
        serde_json::from_str(&std::fs::read_to_string(gold.join("manifest.json")).unwrap())
            .unwrap();
    let f = m["files"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| {
            f["role"] == "golden" && f["column"] == "out" && f["records"].as_u64().unwrap() % 8 != 0
        })
        .expect("the job has a bitmap that ends inside a byte");
    let rows = f["records"].as_u64().unwrap();
    let path = f["path"].as_str().unwrap();
    let stem = path
        .trim_start_matches("golden/")
        .rsplit_once('.')
        .unwrap()
        .0
        .to_string();
    let mut b = golden(&gold, &stem);
    assert_ne!(rows % 8, 0, "the job's bitmap ends inside a byte");
    b[(rows / 8) as usize] |= 0x80;
    let p = t.join("bits.bin");
    std::fs::write(&p, b).unwrap();
    let (code, v, text) = check(&gold, &p, &["--output", &stem]);
    assert_eq!(code, 0, "{text}");
    let note = v["outputs"][0]["notes"][0].as_str().unwrap();
    assert!(note.contains("bitmap bits past the last row"), "{note}");
    assert_eq!(check(&gold, &p, &["--output", &stem, "--strict"]).0, 1);
}

#[test]
fn projected_records_show_as_fields_with_channel_addresses() {
    let t = TempDir::new("check-fields");
    let gold = run(&t, "data/jobs/readings-project.toml");
    let stem = "scan.p1.out";
    let mut g = golden(&gold, stem);
    g[0] ^= 0xff;
    let p = t.join("d.bin");
    std::fs::write(&p, g).unwrap();
    let (code, v, text) = check(&gold, &p, &["--output", stem]);
    assert_eq!(code, 1, "{text}");
    let m = &v["outputs"][0]["first_mismatches"][0];
    let e = m["expected"].as_str().unwrap();
    assert!(
        e.starts_with("turbine_id=0x") && e.contains(" ts=0x") && e.contains(" power=0x"),
        "{e}"
    );
    assert!(m["channel_word"].as_u64().is_some());
    assert!(text.contains("channel word 0x"), "{text}");
}

#[test]
fn unordered_lists_missing_and_surplus_records_in_record_order() {
    let t = TempDir::new("check-unordered");
    let gold = run(&t, TB_JOB);
    let mut v = p3(&gold);
    v.reverse();
    // Golden record 35 (now at 0) written twice: over record 4's place (golden record 31).
    v[4] = v[0];
    let p = t.join("d.bin");
    std::fs::write(&p, words_of(&v, 3)).unwrap();
    let (code, j, text) = check(&gold, &p, &["--output", P3, "--unordered"]);
    assert_eq!(code, 1, "{text}");
    let o = &j["outputs"][0];
    assert_eq!(
        (o["differing"].as_u64(), o["surplus"].as_u64()),
        (Some(1), Some(1))
    );
    assert_eq!(o["first_mismatches"][0]["record"], 31);
    assert_eq!(o["first_surplus"][0]["record"], 4);
    assert!(text.contains("1 missing, 1 surplus"), "{text}");
}

#[test]
fn memory_map_is_clean_under_verilator_lint() {
    if !util::have("verilator") {
        return;
    }
    // Verilator's -Wall lint is the outside reference for the include file's hygiene.
    let t = TempDir::new("check-lint");
    let gold = run(&t, TB_JOB);
    std::fs::copy(gold.join("memory_map.vh"), t.join("memory_map.vh")).unwrap();
    t.write(
        "top.v",
        "module top;\n`include \"memory_map.vh\"\nendmodule\n",
    );
    let o = std::process::Command::new("verilator")
        .args(["--lint-only", "-Wall", "top.v"])
        .current_dir(&t.0)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let vh = std::fs::read_to_string(t.join("memory_map.vh")).unwrap();
    for p in [
        "P3_OUT_GOLDEN_RECORDS = 64'd36;",
        "P3_OUT_GOLDEN_WORDS = 64'd3;",
        "CH1_EXTENT_WORDS",
    ] {
        assert!(vh.contains(p), "{p} missing");
    }
}
