//! Behaviour of the binary: run, inspect, check, gen, and every bad input (exit code 2,
//! a one-line error naming what is wrong, nothing written).

mod util;

use util::{tree, weir, weir_in, TempDir};

const TB_JOB: &str = "data/jobs/scan-testbench.toml";

fn small_job(extra_layout: &str, predicate: &str) -> String {
    format!(
        "name = \"t\"\n[input]\ntable = \"t\"\nrows = 3000\nseed = 5\n\
         [[input.columns]]\nname = \"v\"\ntype = \"u32\"\ndist = \"select\"\nselectivity = 0.1\nlo = 100\nhi = 200\ncorners = true\n\
         [[input.columns]]\nname = \"w\"\ntype = \"i16\"\ndist = \"uniform\"\nmin = -50\nmax = 50\n\
         [layout]\npartitions = 3\nchannels = 2\n{extra_layout}\n\
         [kernel]\nname = \"scan\"\npredicate = \"{predicate}\"\n"
    )
}

/// Asserts a bad-input failure: exit 2, one error line containing `needle`, and `out`
/// not created.
fn assert_bad(o: &util::Output, needle: &str, out: &std::path::Path) {
    assert_eq!(o.code, 2, "stdout: {}\nstderr: {}", o.stdout, o.stderr);
    let first = o.stderr.lines().next().unwrap_or("");
    assert!(first.starts_with("weir: error: "), "{}", o.stderr);
    assert!(
        o.stderr.contains(needle),
        "expected `{needle}` in: {}",
        o.stderr
    );
    assert!(!o.stderr.contains("panicked"), "{}", o.stderr);
    assert!(!out.exists(), "{} was created", out.display());
}

#[test]
fn run_writes_a_complete_directory_that_inspect_verifies() {
    let t = TempDir::new("run-inspect");
    let out = t.join("out");
    let o = weir(&["run", TB_JOB, "--out", out.to_str().unwrap()]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout
            .contains("input: column readings.v: requested selectivity 5.0000%"),
        "{}",
        o.stdout
    );
    for f in [
        "manifest.json",
        "timing.json",
        "ledger.json",
        "ledger.csv",
        "memory_map.vh",
        "memory_map.json",
        "input/ch0.hex",
        "input/readings.p0.v.hex",
        "golden/scan.p0.out.hex",
        "golden/scan.p3.count.bin",
        "arrays/scan.p1.out.npy",
    ] {
        assert!(out.join(f).is_file(), "missing {f}");
    }
    let i = weir(&["inspect", out.to_str().unwrap()]);
    assert_eq!(i.code, 0, "{}", i.stdout);
    assert!(i.stdout.contains("checksums match"), "{}", i.stdout);
    // A changed byte is found.
    let p = out.join("golden/scan.p0.out.hex");
    let mut text = std::fs::read_to_string(&p).unwrap();
    text.replace_range(0..1, if text.starts_with('0') { "1" } else { "0" });
    std::fs::write(&p, text).unwrap();
    let i = weir(&["inspect", out.to_str().unwrap()]);
    assert_eq!(i.code, 1, "{}", i.stdout);
    assert!(
        i.stdout.contains("CHANGED golden/scan.p0.out.hex"),
        "{}",
        i.stdout
    );
}

/// Two partitions of 2^21 rows: the scan cuts a partition into about eight chunks per
/// thread, so 1 and 2 threads split each partition differently (eight and sixteen chunks).
const SPLIT_JOB: &str = "[input]\nrows = 4194304\n[[input.columns]]\nname = \"v\"\ntype = \"u16\"\ndist = \"uniform\"\nmin = 0\nmax = 60000\n[[input.columns]]\nname = \"w\"\ntype = \"u8\"\ndist = \"uniform\"\nmin = 0\nmax = 200\n[layout]\nword_bits = 128\npartitions = 2\n[kernel]\nname = \"scan\"\npredicate = \"v < 300 and w > 9\"\noutput = \"project\"\nproject = [\"w\"]\n[output]\nformats = [\"bin\"]\nchannel_images = false\ntyped_npy = false\n";

#[test]
fn output_is_identical_for_any_thread_count_and_seeds_make_subdirectories() {
    let t = TempDir::new("threads");
    let job = t.write("split.toml", SPLIT_JOB);
    let (a, b) = (t.join("a"), t.join("b"));
    for (dir, n) in [(&a, "1"), (&b, "2")] {
        let o = weir(&[
            "run",
            job.to_str().unwrap(),
            "--out",
            dir.to_str().unwrap(),
            "--threads",
            n,
        ]);
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let strip = |v: Vec<(String, Vec<u8>)>| {
        v.into_iter()
            .filter(|(p, _)| p != "timing.json")
            .collect::<Vec<_>>()
    };
    let (ta, tb) = (strip(tree(&a)), strip(tree(&b)));
    assert_eq!(ta.len(), tb.len());
    for ((pa, da), (pb, db)) in ta.iter().zip(&tb) {
        assert_eq!(pa, pb);
        assert!(da == db, "{pa} differs between 1 and 2 threads");
    }
    let s = t.join("seeds");
    let o = weir(&[
        "run",
        TB_JOB,
        "--out",
        s.to_str().unwrap(),
        "--seeds",
        "3..5",
    ]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(s.join("seed-3/manifest.json").is_file() && s.join("seed-4/manifest.json").is_file());
    assert!(!s.join("seed-5").exists());
    let m3 = std::fs::read(s.join("seed-3/golden/scan.p0.out.bin")).unwrap();
    let m4 = std::fs::read(s.join("seed-4/golden/scan.p0.out.bin")).unwrap();
    assert_ne!(m3, m4, "different seeds gave the same golden output");
}

#[test]
fn refuses_a_non_empty_output_directory_without_force() {
    let t = TempDir::new("exists");
    let out = t.join("out");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(out.join("keep.txt"), "precious").unwrap();
    let o = weir(&["run", TB_JOB, "--out", out.to_str().unwrap()]);
    assert_eq!(o.code, 2);
    assert!(o.stderr.contains("--force"), "{}", o.stderr);
    assert_eq!(
        std::fs::read_to_string(out.join("keep.txt")).unwrap(),
        "precious"
    );
    // --force replaces only weir's own output: a directory without a manifest stays.
    let o = weir(&["run", TB_JOB, "--out", out.to_str().unwrap(), "--force"]);
    assert_eq!(o.code, 2, "{}", o.stdout);
    assert!(o.stderr.contains("no weir manifest"), "{}", o.stderr);
    assert!(out.join("keep.txt").exists());
    let own = t.join("own");
    for force in [false, true] {
        let mut args = vec!["run", TB_JOB, "--out", own.to_str().unwrap()];
        if force {
            args.push("--force");
        }
        let o = weir(&args);
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let o = weir(&["run", TB_JOB, "--out", own.to_str().unwrap()]);
    assert_eq!(
        o.code, 2,
        "an earlier output is not replaced without --force"
    );
}

#[test]
fn check_reports_matches_mismatches_and_ignored_words() {
    let t = TempDir::new("check");
    let gold = t.join("gold");
    assert_eq!(
        weir(&["run", TB_JOB, "--out", gold.to_str().unwrap()]).code,
        0
    );
    let dev = t.join("dev");
    std::fs::create_dir_all(&dev).unwrap();
    for p in 0..4 {
        let f = format!("scan.p{p}.out.hex");
        std::fs::copy(gold.join("golden").join(&f), dev.join(&f)).unwrap();
    }
    // Extra words past the golden output are ignored, and said to be.
    let mut extra = std::fs::read_to_string(dev.join("scan.p1.out.hex")).unwrap();
    extra.push_str(&format!("{}\n", "f".repeat(128)));
    std::fs::write(dev.join("scan.p1.out.hex"), extra).unwrap();
    let o = weir(&["check", gold.to_str().unwrap(), dev.to_str().unwrap()]);
    assert_eq!(o.code, 0, "{}{}", o.stdout, o.stderr);
    assert!(
        o.stdout.contains("1 words past the golden output ignored"),
        "{}",
        o.stdout
    );

    // Change the third row id of partition 0 (lane 2 of word 0): record 2, byte 8.
    let p0 = dev.join("scan.p0.out.hex");
    let text = std::fs::read_to_string(&p0).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let w = &mut lines[0];
    let lane2 = 128 - 8 * 3; // hex digits: lane 0 is the rightmost 8
    let old = u32::from_str_radix(&w[lane2..lane2 + 8], 16).unwrap();
    w.replace_range(lane2..lane2 + 8, &format!("{:08x}", old + 1));
    std::fs::write(&p0, lines.join("\n") + "\n").unwrap();
    let o = weir(&["check", gold.to_str().unwrap(), dev.to_str().unwrap()]);
    assert_eq!(o.code, 1, "{}", o.stdout);
    assert!(
        o.stdout.contains(&format!(
            "byte 8): expected 0x{old:08x}, found 0x{:08x}",
            old + 1
        )) && o.stdout.contains("record 2 (word 0, channel word 0x"),
        "{}",
        o.stdout
    );
    let j = weir(&[
        "check",
        gold.to_str().unwrap(),
        dev.to_str().unwrap(),
        "--json",
    ]);
    assert_eq!(j.code, 1);
    let v: serde_json::Value = serde_json::from_str(&j.stdout).unwrap();
    assert_eq!(v["matched"], false);
    assert_eq!(v["outputs"][0]["first_mismatches"][0]["record"], 2);

    // x digits and a truncated dump are mismatches, never read as zero.
    lines[0] = "x".repeat(128);
    std::fs::write(&p0, lines.join("\n") + "\n").unwrap();
    let o = weir(&["check", gold.to_str().unwrap(), p0.to_str().unwrap()]);
    assert_eq!(o.code, 1);
    assert!(o.stdout.contains("found x"), "{}", o.stdout);
    std::fs::write(&p0, "").unwrap();
    let o = weir(&["check", gold.to_str().unwrap(), p0.to_str().unwrap()]);
    assert_eq!(o.code, 1);
    assert!(
        o.stdout.contains("record 0 (word 0, channel word 0x")
            && o.stdout.contains("found missing"),
        "{}",
        o.stdout
    );
}

#[test]
fn unordered_check_accepts_a_permutation() {
    let t = TempDir::new("unordered");
    let gold = t.join("gold");
    assert_eq!(
        weir(&["run", TB_JOB, "--out", gold.to_str().unwrap()]).code,
        0
    );
    let bin = std::fs::read(gold.join("golden/scan.p3.out.bin")).unwrap();
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(gold.join("manifest.json")).unwrap())
            .unwrap();
    let count = m["files"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["path"] == "golden/scan.p3.out.bin")
        .unwrap()["records"]
        .as_u64()
        .unwrap() as usize;
    let mut ids: Vec<[u8; 4]> = bin[..count * 4]
        .chunks(4)
        .map(|c| c.try_into().unwrap())
        .collect();
    ids.reverse();
    let mut shuffled: Vec<u8> = ids.concat();
    shuffled.resize(bin.len(), 0);
    let dump = t.join("scan.p3.out.bin");
    std::fs::write(&dump, &shuffled).unwrap();
    let o = weir(&["check", gold.to_str().unwrap(), dump.to_str().unwrap()]);
    assert_eq!(o.code, 1, "a reversed output must not match in order");
    let o = weir(&[
        "check",
        gold.to_str().unwrap(),
        dump.to_str().unwrap(),
        "--unordered",
    ]);
    assert_eq!(o.code, 0, "{}", o.stdout);
}

#[test]
fn check_bad_input_is_exit_2() {
    let t = TempDir::new("check-bad");
    let gold = t.join("gold");
    assert_eq!(
        weir(&["run", TB_JOB, "--out", gold.to_str().unwrap()]).code,
        0
    );
    let wide = t.write("scan.p0.out.hex", &format!("{}\n", "1".repeat(129)));
    let o = weir(&["check", gold.to_str().unwrap(), wide.to_str().unwrap()]);
    assert_eq!(o.code, 2, "{}", o.stdout);
    assert!(
        o.stderr.contains("line 1") && o.stderr.contains("wider than a 512-bit word"),
        "{}",
        o.stderr
    );
    let short = t.join("scan.p0.out.bin");
    std::fs::write(&short, [0u8; 100]).unwrap();
    let o = weir(&["check", gold.to_str().unwrap(), short.to_str().unwrap()]);
    assert_eq!(o.code, 2);
    assert!(o.stderr.contains("100 bytes"), "{}", o.stderr);
    let o = weir(&[
        "check",
        gold.to_str().unwrap(),
        t.join("nothing-here").to_str().unwrap(),
    ]);
    assert_eq!(o.code, 2);
    let o = weir(&["check", t.0.to_str().unwrap(), wide.to_str().unwrap()]);
    assert_eq!(o.code, 2);
    assert!(o.stderr.contains("manifest.json"), "{}", o.stderr);
    let o = weir(&["check"]);
    assert_eq!(o.code, 2, "usage errors are exit 2");
}

#[test]
fn bad_jobs_fail_cleanly_and_write_nothing() {
    let t = TempDir::new("bad-jobs");
    let out = t.join("out");
    let cases: Vec<(&str, String, &str)> = vec![
        (
            "word-not-8",
            small_job("word_bits = 500", "v < 3"),
            "word width 500 bits",
        ),
        (
            "word-not-elem",
            small_job("word_bits = 24", "v < 3"),
            "not a multiple of the u32 element width",
        ),
        (
            "zero-parts",
            small_job("partitions = 0", "v < 3").replace("partitions = 3\n", ""),
            "layout.partitions = 0: must be within 1..=1024",
        ),
        (
            "zero-channel",
            small_job("channel_mib = 0", "v < 3"),
            "layout.channel_mib = 0: must be within 1..=1048576",
        ),
        (
            "too-big",
            small_job("channel_mib = 1", "v < 3").replace("rows = 3000", "rows = 3000000"),
            "does not fit channel 0",
        ),
        (
            "typo",
            small_job("word_bit = 64", "v < 3"),
            "unknown field `word_bit`",
        ),
        (
            "unknown-col",
            small_job("", "speed < 3"),
            "unknown column `speed`",
        ),
        ("syntax", small_job("", "v < < 3"), "column 5"),
        (
            "range",
            small_job("", "w > 40000"),
            "out of range for i16 column `w`",
        ),
        ("mismatch", small_job("", "v = 'abc'"), "column `v`"),
    ];
    for (name, text, needle) in cases {
        let job = t.write(&format!("{name}.toml"), &text);
        let o = weir(&["run", job.to_str().unwrap(), "--out", out.to_str().unwrap()]);
        assert_bad(&o, needle, &out);
        if name == "syntax" {
            // The caret sits under the offending token.
            assert!(o.stderr.contains("v < < 3\n    ^"), "{}", o.stderr);
        }
    }
}

#[test]
fn bad_input_files_fail_cleanly() {
    let t = TempDir::new("bad-files");
    let out = t.join("out");
    let csv_job = |file: &str| {
        format!("[input]\ntable = \"t\"\ncsv = \"{file}\"\n[kernel]\nname = \"scan\"\npredicate = \"a < 3\"\n")
    };
    let cases = [
        (
            "ragged.csv",
            "a:u8,b:u8\n1,2\n3\n",
            "ragged.csv, line 3: 1 fields, the header has 2",
        ),
        (
            "nonnum.csv",
            "a:u8,b:u8\n1,zz\n",
            "nonnum.csv, line 2: column `b`: `zz` is not a u8 number",
        ),
        (
            "range.csv",
            "a:u8,b:u8\n1,2\n300,1\n",
            "range.csv, line 3: column `a`: value 300 is out of range for u8",
        ),
    ];
    for (file, text, needle) in cases {
        t.write(file, text);
        let job = t.write(&format!("{file}.toml"), &csv_job(file));
        let o = weir(&["run", job.to_str().unwrap(), "--out", out.to_str().unwrap()]);
        assert_bad(&o, needle, &out);
    }
    // Column files: a truncated .npy and a .bin whose size is not a whole number of values.
    let col_job = |file: &str| {
        format!("[input]\ntable = \"t\"\n[[input.columns]]\nname = \"a\"\ntype = \"u32\"\nfile = \"{file}\"\n[kernel]\nname = \"scan\"\npredicate = \"a < 3\"\n")
    };
    let mut npy = Vec::new();
    weir::npy::write_npy(&mut npy, "<u4", &[10], &[7u8; 40]).unwrap();
    npy.truncate(npy.len() - 3);
    std::fs::write(t.join("short.npy"), &npy).unwrap();
    std::fs::write(t.join("odd.bin"), [1u8; 10]).unwrap();
    for (file, needle) in [
        ("short.npy", "short.npy: truncated"),
        (
            "odd.bin",
            "odd.bin: 10 bytes is not a whole number of u32 values",
        ),
    ] {
        let job = t.write(&format!("{file}.toml"), &col_job(file));
        let o = weir(&["run", job.to_str().unwrap(), "--out", out.to_str().unwrap()]);
        assert_bad(&o, needle, &out);
    }
}

#[test]
fn gen_scan_reports_requested_and_achieved_selectivity() {
    let t = TempDir::new("gen");
    let f = t.join("v.npy");
    let o = weir_in(
        &t.0,
        &[
            "gen",
            "scan",
            "--rows",
            "100000",
            "--selectivity",
            "0.02",
            "--out",
            "v.npy",
        ],
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(o.stdout.contains("requested 2.0000%"), "{}", o.stdout);
    let achieved: f64 = o
        .stdout
        .rsplit("achieved ")
        .next()
        .unwrap()
        .trim()
        .trim_end_matches('%')
        .parse()
        .unwrap();
    assert!((achieved - 2.0).abs() < 0.2, "{achieved}");
    let col = weir::table::read_npy_column(&f, "v", None).unwrap();
    assert_eq!(col.len(), 100_000);
    let o = weir_in(&t.0, &["gen", "scan", "--rows", "10", "--out", "v.npy"]);
    assert_eq!(o.code, 2, "an existing file needs --force");
}

#[test]
fn calibrate_and_bench_write_their_results() {
    let t = TempDir::new("bench");
    let cal = t.join("cal.json");
    let calibrate = || {
        weir(&[
            "calibrate",
            "--bytes",
            "8M",
            "--runs",
            "1",
            "--threads",
            "1",
            "--out",
            cal.to_str().unwrap(),
        ])
    };
    let o = calibrate();
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(o.stdout.contains("read GB/s"), "{}", o.stdout);
    let prefix = t.join("scan");
    let o = weir(&[
        "bench",
        "scan",
        "--rows",
        "200000",
        "--runs",
        "1",
        "--threads",
        "1",
        "--selectivity",
        "0.01,0.2",
        "--calibration",
        cal.to_str().unwrap(),
        "--out",
        prefix.to_str().unwrap(),
    ]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let csv = std::fs::read_to_string(t.join("scan.csv")).unwrap();
    assert_eq!(csv.lines().count(), 3, "{csv}");
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(t.join("scan.json")).unwrap()).unwrap();
    let points = v["points"].as_array().unwrap();
    // The generator aims at the requested selectivity; 200,000 rows keep it within 1 %.
    for (p, want) in points.iter().zip([0.01, 0.2]) {
        let got = p["matches"].as_f64().unwrap() / 200_000.0;
        assert!((got - want).abs() < 0.01, "{got} for {want}");
    }
    let svg = std::fs::read_to_string(t.join("scan.svg")).unwrap();
    assert!(
        svg.contains("<polyline") && svg.contains("read, 1 thread"),
        "{svg}"
    );
    // Results are never overwritten without --force.
    let o = calibrate();
    assert_eq!(o.code, 2);
}

#[test]
fn bench_sgd_engines_train_the_library_model_on_their_own_copies() {
    use weir::bench::sgd::{bench_data, bench_io, bench_params};
    use weir::kernels::sgd::{train_validated, Numeric};
    let t = TempDir::new("bench-sgd");
    let prefix = t.join("sgd");
    let o = weir(&[
        "bench",
        "sgd",
        "--dims",
        "8",
        "--batch",
        "4",
        "--rows",
        "512",
        "--runs",
        "1",
        "--threads",
        "1,2",
        "--out",
        prefix.to_str().unwrap(),
    ]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(t.join("sgd.json")).unwrap()).unwrap();
    let points = v["points"].as_array().unwrap();
    assert_eq!(points.len(), 2, "{v}");
    let params = bench_params(
        4,
        Numeric::F32 {
            lanes: 16,
            ftz: false,
        },
    );
    let want = train_validated(&bench_data(512, 8), &params, &bench_io(1)).unwrap()[0]
        .model
        .to_f64();
    for p in points {
        let got: Vec<f64> = p["model"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        assert_eq!(got, want, "{} threads", p["threads"]);
    }
}

#[test]
fn negative_numbers_are_values_of_gen_flags() {
    let t = TempDir::new("gen-negative");
    let out = t.join("v.npy");
    let o = weir(&[
        "gen",
        "scan",
        "--out",
        out.to_str().unwrap(),
        "--type",
        "i32",
        "--lo",
        "-5",
        "--hi",
        "5",
        "--rows",
        "1000",
    ]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(o.stdout.contains("-5 <= v < 5"), "{}", o.stdout);
}

#[test]
fn gen_join_writes_what_it_reports() {
    let t = TempDir::new("gen-join");
    let args = |prefix: &str| {
        [
            "gen",
            "join",
            "--build-rows",
            "1000",
            "--probe-rows",
            "20000",
            "--dup",
            "fixed:2",
            "--match-rate",
            "0.3",
            "--seed",
            "5",
            "--out",
            prefix,
        ]
        .map(String::from)
    };
    let run = |prefix: &str| {
        let a = args(prefix);
        let o = weir_in(&t.0, &a.iter().map(String::as_str).collect::<Vec<_>>());
        assert_eq!(o.code, 0, "{}", o.stderr);
        o.stdout
    };
    let said = run("a");
    // Recount from the files, independently of the generator: the distinct S keys, the
    // L rows whose key is among them, and the inner-join pairs (each such row meets its
    // key's two S rows).
    let read = |name: &str| -> Vec<u64> {
        let text = std::fs::read_to_string(t.join(name)).unwrap();
        let mut lines = text.lines();
        assert_eq!(lines.next(), Some("key:u64,payload:u64"));
        lines
            .map(|l| l.split(',').next().unwrap().parse().unwrap())
            .collect()
    };
    let (s, l) = (read("a-build.csv"), read("a-probe.csv"));
    assert_eq!((s.len(), l.len()), (1000, 20000));
    let mut per_key = std::collections::HashMap::new();
    for k in &s {
        *per_key.entry(*k).or_insert(0u64) += 1;
    }
    assert_eq!(per_key.len(), 500);
    assert!(per_key.values().all(|&n| n == 2));
    let matched = l.iter().filter(|k| per_key.contains_key(k)).count();
    let pairs: u64 = l.iter().filter_map(|k| per_key.get(k)).sum();
    let achieved = matched as f64 / l.len() as f64;
    assert!((achieved - 0.3).abs() < 0.02, "achieved {achieved}");
    assert!(
        said.contains(&format!("achieved {achieved:.4}")),
        "{said} vs {achieved}"
    );
    assert!(
        said.contains(&format!("{pairs} pairs")),
        "{said} vs {pairs}"
    );
    // Same seed, same bytes.
    run("b");
    for side in ["build", "probe"] {
        let a = std::fs::read(t.join(&format!("a-{side}.csv"))).unwrap();
        let b = std::fs::read(t.join(&format!("b-{side}.csv"))).unwrap();
        assert_eq!(a, b, "{side}");
    }
}
