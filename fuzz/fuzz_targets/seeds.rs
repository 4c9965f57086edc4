#![no_main]
//! Fuzz target: see `cinegauge::fuzz::seeds`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::seeds(data));
