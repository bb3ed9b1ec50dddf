//! Fuzzes `weir::fuzzing::job_plan`; see DEVELOPERS.md, "Fuzzing".
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let _ = weir::fuzzing::job_plan(data);
});
