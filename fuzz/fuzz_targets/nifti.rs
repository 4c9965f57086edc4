#![no_main]
//! Fuzz target: see `cinegauge::fuzz::nifti`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::nifti(data));
