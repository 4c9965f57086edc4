//! Reconstruction methods behind one [`Reconstructor`] interface, chosen by identifier.
//!
//! A method receives one slice of multi-coil k-space `[coil, frame, ky, kx]` with the
//! lines that were not acquired set to zero, the sampling mask and a planned FFT, and
//! returns magnitude images `[frame, row, col]`. The [`REGISTRY`] lists every method; the
//! command-line help and the report's methods section are generated from it.

pub mod coils;
mod reference;
mod zero_filled;

use ndarray::{Array3, ArrayView4};
use num_complex::Complex32;
use serde::Serialize;

use crate::fft::CenteredFft2;
use crate::sampling::SamplingMask;

pub use reference::Reference;
pub use zero_filled::ZeroFilled;

/// Why a reconstruction could not run.
#[derive(Debug, thiserror::Error)]
pub enum ReconError {
    /// No method has this identifier.
    #[error("unknown reconstruction method `{0}` (known: {known})", known = known_ids())]
    UnknownMethod(String),
    /// The method cannot use this sampling.
    #[error("method `{method}` cannot use this sampling: {why}")]
    Sampling {
        /// Method identifier.
        method: &'static str,
        /// Reason.
        why: String,
    },
}

/// What a method reconstructs from.
pub struct ReconInput<'a> {
    /// Undersampled k-space `[coil, frame, ky, kx]`, zero where not acquired.
    pub kspace: ArrayView4<'a, Complex32>,
    /// Which lines were acquired.
    pub mask: &'a SamplingMask,
    /// Planned centred FFT for `(ky, kx)`.
    pub fft: &'a CenteredFft2,
}

/// What a method returns for one slice.
#[derive(Debug, Clone)]
pub struct ReconOutput {
    /// Magnitude images `[frame, row, col]`.
    pub images: Array3<f32>,
    /// Iterations run (0 for direct methods).
    pub iterations: usize,
}

/// One reconstruction method.
pub trait Reconstructor: Send + Sync {
    /// Identifier users type (e.g. `zero-filled`).
    fn id(&self) -> &'static str;
    /// One line saying what the method does and its published source.
    fn description(&self) -> &'static str;
    /// Reconstructs one slice.
    ///
    /// # Errors
    /// When the sampling does not suit the method.
    fn reconstruct(&self, input: &ReconInput) -> Result<ReconOutput, ReconError>;
}

/// Every method, in the order they are listed to users.
pub static REGISTRY: &[&dyn Reconstructor] = &[&Reference, &ZeroFilled];

fn known_ids() -> String {
    REGISTRY
        .iter()
        .map(|m| m.id())
        .collect::<Vec<_>>()
        .join(", ")
}

/// The method with identifier `id`.
///
/// # Errors
/// [`ReconError::UnknownMethod`] listing the known identifiers.
pub fn by_id(id: &str) -> Result<&'static dyn Reconstructor, ReconError> {
    REGISTRY
        .iter()
        .copied()
        .find(|m| m.id() == id)
        .ok_or_else(|| ReconError::UnknownMethod(id.to_string()))
}

/// A printable description of one planned reconstruction (for logs and the report).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReconPlan {
    /// Method identifier.
    pub method: String,
    /// Pattern identifier.
    pub pattern: String,
    /// Nominal acceleration.
    pub accel_nominal: f64,
    /// Effective acceleration (all lines ÷ acquired lines).
    pub accel_effective: f64,
}
