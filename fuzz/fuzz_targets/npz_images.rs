#![no_main]
//! Fuzz target: see `cinegauge::fuzz::npz_images`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::npz_images(data));
