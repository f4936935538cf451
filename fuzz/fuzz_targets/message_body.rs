//! Fuzz target: see `slackmeter_fuzz::message_body`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| slackmeter_fuzz::message_body(data));
