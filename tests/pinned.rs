//! Pins the SHA-256 of every file that the example jobs in `data/jobs/` and the demo write
//! (all but `timing.json`, which holds host times, and the demo's `plan.json` and
//! `report.html`, which set the device prediction against them). A change to any output byte must be a
//! deliberate decision: rerun with `WEIR_BLESS=1` to rewrite `tests/pinned/*.sha256`, and
//! say why in the commit.

mod util;

use std::path::Path;

use util::{repo, tree, weir, TempDir};

/// `sha256  path` lines of every file below `dir` except host-time files (in any
/// subdirectory), sorted by path.
fn digest_lines(dir: &Path) -> String {
    tree(dir)
        .into_iter()
        // Host times, and the plan and report made from them, are not promised stable.
        .filter(|(rel, _)| {
            let name = Path::new(rel).file_name().and_then(|n| n.to_str());
            !name.is_some_and(|n| ["timing.json", "plan.json", "report.html"].contains(&n))
        })
        .map(|(rel, bytes)| format!("{}  {rel}\n", weir::job::sha256_hex(&bytes)))
        .collect()
}

fn check_pinned(name: &str, out: &Path) {
    let got = digest_lines(out);
    let pin = repo(&format!("tests/pinned/{name}.sha256"));
    if std::env::var("WEIR_BLESS").as_deref() == Ok("1") {
        std::fs::write(&pin, &got).expect("write pin");
        return;
    }
    let want = std::fs::read_to_string(&pin).unwrap_or_else(|e| {
        panic!(
            "{}: {e} (run with WEIR_BLESS=1 to create it)",
            pin.display()
        )
    });
    if got != want {
        let diff: Vec<String> = want
            .lines()
            .filter(|l| !got.lines().any(|g| g == *l))
            .map(|l| format!("pinned {l}"))
            .chain(
                got.lines()
                    .filter(|l| !want.lines().any(|w| w == *l))
                    .map(|l| format!("now    {l}")),
            )
            .collect();
        panic!("{name}: output bytes changed:\n{}", diff.join("\n"));
    }
}

#[test]
fn example_jobs_write_pinned_bytes() {
    let mut jobs: Vec<_> = std::fs::read_dir(repo("data/jobs"))
        .expect("data/jobs")
        .map(|e| e.expect("entry").path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml") && !p.ends_with("demo.toml"))
        .collect();
    jobs.sort();
    assert!(jobs.len() >= 3, "example jobs: {jobs:?}");
    for job in jobs {
        let name = job.file_stem().unwrap().to_string_lossy().to_string();
        let t = TempDir::new(&format!("pinned-{name}"));
        let out = t.join("out");
        let o = weir(&["run", job.to_str().unwrap(), "--out", out.to_str().unwrap()]);
        assert_eq!(o.code, 0, "{name}: {}", o.stderr);
        check_pinned(&name, &out);
    }
}

#[test]
fn the_demo_writes_pinned_bytes() {
    let t = TempDir::new("pinned-demo");
    let out = t.join("demo");
    let o = weir(&["demo", "--out", out.to_str().unwrap()]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    check_pinned("demo", &out);
}
