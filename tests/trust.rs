//! A job file and the command line cannot write outside `--out`, replace what weir did not
//! write, or leave partial output behind, however the run ends.

mod util;

use std::path::Path;
use std::process::Command;
use std::time::{Duration, Instant};

use util::{weir_in, TempDir};

const BIG_JOB: &str = "[input]\ntable = \"t\"\nrows = 30000000\n[[input.columns]]\nname = \"v\"\ntype = \"u64\"\ndist = \"uniform\"\nmin = 0\nmax = 1000\n[layout]\npartitions = 64\nchannel_mib = 4096\n[kernel]\nname = \"scan\"\npredicate = \"v < 10\"\n[output]\nformats = [\"hex\", \"bin\", \"npy\"]\n";

/// Every path below `dir`, relative, sorted.
fn listing(dir: &Path) -> Vec<String> {
    let mut out: Vec<String> = util::tree(dir).into_iter().map(|(p, _)| p).collect();
    out.sort();
    out
}

/// Hidden temporary directories left in `dir`.
fn partials(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .filter(|n| n.contains("weir-partial"))
        .collect()
}

/// Starts a long run into `t/out`, waits until it is writing, sends `signal`.
fn interrupt(t: &TempDir, signal: &str) -> std::process::Output {
    let job = t.write("big.toml", BIG_JOB);
    let child = Command::new(env!("CARGO_BIN_EXE_weir"))
        .args(["run", job.to_str().unwrap(), "--out", "out"])
        .current_dir(&t.0)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("start weir");
    let start = Instant::now();
    while partials(&t.0).is_empty() && start.elapsed() < Duration::from_secs(60) {
        std::thread::sleep(Duration::from_millis(20));
    }
    assert!(!partials(&t.0).is_empty(), "the run never started writing");
    std::thread::sleep(Duration::from_millis(300));
    let k = Command::new("kill")
        .args([signal, &child.id().to_string()])
        .status()
        .expect("kill");
    assert!(k.success());
    child.wait_with_output().expect("wait")
}

#[test]
fn sigint_and_sigterm_leave_nothing() {
    for (signal, code) in [("-INT", 130), ("-TERM", 143)] {
        let t = TempDir::new(&format!("signal{signal}"));
        let o = interrupt(&t, signal);
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(code), "{stderr}");
        assert!(stderr.contains("nothing was written"), "{stderr}");
        assert!(partials(&t.0).is_empty(), "{:?}", partials(&t.0));
        assert!(!t.join("out").exists());
    }
}

#[test]
fn a_killed_run_is_cleaned_up_by_the_next() {
    let t = TempDir::new("sigkill");
    let o = interrupt(&t, "-KILL");
    assert_eq!(o.status.code(), None, "killed by a signal");
    assert_eq!(partials(&t.0).len(), 1, "SIGKILL cannot clean up");
    let small = t.write("small.toml", &BIG_JOB.replace("30000000", "1000"));
    let o = weir_in(&t.0, &["run", small.to_str().unwrap(), "--out", "out"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout.contains("left by an interrupted earlier run"),
        "{}",
        o.stdout
    );
    assert!(partials(&t.0).is_empty(), "{:?}", partials(&t.0));
}

#[test]
fn names_in_a_job_cannot_reach_outside_out() {
    let base = "[input]\ntable = \"TABLE\"\nrows = 100\n[[input.columns]]\nname = \"COLUMN\"\ntype = \"u32\"\ndist = \"uniform\"\nmin = 0\nmax = 9\n[kernel]\nname = \"scan\"\npredicate = \"COLUMN < 3\"\nPROJECT\n";
    let evil = [
        "../../victim/pwn",
        "../x",
        "a/b",
        "/tmp/abs",
        "..",
        "x.y",
        "",
        "sp ace",
    ];
    for name in evil {
        for (table, column) in [(name, "v"), ("t", name)] {
            let t = TempDir::new("escape");
            let inner = t.join("work");
            std::fs::create_dir_all(&inner).unwrap();
            let text = base
                .replace("TABLE", table)
                .replace("COLUMN", column)
                .replace("PROJECT", "");
            let job = t.write("work/job.toml", &text);
            let o = weir_in(&inner, &["run", job.to_str().unwrap(), "--out", "out"]);
            assert_eq!(
                o.code, 2,
                "table {table:?}, column {column:?}: {}",
                o.stdout
            );
            assert_eq!(
                listing(&t.0),
                ["work/job.toml"],
                "table {table:?} column {column:?}"
            );
        }
    }
}

#[test]
fn region_names_do_not_collide() {
    // A table called like the kernel, with a column called like an output region.
    let t = TempDir::new("collide");
    let job = t.write("job.toml", "[input]\ntable = \"scan\"\nrows = 100\n[[input.columns]]\nname = \"out\"\ntype = \"u32\"\ndist = \"uniform\"\nmin = 0\nmax = 9\n[kernel]\nname = \"scan\"\npredicate = \"out < 3\"\n");
    let o = weir_in(&t.0, &["run", job.to_str().unwrap(), "--out", "o"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let vh = std::fs::read_to_string(t.join("o/memory_map.vh")).unwrap();
    let param = |name: &str| {
        vh.lines()
            .find(|l| l.contains(&format!(" {name} = ")))
            .unwrap_or_else(|| panic!("{name} missing:\n{vh}"))
            .to_string()
    };
    assert_ne!(
        param("P0_OUT_BASE").split('=').nth(1),
        param("P0_IN_OUT_BASE").split('=').nth(1)
    );
    assert!(vh.contains("CH0_HEX"), "{vh}");
    // Columns that differ only in case would give the same Verilog parameter.
    let job = t.write("case.toml", "[input]\nrows = 10\n[[input.columns]]\nname = \"v\"\ntype = \"u32\"\ndist = \"uniform\"\nmin = 0\nmax = 9\n[[input.columns]]\nname = \"V\"\ntype = \"u32\"\ndist = \"uniform\"\nmin = 0\nmax = 9\n[kernel]\nname = \"scan\"\npredicate = \"v < 3\"\n");
    let o = weir_in(&t.0, &["run", job.to_str().unwrap(), "--out", "c"]);
    assert_eq!(o.code, 2);
    assert!(o.stderr.contains("differ only in case"), "{}", o.stderr);
}

#[test]
fn force_never_touches_the_job_file_or_a_foreign_directory() {
    let t = TempDir::new("force-job");
    let text = BIG_JOB.replace("30000000", "100");
    let job = t.write("copy.toml", &text);
    let o = weir_in(&t.0, &["run", "copy.toml", "--out", "copy.toml", "--force"]);
    assert_eq!(o.code, 2, "{}", o.stdout);
    assert_eq!(std::fs::read_to_string(&job).unwrap(), text);
    let inside = t.write("ft/job.toml", &text);
    t.write("ft/notes.txt", "mine");
    let o = weir_in(&t.0, &["run", "ft/job.toml", "--out", "ft", "--force"]);
    assert_eq!(o.code, 2, "{}", o.stdout);
    assert!(inside.exists() && t.join("ft/notes.txt").exists());
    assert_eq!(listing(&t.0), ["copy.toml", "ft/job.toml", "ft/notes.txt"]);
}
