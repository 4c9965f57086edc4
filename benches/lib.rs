//! Nothing but a home for the criterion benchmarks `recon.rs` and `segment.rs` (run with
//! `cargo bench -p cinegauge-bench --bench NAME`), kept out of cinegauge's own test build.
