//! Fuzz target: see `slackmeter_fuzz::part_library`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| slackmeter_fuzz::part_library(data));
