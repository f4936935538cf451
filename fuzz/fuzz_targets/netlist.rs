//! Fuzz target: see `slackmeter_fuzz::netlist`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| slackmeter_fuzz::netlist(data));
