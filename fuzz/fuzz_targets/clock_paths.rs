//! Fuzz target: see `slackmeter_fuzz::clock_paths`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| slackmeter_fuzz::clock_paths(data));
