#![no_main]
//! Fuzz target: see `cinegauge::fuzz::kspace_npy`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::kspace_npy(data));
