//! Simulator-in-the-loop check: `examples/testbench/run.sh` runs the example range-filter
//! engine in Icarus Verilog on the images `weir run` writes, and `weir check` must find its
//! output equal to golden and its deliberately broken variant different.

mod util;

use std::process::Command;

use util::TempDir;

#[test]
fn range_filter_engine_matches_golden_and_off_by_one_is_caught() {
    if !util::have("iverilog") {
        return;
    }
    let tmp = TempDir::new("testbench");
    let work = tmp.join("work");
    let run = Command::new("bash")
        .arg(util::repo("examples/testbench/run.sh"))
        .arg("--weir")
        .arg(env!("CARGO_BIN_EXE_weir"))
        .arg("--work")
        .arg(&work)
        .output()
        .expect("running bash");
    let stdout = String::from_utf8_lossy(&run.stdout);
    let stderr = String::from_utf8_lossy(&run.stderr);
    let context = format!("--- stdout\n{stdout}\n--- stderr\n{stderr}");

    // The reference is Icarus Verilog's implementation of $readmemh/$writememh
    // (IEEE 1364-2005 §17.2.9, IEEE 1800-2017 §21.4): it loads weir's channel images, with
    // their @address lines, and writes the dumps weir check reads back.
    assert!(
        run.status.success(),
        "run.sh failed ({}):\n{context}",
        run.status
    );
    assert!(
        stdout.contains("golden check: match"),
        "no match reported:\n{context}"
    );
    assert!(
        stdout.contains("off-by-one variant: mismatch as expected"),
        "the broken variant's mismatch was not reported:\n{context}"
    );

    // Hold the simulator's dumps to the check's exit codes directly as well:
    // 0 = match for the engine, 1 = mismatch for the inclusive-upper-bound variant.
    let path = |rel: &str| work.join(rel).to_string_lossy().into_owned();
    let good = util::weir(&["check", &path("golden"), &path("dump")]);
    assert_eq!(good.code, 0, "{}\n{}", good.stdout, good.stderr);
    let broken = util::weir(&["check", &path("golden"), &path("dump-bug")]);
    assert_eq!(broken.code, 1, "{}\n{}", broken.stdout, broken.stderr);
}
