//! Replays every input the fuzzers found (kept under `fuzz/regressions/TARGET/`) through
//! the same entry functions the fuzz targets call, on stable Rust: each must return, with
//! a result or an error, without panicking.

use std::path::Path;

type Entry = fn(&[u8]) -> weir::Result<()>;

const TARGETS: [(&str, Entry); 7] = [
    ("predicate", weir::fuzzing::predicate),
    ("job_plan", weir::fuzzing::job_plan),
    ("hex", weir::fuzzing::hex),
    ("npy", weir::fuzzing::npy),
    ("csv", weir::fuzzing::csv),
    ("check_dump", weir::fuzzing::check_dump),
    ("check_golden", weir::fuzzing::check_golden),
];

#[test]
fn every_saved_fuzz_input_returns_without_panicking() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz/regressions");
    let mut replayed = 0;
    for (name, entry) in TARGETS {
        let dir = root.join(name);
        let Ok(files) = std::fs::read_dir(&dir) else {
            continue;
        };
        for f in files {
            let p = f.unwrap().path();
            let data = std::fs::read(&p).unwrap();
            let r = std::panic::catch_unwind(|| entry(&data));
            assert!(r.is_ok(), "{name}: {} panicked", p.display());
            replayed += 1;
        }
    }
    assert!(replayed > 0, "no saved inputs under {}", root.display());
}

#[test]
fn the_entries_accept_good_input() {
    // Each entry reaches its parser's success path on a well-formed input, so a replayed
    // error is the input's fault, not the entry's.
    weir::fuzzing::predicate(b"u32 < 5 and f64 between -1 and 1.5").unwrap();
    weir::fuzzing::hex(b"\x02// 0x00000000\n0000_0001\n@2 xxxxxxxx\n").unwrap();
    weir::fuzzing::csv(b"a:i16,b:f32,c:u2\n-3,1.5,2\n").unwrap();
    let mut npy = Vec::new();
    weir::npy::write_npy(&mut npy, "<u4", &[2], &[1, 0, 0, 0, 2, 0, 0, 0]).unwrap();
    weir::fuzzing::npy(&npy).unwrap();
    weir::fuzzing::job_plan(weir::fuzzing::CHECK_JOB.as_bytes()).unwrap();
    let run = weir::fuzzing::check_run_dir();
    let golden = std::fs::read(run.join("golden/scan.p0.out.bin")).unwrap();
    // Bits 4–7 = 0: the first golden output; bits 2–3 = 1: written as .bin.
    let mut dump = vec![0b0100];
    dump.extend(&golden);
    weir::fuzzing::check_dump(&dump).unwrap();
}
