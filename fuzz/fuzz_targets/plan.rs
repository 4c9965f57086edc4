#![no_main]
//! Fuzz target: see `cinegauge::fuzz::plan`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::plan(data));
