//! Fuzzes `weir::fuzzing::check_golden`; see DEVELOPERS.md, "Fuzzing".
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let _ = weir::fuzzing::check_golden(data);
});
