//! Every integration test in one binary: one link of the crate instead of one per file, and
//! tests from different files run side by side on the cores. Each file stays a module of its
//! own (`cargo test --release -- cli::` runs one); `ismrmrd_io` is separate because it needs
//! the `ismrmrd` feature.

#[path = "agreement_stats.rs"]
mod agreement_stats;
#[path = "bad_inputs.rs"]
mod bad_inputs;
#[path = "cli.rs"]
mod cli;
#[path = "coil_processing.rs"]
mod coil_processing;
mod common;
#[path = "conventions.rs"]
mod conventions;
#[path = "dicom_io.rs"]
mod dicom_io;
#[path = "fft.rs"]
mod fft;
#[path = "nifti_io.rs"]
mod nifti_io;
#[path = "npy_io.rs"]
mod npy_io;
#[path = "phantom_accuracy.rs"]
mod phantom_accuracy;
#[path = "reader_study.rs"]
mod reader_study;
#[path = "recon_methods.rs"]
mod recon_methods;
#[path = "region_growing.rs"]
mod region_growing;
#[path = "segmentation_rules.rs"]
mod segmentation_rules;
#[path = "study_plan.rs"]
mod study_plan;
#[path = "volumetry.rs"]
mod volumetry;
