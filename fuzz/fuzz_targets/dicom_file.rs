#![no_main]
//! Fuzz target: see `cinegauge::fuzz::dicom_file`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::dicom_file(data));
