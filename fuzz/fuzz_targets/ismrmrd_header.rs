#![no_main]
//! Fuzz target: see `cinegauge::fuzz::ismrmrd_header`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::ismrmrd_header(data));
