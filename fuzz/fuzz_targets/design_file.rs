//! Fuzz target: see `slackmeter_fuzz::design_file`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| slackmeter_fuzz::design_file(data));
