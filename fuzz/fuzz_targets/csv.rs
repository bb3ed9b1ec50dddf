//! Fuzzes `weir::fuzzing::csv`; see DEVELOPERS.md, "Fuzzing".
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let _ = weir::fuzzing::csv(data);
});
