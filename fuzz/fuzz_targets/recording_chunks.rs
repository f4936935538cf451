//! Fuzz target: see `slackmeter_fuzz::recording_chunks`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| slackmeter_fuzz::recording_chunks(data));
