//! Agreement statistics: plain functions on slices of numbers, each with its published source.
//!
//! Differences are always first minus second (`a − b`): in the pipeline, the method minus the
//! fully sampled reference.

pub mod bland_altman;
pub mod concordance;
pub mod dist;
pub mod icc;
pub mod image_quality;
pub mod kappa;
pub mod overlap;
pub mod paired;
pub mod sample_size;
pub mod temporal;

/// Why a statistic cannot be computed from the numbers given.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StatsError {
    /// Too few values.
    #[error("{what}: {n} values, at least {min} are needed")]
    TooFew {
        /// What was being computed.
        what: &'static str,
        /// Values given.
        n: usize,
        /// Values needed.
        min: usize,
    },
    /// Two columns of different lengths.
    #[error("{what}: the columns differ in length ({a} and {b} values)")]
    Unequal {
        /// What was being computed.
        what: &'static str,
        /// First length.
        a: usize,
        /// Second length.
        b: usize,
    },
    /// A value that is not a finite number.
    #[error("{what}: value #{index} is not a finite number")]
    NonFinite {
        /// What was being computed.
        what: &'static str,
        /// One-based position.
        index: usize,
    },
    /// A parameter out of range.
    #[error("{what}: {detail}")]
    Parameter {
        /// What was being computed.
        what: &'static str,
        /// What is wrong.
        detail: String,
    },
    /// All values equal where spread is needed.
    #[error("{what}: {detail} has zero variance, so the statistic is undefined")]
    ZeroVariance {
        /// What was being computed.
        what: &'static str,
        /// Which quantity.
        detail: &'static str,
    },
}

/// Checks a pair of columns: equal lengths, at least `min` values, all finite.
pub(crate) fn check_pairs(
    what: &'static str,
    a: &[f64],
    b: &[f64],
    min: usize,
) -> Result<(), StatsError> {
    if a.len() != b.len() {
        return Err(StatsError::Unequal {
            what,
            a: a.len(),
            b: b.len(),
        });
    }
    check_values(what, a, min)?;
    check_values(what, b, min)
}

/// Checks one column: at least `min` values, all finite.
pub(crate) fn check_values(what: &'static str, v: &[f64], min: usize) -> Result<(), StatsError> {
    if v.len() < min {
        return Err(StatsError::TooFew {
            what,
            n: v.len(),
            min,
        });
    }
    if let Some(i) = v.iter().position(|x| !x.is_finite()) {
        return Err(StatsError::NonFinite { what, index: i + 1 });
    }
    Ok(())
}

/// Arithmetic mean.
pub(crate) fn mean(v: &[f64]) -> f64 {
    v.iter().sum::<f64>() / v.len() as f64
}

/// Sample variance (divisor n − 1).
pub(crate) fn variance(v: &[f64]) -> f64 {
    let m = mean(v);
    v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (v.len() as f64 - 1.0)
}
