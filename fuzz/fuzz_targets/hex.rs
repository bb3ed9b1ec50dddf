//! Fuzzes `weir::fuzzing::hex`; see DEVELOPERS.md, "Fuzzing".
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let _ = weir::fuzzing::hex(data);
});
