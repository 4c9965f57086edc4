#![no_main]
//! Fuzz target: see `cinegauge::fuzz::ismrmrd_acquisitions`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::ismrmrd_acquisitions(data));
