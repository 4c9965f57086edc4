//! Temporal fidelity: how far a method's volume–time curve lies from the reference's, and how
//! its peak ejection and filling rates (ml/s, from the volume curve) change.

use serde::Serialize;

use super::{check_pairs, StatsError};

/// Error of a volume–time curve against the reference's, frame by frame.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CurveError {
    /// Root-mean-square difference (ml).
    pub rms_ml: f64,
    /// Largest absolute difference (ml).
    pub max_abs_ml: f64,
    /// RMS difference as a percentage of the reference's largest volume (EDV).
    pub rms_pct_of_edv: f64,
}

/// Frame-by-frame error of `curve` against `reference`.
///
/// # Errors
/// Curves of different lengths, fewer than 2 frames, non-finite or non-positive volumes.
pub fn curve_error(curve: &[f64], reference: &[f64]) -> Result<CurveError, StatsError> {
    check_pairs("volume-curve error", curve, reference, 2)?;
    let edv = reference.iter().copied().fold(f64::MIN, f64::max);
    if edv <= 0.0 {
        return Err(StatsError::ZeroVariance {
            what: "volume-curve error",
            detail: "the reference curve (no positive volume)",
        });
    }
    let sq: f64 = curve
        .iter()
        .zip(reference)
        .map(|(a, b)| (a - b).powi(2))
        .sum();
    let rms = (sq / curve.len() as f64).sqrt();
    let max_abs = curve
        .iter()
        .zip(reference)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    Ok(CurveError {
        rms_ml: rms,
        max_abs_ml: max_abs,
        rms_pct_of_edv: 100.0 * rms / edv,
    })
}

/// Change of a rate against the reference's, in its unit and in percent of the reference.
pub fn rate_change(rate: f64, reference: f64) -> (f64, Option<f64>) {
    let d = rate - reference;
    (d, (reference != 0.0).then(|| 100.0 * d / reference))
}
