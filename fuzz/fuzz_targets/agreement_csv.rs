#![no_main]
//! Fuzz target: see `cinegauge::fuzz::agreement_csv`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::agreement_csv(data));
