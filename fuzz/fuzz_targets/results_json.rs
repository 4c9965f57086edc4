#![no_main]
//! Fuzz target: see `cinegauge::fuzz::results_json`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::results_json(data));
