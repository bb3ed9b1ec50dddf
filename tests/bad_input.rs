//! The bad-input matrix: every row changes one thing (a job key, an input file, a dump, a
//! manifest or a flag) and states the exit code and a fragment of the one-line message.
//! Each row runs in a fresh directory, and afterwards nothing outside `--out` has been
//! created, changed or removed, and no partial output directory is left.

mod util;

use std::path::Path;

use util::{weir_in, TempDir};

/// A small scan job every job row edits.
const JOB: &str = "[input]\ntable = \"t\"\nrows = 1000\n[[input.columns]]\nname = \"v\"\ntype = \"u32\"\ndist = \"uniform\"\nmin = 0\nmax = 1000\n[layout]\nword_bits = 64\npartitions = 2\nchannels = 2\n[kernel]\nname = \"scan\"\npredicate = \"v < 100\"\n[output]\nformats = [\"hex\", \"bin\"]\n";

/// A job reading `t.csv` with the schema `a:i16, b:f32`.
const CSV_JOB: &str = "[input]\ntable = \"t\"\ncsv = \"t.csv\"\n[[input.columns]]\nname = \"a\"\ntype = \"i16\"\n[[input.columns]]\nname = \"b\"\ntype = \"f32\"\n[kernel]\nname = \"scan\"\npredicate = \"a < 3\"\n";

/// A job reading the `.npy` or `.bin` column file `c.FILE`.
const FILE_JOB: &str = "[input]\ntable = \"t\"\n[[input.columns]]\nname = \"c\"\ntype = \"u32\"\nfile = \"FILE\"\n[kernel]\nname = \"scan\"\npredicate = \"c < 3\"\n";

/// A small SGD job: 64 generated samples of 3 features, row-major, two engines.
const SGD_JOB: &str = "[tables.s]\nrows = 64\ngenerator = \"samples\"\n[tables.s.samples]\nfeatures = 3\n[layout]\npartitions = 2\norder = \"row\"\n[kernel]\nname = \"sgd\"\ntable = \"s\"\nbatch = 8\nstep = 0.1\n";

/// [`SGD_JOB`] with its features streamed as codes: `keys` is the `[kernel.quant]` table.
fn quant_job(keys: &str) -> String {
    format!("{SGD_JOB}[kernel.quant]\n{keys}\n")
}

/// What a row sets up before running weir.
enum Setup {
    /// Files written into the directory (relative path, bytes).
    Files(Vec<(String, Vec<u8>)>),
    /// A good run of [`JOB`] into `run/`, then an edit of it.
    Run(fn(&Path)),
}

struct Row {
    what: &'static str,
    setup: Setup,
    args: Vec<String>,
    code: i32,
    message: String,
}

/// `JOB` with each `(old, new)` replaced (each `old` must occur).
fn edit(base: &str, edits: &[(&str, &str)]) -> String {
    let mut s = base.to_string();
    for (old, new) in edits {
        assert!(s.contains(old), "{old:?} not in the job");
        s = s.replacen(old, new, 1);
    }
    s
}

/// A row running `job.toml` (text `job`, plus `more` files) into `out`.
fn job_row(what: &'static str, job: String, more: &[(&str, &[u8])], code: i32, msg: &str) -> Row {
    let mut files = vec![("job.toml".to_string(), job.into_bytes())];
    files.extend(more.iter().map(|(p, b)| (p.to_string(), b.to_vec())));
    Row {
        what,
        setup: Setup::Files(files),
        args: args(&["run", "job.toml", "--out", "out"]),
        code,
        message: msg.into(),
    }
}

/// A row that runs `JOB` with `edits`.
fn key_row(what: &'static str, edits: &[(&str, &str)], code: i32, msg: &str) -> Row {
    job_row(what, edit(JOB, edits), &[], code, msg)
}

/// A row running the command `a` after `setup`.
fn cmd_row(what: &'static str, setup: Setup, a: &[&str], code: i32, msg: &str) -> Row {
    Row {
        what,
        setup,
        args: args(a),
        code,
        message: msg.into(),
    }
}

fn args(a: &[&str]) -> Vec<String> {
    a.iter().map(|s| s.to_string()).collect()
}

fn read(p: &Path) -> String {
    std::fs::read_to_string(p).unwrap()
}

/// Sets `KEY` to the JSON `value` in the manifest entries of every golden file of output
/// `scan.p0.out` (`.hex` and `.bin`) in `run/manifest.json`.
fn set_manifest(run: &Path, key: &str, value: &str) {
    set_entry(run, "golden/scan.p0.out.", key, value);
}

/// Sets `KEY` to `value` in the manifest entries whose path starts with `prefix`.
fn set_entry(run: &Path, prefix: &str, key: &str, value: &str) {
    let p = run.join("manifest.json");
    let mut m: serde_json::Value = serde_json::from_str(&read(&p)).unwrap();
    let files = m["files"].as_array_mut().unwrap().iter_mut();
    for f in files.filter(|f| f["path"].as_str().unwrap().starts_with(prefix)) {
        f[key] = serde_json::from_str(value).unwrap();
    }
    std::fs::write(&p, serde_json::to_string_pretty(&m).unwrap()).unwrap();
}

/// Truncates the golden files of output `scan.p0.out`: the hex to its first line, the bin
/// to its first word (8 bytes); with `rehash`, the manifest's sizes and checksums follow.
fn truncate_golden(run: &Path, rehash: bool) {
    let hex = run.join("golden/scan.p0.out.hex");
    let text = read(&hex);
    std::fs::write(&hex, format!("{}\n", text.lines().next().unwrap())).unwrap();
    let bin = run.join("golden/scan.p0.out.bin");
    let b = std::fs::read(&bin).unwrap();
    std::fs::write(&bin, &b[..8]).unwrap();
    if rehash {
        for (p, name) in [
            (hex, "golden/scan.p0.out.hex"),
            (bin, "golden/scan.p0.out.bin"),
        ] {
            let b = std::fs::read(p).unwrap();
            set_entry(
                run,
                name,
                "sha256",
                &format!("\"{}\"", weir::job::sha256_hex(&b)),
            );
            set_entry(run, name, "bytes", &b.len().to_string());
        }
    }
}

fn rows() -> Vec<Row> {
    let f = |s: &str| s.as_bytes().to_vec();
    let zipf_int = "[[input.columns]]\nname = \"s\"\ntype = \"u32\"\ndist = \"select\"\nselectivity = 1.0\nlo = 0.2\nhi = 0.8\nskew = \"zipf\"\n[layout]";
    let zipf_distinct = "[[input.columns]]\nname = \"s\"\ntype = \"u32\"\ndist = \"select\"\nselectivity = 0.1\nlo = 10\nhi = 20\nskew = \"zipf\"\ntheta = 0.9\ndistinct = 9223372036854775807\n[layout]";
    let many_cols: String = (0..257)
        .map(|i| format!("[[input.columns]]\nname = \"c{i}\"\ntype = \"u8\"\ndist = \"uniform\"\nmin = 0\nmax = 9\n"))
        .collect();
    let many_tables: String = (0..17)
        .map(|i| format!("[tables.t{i}]\nrows = 10\n[[tables.t{i}.columns]]\nname = \"v\"\ntype = \"u8\"\ndist = \"uniform\"\nmin = 0\nmax = 9\n"))
        .collect::<String>()
        + "[kernel]\nname = \"scan\"\npredicate = \"v < 3\"\n";
    let long_pred = format!("predicate = \"{}v < 1\"", "v < 1 and ".repeat(7000));
    let long_list = format!(
        "predicate = \"v < 100\"\noutput = \"project\"\nproject = [{}]",
        vec!["\"v\""; 4097].join(", ")
    );
    let npy_u32 = {
        let mut b = Vec::new();
        weir::npy::write_npy(
            &mut b,
            "<u4",
            &[4],
            &[1, 0, 0, 0, 2, 0, 0, 0, 3, 0, 0, 0, 4, 0, 0, 0],
        )
        .unwrap();
        b
    };
    let truncated_npy = npy_u32[..npy_u32.len() - 3].to_vec();
    vec![
        // Values that used to panic, abort or overflow.
        key_row("no channels", &[("channels = 2", "channels = 0")], 2, "layout.channels = 0"),
        key_row(
            "no channels with partition_rows",
            &[("channels = 2", "channels = 0\npartition_rows = [512, 488]")],
            2,
            "layout.channels = 0",
        ),
        key_row(
            "zipf select on an integer column with fractional bounds",
            &[("[layout]", zipf_int)],
            2,
            "`s`",
        ),
        key_row(
            "zipf distinct beyond its limit",
            &[("[layout]", zipf_distinct)],
            2,
            "distinct",
        ),
        key_row(
            "rows whose byte count overflows",
            &[("rows = 1000", "rows = 2305843009213693952"), ("\"u32\"", "\"u64\"")],
            2,
            "rows = 2305843009213693952",
        ),
        key_row(
            "partition_rows past the row limit",
            &[("channels = 2", "channels = 2\npartition_rows = [1099511627776, 1099511627776]")],
            2,
            "partition_rows",
        ),
        // Values that used to be silently changed.
        key_row(
            "channel_mib wrapping to 1 MiB",
            &[("channels = 2", "channels = 2\nchannel_mib = 17592186044417")],
            2,
            "layout.channel_mib = 17592186044417",
        ),
        key_row(
            "Q format with a 32-bit overflow",
            &[("\"u32\"", "\"i32\"\nq = \"Q4294967295.1\""), ("min = 0", "min = -5")],
            2,
            "Q4294967295.1",
        ),
        key_row("u8 uniform max above the type", &[("\"u32\"", "\"u8\""), ("max = 1000", "max = 300")], 2, "300"),
        key_row("u8 uniform min below the type", &[("\"u32\"", "\"u8\""), ("min = 0", "min = -5"), ("max = 1000", "max = 200")], 2, "-5"),
        job_row(
            "f32 CSV cell that overflows",
            CSV_JOB.into(),
            &[("t.csv", b"a,b\n1,1e40\n")],
            2,
            "t.csv, line 2: column `b`: value 1e40 overflows f32",
        ),
        // Limits.
        key_row("partitions beyond the limit", &[("partitions = 2", "partitions = 100000")], 2, "layout.partitions = 100000"),
        key_row("word_bits beyond the limit", &[("word_bits = 64", "word_bits = 8192")], 2, "word_bits"),
        job_row("too many columns", edit(JOB, &[("[layout]", &(many_cols + "[layout]"))]), &[], 2, "columns = 258"),
        job_row("too many tables", many_tables, &[], 2, "tables = 17"),
        key_row("a predicate beyond the limit", &[("predicate = \"v < 100\"", &long_pred)], 2, "kernel.predicate (characters)"),
        key_row("a projection list beyond the limit", &[("predicate = \"v < 100\"", &long_list)], 2, "kernel.project (entries)"),
        key_row("a region that does not fit its channel", &[("rows = 1000", "rows = 1000000"), ("channels = 2", "channels = 2\nchannel_mib = 1")], 2, "does not fit"),
        // Names.
        key_row("a table name with a path", &[("table = \"t\"", "table = \"../../victim/pwn\"")], 2, "../../victim/pwn"),
        key_row("a column name with a path", &[("name = \"v\"", "name = \"a/b\""), ("v < 100", "a/b < 100")], 2, "a/b"),
        job_row(
            "a [tables] section named with a path",
            "[tables.\"../x\"]\nrows = 10\n[[tables.\"../x\".columns]]\nname = \"v\"\ntype = \"u8\"\ndist = \"uniform\"\nmin = 0\nmax = 9\n[kernel]\nname = \"scan\"\npredicate = \"v < 3\"\n".into(),
            &[],
            2,
            "../x",
        ),
        key_row(
            "columns differing only in case",
            &[("[layout]", "[[input.columns]]\nname = \"V\"\ntype = \"u8\"\ndist = \"uniform\"\nmin = 0\nmax = 9\n[layout]")],
            2,
            "differ only in case",
        ),
        // Job syntax and values the README names.
        key_row("an unknown key", &[("word_bits = 64", "word_bits = 64\nwordbits = 64")], 2, "job.toml, line 12: unknown field `wordbits`"),
        key_row("word_bits not dividing the channel", &[("word_bits = 64", "word_bits = 24"), ("\"u32\"", "\"u8\""), ("max = 1000", "max = 200")], 2, "(channel_mib) is not a whole number of 3-byte words (word_bits)"),
        key_row("a predicate syntax error", &[("v < 100", "v < < 3")], 2, "predicate syntax error at column 5"),
        key_row("an out-of-range literal", &[("\"u32\"", "\"u8\""), ("max = 1000", "max = 200"), ("v < 100", "v < 300")], 2, "300"),
        key_row("a float literal on an integer column", &[("v < 100", "v < 1.5")], 2, "1.5"),
        key_row(
            "a predicate that can never match is a warning",
            &[("v < 100", "v between 200 and 100")],
            0,
            "warning: kernel.predicate can never match: no value of `v` lies in 200..=100",
        ),
        key_row(
            "contradictory terms on one column are a warning",
            &[("v < 100", "v < 5 and v > 9")],
            0,
            "warning: kernel.predicate can never match: no value of `v` lies in 10..=4",
        ),
        // Input files.
        job_row("an empty CSV file", CSV_JOB.into(), &[("t.csv", b"")], 2, "t.csv: the file is empty"),
        job_row(
            "an empty CSV cell",
            CSV_JOB.into(),
            &[("t.csv", b"a,b\n,1.5\n")],
            2,
            "t.csv, line 2: column `a`: empty cell, expected an i16 number",
        ),
        job_row(
            "a CSV cell that is not a number",
            CSV_JOB.into(),
            &[("t.csv", b"a,b\n1,1.5\nzz,2\n")],
            2,
            "t.csv, line 3: column `a`: `zz` is not an i16 number",
        ),
        job_row("a CSV row with a missing field", CSV_JOB.into(), &[("t.csv", b"a,b\n1\n")], 2, "t.csv, line 2: 1 fields, the header has 2"),
        job_row("a truncated .npy column", FILE_JOB.replace("FILE", "c.npy"), &[("c.npy", &truncated_npy)], 2, "c.npy"),
        job_row("a .bin column of a partial value", FILE_JOB.replace("FILE", "c.bin"), &[("c.bin", b"0123456789")], 2, "c.bin: 10 bytes is not a whole number of u32 values"),
        job_row("a missing input file", FILE_JOB.replace("FILE", "none.npy"), &[], 2, "none.npy"),
        // Flags.
        Row {
            what: "an empty --seeds range",
            setup: Setup::Files(vec![("job.toml".into(), f(JOB))]),
            args: args(&["run", "job.toml", "--out", "out", "--seeds", "5..5"]),
            code: 2,
            message: "--seeds 5..5 is empty".into(),
        },
        Row {
            what: "--threads 0",
            setup: Setup::Files(vec![("job.toml".into(), f(JOB))]),
            args: args(&["run", "job.toml", "--out", "out", "--threads", "0"]),
            code: 2,
            message: "--threads must be at least 1".into(),
        },
        cmd_row("calibrate --threads 0", Setup::Files(vec![]), &["calibrate", "--threads", "0"], 2, "invalid value '0' for '--threads <THREADS>': must be at least 1"),
        cmd_row(
            "gen scan: zipf on an integer type with fractional bounds",
            Setup::Files(vec![]),
            &["gen", "scan", "--skew", "zipf", "--lo", "0.2", "--hi", "0.8", "--rows", "100", "--out", "out/g.csv"],
            2,
            "0.2",
        ),
        // --force.
        Row {
            what: "--out is the job file",
            setup: Setup::Files(vec![("job.toml".into(), f(JOB))]),
            args: args(&["run", "job.toml", "--out", "job.toml", "--force"]),
            code: 2,
            message: "job.toml".into(),
        },
        Row {
            what: "--force on a directory weir did not write",
            setup: Setup::Files(vec![("job.toml".into(), f(JOB)), ("out/notes.txt".into(), f("mine"))]),
            args: args(&["run", "job.toml", "--out", "out", "--force"]),
            code: 2,
            message: "manifest".into(),
        },
        Row {
            what: "a non-empty --out without --force",
            setup: Setup::Files(vec![("job.toml".into(), f(JOB)), ("out/notes.txt".into(), f("mine"))]),
            args: args(&["run", "job.toml", "--out", "out"]),
            code: 2,
            message: "--force".into(),
        },
        // Manifests and golden directories.
        cmd_row("inspect: a non-ASCII sha256", Setup::Run(|r| set_manifest(r, "sha256", "\"ééééééé\"")), &["inspect", "run"], 2, "is not 64 lowercase hex digits"),
        cmd_row("check: a non-ASCII sha256", Setup::Run(|r| set_manifest(r, "sha256", "\"ééééééé\"")), &["check", "run", "run"], 2, "is not 64 lowercase hex digits"),
        cmd_row("check: a manifest path leaving the directory", Setup::Run(|r| set_manifest(r, "path", "\"../job.toml\"")), &["check", "run", "run"], 2, "must be relative and inside the run directory"),
        cmd_row("check: a truncated golden hex", Setup::Run(|r| truncate_golden(r, false)), &["check", "run", "run"], 2, "golden file changed since the run"),
        cmd_row(
            "check: truncated golden files with their checksums updated",
            Setup::Run(|r| truncate_golden(r, true)),
            &["check", "run", "run"],
            2,
            "scan.p0.out.bin: holds 8 bytes of records, the manifest's",
        ),
        cmd_row("check: an edited record_bytes", Setup::Run(|r| set_manifest(r, "record_bytes", "3")), &["check", "run", "run"], 2, "record_bytes 3 does not give its payload_bytes"),
        cmd_row("check: a huge record_bytes", Setup::Run(|r| set_manifest(r, "record_bytes", "18446744073709551615")), &["check", "run", "run"], 2, "does not give its payload_bytes"),
        cmd_row("check: a huge records count", Setup::Run(|r| set_manifest(r, "records", "18446744073709551615")), &["check", "run", "run"], 2, "records 18446744073709551615 × record_bytes 4"),
        cmd_row("check: a dump word wider than the word", Setup::Run(|r| std::fs::write(r.join("../scan.p0.out.hex"), "123456789abcdef01\n").unwrap()), &["check", "run", "scan.p0.out.hex"], 2, "line 1"),
        job_row(
            "sgd: a replicated dataset larger than a channel (checked before it is generated)",
            SGD_JOB.replace("rows = 64", "rows = 17179869184"),
            &[],
            2,
            "are replicated on every engine channel but do not fit one channel of 256 MiB",
        ),
        job_row("sgd: a minibatch larger than the dataset", SGD_JOB.replace("batch = 8", "batch = 65"), &[], 2, "kernel.batch: minibatch size 65 must be within 1..=64"),
        job_row("sgd: a list of steps for averaging engines", SGD_JOB.replace("step = 0.1", "step = [0.1, 0.2]\nengines = \"averaging\""), &[], 2, "averaging engines share one step"),
        job_row("sgd: an f32 table in fixed point", SGD_JOB.replace("batch = 8", "batch = 8\nnumeric = \"fixed\""), &[], 2, "the fixed mode reads i16 with q = \"Q3.12\""),
        job_row("sgd codes: k not in 1, 2, 4, 8", quant_job("bits = 3\nlo = -3.0\nhi = 3.0"), &[], 2, "kernel.quant: bits = 3 (expected 1, 2, 4 or 8)"),
        job_row("sgd codes: hi equal to lo", quant_job("bits = 4\nlo = 1.0\nhi = 1.0"), &[], 2, "kernel.quant: feature 0: range [1, 1] needs finite lo < hi"),
        job_row("sgd codes: hi below lo for one feature", quant_job("bits = 4\nlo = -1.0\nhi = [1.0, -2.0, 1.0]"), &[], 2, "kernel.quant: feature 1: range [-1, -2] needs finite lo < hi"),
        job_row("sgd codes: a range list of the wrong length", quant_job("bits = 4\nlo = [-1.0, -1.0]\nhi = 1.0"), &[], 2, "kernel.quant.lo: lists 2 values for 3 features"),
        job_row("sgd codes: a range too narrow for its magnitude", quant_job("bits = 4\nlo = 1e6\nhi = 1000000.25"), &[], 2, "feature 0: range [1000000, 1000000.25] is too narrow for its magnitude"),
        job_row("sgd codes: a range wider than f32", quant_job("bits = 1\nlo = -1e39\nhi = 1e39"), &[], 2, "kernel.quant: feature 0: range [-inf, inf] needs finite lo < hi"),
        job_row("sgd codes: an unknown outside rule", quant_job("bits = 4\nlo = -3.0\nhi = 3.0\noutside = \"wrap\""), &[], 2, "kernel.quant.outside: `wrap` (expected clamp or refuse)"),
        job_row("sgd codes: values outside a refused range", quant_job("bits = 2\nlo = -0.5\nhi = 0.5\noutside = \"refuse\""), &[], 2, "is outside the code range [-0.5, 0.5]"),
        job_row("sgd codes: an unknown quant key", quant_job("bits = 4\nlo = -3.0\nhi = 3.0\nstep = 0.5"), &[], 2, "unknown field `step`"),
        job_row("sgd codes: codes with fixed-point data", quant_job("bits = 4\nlo = -3.0\nhi = 3.0").replace("features = 3", "features = 3\nq = \"Q3.12\"").replace("batch = 8", "batch = 8\nnumeric = \"fixed\""), &[], 2, "kernel.quant: k-bit codes dequantise to f32; numeric = \"fixed\" reads Q-format data"),
        job_row("sgd: samples in a Q format wider than 24 bits", SGD_JOB.replace("features = 3", "features = 3\nq = \"Q7.24\""), &[], 2, "samples.q = Q7.24: at most 24 bits"),
        cmd_row("check: a newer manifest format", Setup::Run(|r| {
            let p = r.join("manifest.json");
            std::fs::write(&p, read(&p).replacen("\"format_version\": 1", "\"format_version\": 99", 1)).unwrap();
        }), &["check", "run", "run"], 2, "format_version 99 is not supported"),
    ]
}

/// Every file and directory below `dir`, relative, with file contents.
fn snapshot(dir: &Path) -> Vec<(String, Option<Vec<u8>>)> {
    fn walk(base: &Path, d: &Path, out: &mut Vec<(String, Option<Vec<u8>>)>) {
        for e in std::fs::read_dir(d).unwrap() {
            let p = e.unwrap().path();
            let rel = p.strip_prefix(base).unwrap().to_string_lossy().to_string();
            if p.is_dir() {
                out.push((rel, None));
                walk(base, &p, out);
            } else {
                out.push((rel, Some(std::fs::read(&p).unwrap())));
            }
        }
    }
    let mut out = Vec::new();
    walk(dir, dir, &mut out);
    out.sort();
    out
}

#[test]
fn every_bad_input_is_refused_with_its_message_and_leaves_nothing() {
    let mut failures = Vec::new();
    for (i, row) in rows().into_iter().enumerate() {
        let t = TempDir::new(&format!("bad{i}"));
        match &row.setup {
            Setup::Files(files) => {
                for (p, b) in files {
                    let path = t.join(p);
                    std::fs::create_dir_all(path.parent().unwrap()).unwrap();
                    std::fs::write(path, b).unwrap();
                }
            }
            Setup::Run(change) => {
                t.write("job.toml", JOB);
                let o = weir_in(&t.0, &["run", "job.toml", "--out", "run"]);
                assert_eq!(o.code, 0, "{}", o.stderr);
                change(&t.join("run"));
            }
        }
        let before = snapshot(&t.0);
        let a: Vec<&str> = row.args.iter().map(String::as_str).collect();
        let o = weir_in(&t.0, &a);
        let said = format!("{}{}", o.stderr, o.stdout);
        let mut bad = Vec::new();
        if o.code != row.code {
            bad.push(format!("exit {} (expected {})", o.code, row.code));
        }
        // The message is one line (a predicate error adds its text and a caret below it).
        let first = o
            .stderr
            .lines()
            .find(|l| l.starts_with("weir: ") || l.starts_with("error:"))
            .unwrap_or("");
        if !first.contains(&row.message) && !o.stdout.contains(&row.message) {
            bad.push(format!("message lacks {:?}", row.message));
        }
        // Usage errors come from the argument parser as `error: …`.
        let errors = o
            .stderr
            .lines()
            .filter(|l| l.starts_with("weir: error") || l.starts_with("error:"))
            .count();
        if errors != usize::from(row.code >= 2) {
            bad.push(format!("{errors} error lines"));
        }
        if said.contains("weir-partial") {
            bad.push("the message names the temporary directory".to_string());
        }
        let out_of = |p: &str| p == "out" || p.starts_with("out/");
        let after: Vec<_> = snapshot(&t.0)
            .into_iter()
            .filter(|(p, _)| !out_of(p))
            .collect();
        let before: Vec<_> = before.into_iter().filter(|(p, _)| !out_of(p)).collect();
        if after != before {
            let names =
                |v: &[(String, Option<Vec<u8>>)]| v.iter().map(|x| x.0.clone()).collect::<Vec<_>>();
            bad.push(format!(
                "outside --out: {:?} became {:?}",
                names(&before),
                names(&after)
            ));
        }
        if !bad.is_empty() {
            failures.push(format!(
                "{}: {}\n  said: {}",
                row.what,
                bad.join("; "),
                said.trim_end()
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
