//! Fuzz target: see `slackmeter_fuzz::stream_decoder`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| slackmeter_fuzz::stream_decoder(data));
