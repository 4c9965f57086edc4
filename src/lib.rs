//! cinegauge: do left-ventricular volumes and ejection fraction survive an accelerated
//! cardiac cine reconstruction?
//!
//! Research software for protocol evaluation. Its numbers are not a diagnosis; defer to
//! local clinical practice, local regulations and the responsible physician.
//!
//! # Conventions (stated once, here)
//!
//! * Image stacks are `[slice, frame, row, col]`, `f32` magnitude.
//! * k-space of one slice is `[coil, frame, ky, kx]`, `Complex32`; `ky` (rows) is the
//!   phase-encoding axis, `kx` (columns) the fully sampled readout.
//! * The 2-D FFT is centred and orthonormal: `ifftshift → FFT → fftshift`, scaled by
//!   `1/sqrt(N)` per axis, so forward and inverse are each other's adjoint and inverse.
//! * Slices are ordered by ascending position along the slice normal.
//! * Units: millimetres, milliseconds, millilitres; EF in percent. Field names carry the
//!   unit as a suffix (`_mm`, `_ms`, `_ml`, `_mm2`, `_pct`, `_bpm`, `_ml_s`).
//! * Volumes by the method of discs: `V = Σ area_slice × slice_spacing` with the
//!   centre-to-centre slice spacing; papillary muscles and trabeculae are counted in the
//!   blood pool unless stated otherwise.
//!
//! The data flow runs one way: [`phantom`] / [`io`] → [`sampling`] → [`recon`] →
//! [`segment`] → [`measure`] → [`results`] → [`report`].
#![deny(missing_docs)]

pub mod acceptance;
pub mod agreement;
pub mod agreement_table;
pub mod blind;
pub mod caution;
pub mod demo;
pub mod fft;
pub mod fidelity;
pub mod fuzz;
pub mod geometry;
pub mod io;
pub mod json;
pub mod limits;
pub mod measure;
pub mod normals;
pub mod panels;
pub mod phantom;
pub mod pipeline;
pub mod plan;
pub mod recon;
pub mod report;
pub mod results;
pub mod rng;
pub mod sampling;
pub mod seed_jitter;
pub mod segment;
pub mod simulate;
pub mod stats;
pub mod tolerances;
