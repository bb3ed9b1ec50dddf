//! Simulator-in-the-loop check: `examples/testbench/run.sh` runs the example range-filter
//! engine in Icarus Verilog on the images `weir run` writes, and `weir check` must find its
//! output equal to golden and its deliberately broken variant different.

use std::path::Path;
use std::process::Command;

/// Whether `program` is an executable file in one of the `PATH` directories.
fn on_path(program: &str) -> bool {
    std::env::var_os("PATH")
        .map(|paths| std::env::split_paths(&paths).any(|dir| dir.join(program).is_file()))
        .unwrap_or(false)
}

/// Runs `weir check GOLDEN DEVICE` and returns its exit code.
fn check_exit_code(weir: &str, golden: &Path, device: &Path) -> Option<i32> {
    Command::new(weir)
        .arg("check")
        .arg(golden)
        .arg(device)
        .output()
        .expect("running weir check")
        .status
        .code()
}

#[test]
fn range_filter_engine_matches_golden_and_off_by_one_is_caught() {
    if !on_path("iverilog") {
        assert!(
            std::env::var("WEIR_REQUIRE_EXTERNAL").as_deref() != Ok("1"),
            "iverilog not found on PATH, and WEIR_REQUIRE_EXTERNAL=1 asks for it"
        );
        eprintln!("skipped: iverilog not found");
        return;
    }
    let weir = env!("CARGO_BIN_EXE_weir");
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/testbench/run.sh");
    let work = std::env::temp_dir().join(format!("weir-testbench-{}", std::process::id()));

    let run = Command::new("bash")
        .arg(&script)
        .arg("--weir")
        .arg(weir)
        .arg("--work")
        .arg(&work)
        .output()
        .expect("running bash");
    let stdout = String::from_utf8_lossy(&run.stdout);
    let stderr = String::from_utf8_lossy(&run.stderr);
    let context = format!("work dir {}\n--- stdout\n{stdout}\n--- stderr\n{stderr}", work.display());

    // The reference is Icarus Verilog's implementation of $readmemh/$writememh
    // (IEEE 1364-2005 §17.2.9, IEEE 1800-2017 §21.4): it loads weir's channel images, with
    // their @address lines, and writes the dumps weir check reads back.
    assert!(run.status.success(), "run.sh failed ({}):\n{context}", run.status);
    assert!(stdout.contains("golden check: match"), "no match reported:\n{context}");
    assert!(
        stdout.contains("off-by-one variant: mismatch as expected"),
        "the broken variant's mismatch was not reported:\n{context}"
    );

    // Hold the dumps the simulator wrote to the check's exit codes directly as well:
    // 0 = match for the engine, 1 = mismatch for the inclusive-upper-bound variant.
    let golden = work.join("golden");
    assert_eq!(check_exit_code(weir, &golden, &work.join("dump")), Some(0), "{context}");
    assert_eq!(check_exit_code(weir, &golden, &work.join("dump-bug")), Some(1), "{context}");

    std::fs::remove_dir_all(&work).expect("removing the work directory");
}
