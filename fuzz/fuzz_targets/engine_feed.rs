//! Fuzz target: see `slackmeter_fuzz::engine_feed`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| slackmeter_fuzz::engine_feed(data));
