#![no_main]
//! Fuzz target: see `cinegauge::fuzz::dicom_folder`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::dicom_folder(data));
