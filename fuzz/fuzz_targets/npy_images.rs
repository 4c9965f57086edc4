#![no_main]
//! Fuzz target: see `cinegauge::fuzz::npy_images`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::npy_images(data));
