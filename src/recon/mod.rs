//! Reconstruction methods behind one [`Reconstructor`] interface, chosen by identifier.
//!
//! A method receives one slice of multi-coil k-space `[coil, frame, ky, kx]` with the
//! lines that were not acquired set to zero, the sampling mask and a planned FFT, and
//! returns magnitude images `[frame, row, col]`. The [`REGISTRY`] lists every method; the
//! command-line help and the report's methods section are generated from it.

mod cg_sense;
pub mod coils;
mod grappa;
mod kernels;
pub mod low_rank_sparse;
pub mod operator;
pub mod params;
mod reference;
mod sparsity;
pub mod sums;
mod temporal_tv;
mod xf_sparse;
mod zero_filled;

use ndarray::{Array3, ArrayView3, ArrayView4};
use num_complex::Complex32;
use serde::Serialize;

use crate::fft::CenteredFft2;
use crate::sampling::SamplingMask;

pub use cg_sense::CgSense;
pub use grappa::Grappa;
pub use low_rank_sparse::LowRankSparse;
pub use params::{ParamSpec, Params};
pub use reference::Reference;
pub use temporal_tv::TemporalTv;
pub use xf_sparse::XfSparse;
pub use zero_filled::ZeroFilled;

/// Why a reconstruction could not run.
#[derive(Debug, thiserror::Error)]
pub enum ReconError {
    /// No method has this identifier.
    #[error("unknown reconstruction method `{0}` (known: {known})", known = known_ids())]
    UnknownMethod(String),
    /// Inputs of the wrong shape.
    #[error("{what}: expected {expected}, found {found}")]
    Shape {
        /// What is wrong.
        what: &'static str,
        /// Expected shape.
        expected: String,
        /// Found shape.
        found: String,
    },
    /// A `--set` parameter is unknown, not a number or out of range.
    #[error("method `{method}`: parameter `{key}`: {why}")]
    Parameter {
        /// Method identifier.
        method: &'static str,
        /// Parameter name as given.
        key: String,
        /// What is wrong.
        why: String,
    },
    /// The k-space holds a value that is not finite.
    #[error(
        "k-space value {value} at [coil {coil}, frame {frame}, ky {ky}, kx {kx}] is not finite"
    )]
    NonFinite {
        /// The value.
        value: String,
        /// Coil.
        coil: usize,
        /// Frame.
        frame: usize,
        /// Phase-encode line.
        ky: usize,
        /// Readout sample.
        kx: usize,
    },
    /// The result holds a value that is not finite (a diverging method).
    #[error("method `{method}` produced a non-finite image value; check its parameters")]
    Diverged {
        /// Method identifier.
        method: &'static str,
    },
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
    /// Coil sensitivities `[coil, row, col]` when known; otherwise methods that need them
    /// estimate them from the calibration block.
    pub sens: Option<ArrayView3<'a, Complex32>>,
}

impl ReconInput<'_> {
    /// Checks shapes and values once, before any method runs.
    ///
    /// # Errors
    /// [`ReconError::Shape`] or [`ReconError::NonFinite`] naming what is wrong.
    pub fn check(&self) -> Result<(), ReconError> {
        let (nc, nf, ny, nx) = self.kspace.dim();
        if (nf, ny) != self.mask.lines.dim() || (ny, nx) != self.fft.shape() {
            return Err(ReconError::Shape {
                what: "k-space",
                expected: format!(
                    "[coil, {}, {}, {}] to match the mask and FFT",
                    self.mask.lines.nrows(),
                    self.fft.shape().0,
                    self.fft.shape().1
                ),
                found: format!("{:?}", self.kspace.dim()),
            });
        }
        if let Some(s) = &self.sens {
            if s.dim() != (nc, ny, nx) {
                return Err(ReconError::Shape {
                    what: "coil sensitivities",
                    expected: format!("[{nc}, {ny}, {nx}] to match the k-space"),
                    found: format!("[{}, {}, {}]", s.dim().0, s.dim().1, s.dim().2),
                });
            }
        }
        // A branch-free scan first (it vectorises); the indexed search only to name the value.
        let finite = |v: &Complex32| v.re.is_finite() & v.im.is_finite();
        let all_finite = match self.kspace.as_slice() {
            Some(values) => values.iter().fold(true, |ok, v| ok & finite(v)),
            None => self.kspace.iter().all(finite),
        };
        if all_finite {
            return Ok(());
        }
        if let Some(((c, f, ky, kx), v)) = self.kspace.indexed_iter().find(|(_, v)| !finite(v)) {
            return Err(ReconError::NonFinite {
                value: v.to_string(),
                coil: c,
                frame: f,
                ky,
                kx,
            });
        }
        Ok(())
    }
}

/// What a method returns for one slice.
#[derive(Debug, Clone)]
pub struct ReconOutput {
    /// Magnitude images `[frame, row, col]`.
    pub images: Array3<f32>,
    /// Iterations run (0 for direct methods).
    pub iterations: usize,
    /// Relative residual (or relative change) after each iteration.
    pub residuals: Vec<f64>,
}

/// One reconstruction method.
pub trait Reconstructor: Send + Sync {
    /// Identifier users type (e.g. `zero-filled`).
    fn id(&self) -> &'static str;
    /// One line saying what the method does and its published source.
    fn description(&self) -> &'static str;
    /// Parameters accepted with `--set`, with defaults and ranges.
    fn params(&self) -> &'static [ParamSpec];
    /// Reconstructs one slice. Callers use [`run`], which checks the input first.
    ///
    /// # Errors
    /// When the sampling does not suit the method.
    fn reconstruct(&self, input: &ReconInput, params: &Params) -> Result<ReconOutput, ReconError>;
}

/// Every method, in the order they are listed to users.
pub static REGISTRY: &[&dyn Reconstructor] = &[
    &Reference,
    &ZeroFilled,
    &CgSense,
    &Grappa,
    &XfSparse,
    &TemporalTv,
    &LowRankSparse,
];

/// Checks the input, runs `method`, and refuses a result with non-finite values.
///
/// # Errors
/// As [`ReconInput::check`] and the method; [`ReconError::Diverged`] for NaN or ∞ output.
pub fn run(
    method: &dyn Reconstructor,
    input: &ReconInput,
    params: &Params,
) -> Result<ReconOutput, ReconError> {
    input.check()?;
    let out = method.reconstruct(input, params)?;
    if out.images.iter().any(|v| !v.is_finite()) {
        return Err(ReconError::Diverged {
            method: method.id(),
        });
    }
    Ok(out)
}

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
