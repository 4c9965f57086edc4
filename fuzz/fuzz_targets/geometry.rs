#![no_main]
//! Fuzz target: see `cinegauge::fuzz::geometry`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::geometry(data));
