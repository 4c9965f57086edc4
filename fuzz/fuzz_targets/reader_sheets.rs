#![no_main]
//! Fuzz target: see `cinegauge::fuzz::reader_sheets`.

libfuzzer_sys::fuzz_target!(|data: &[u8]| cinegauge::fuzz::reader_sheets(data));
