//! Retrospective Cartesian undersampling patterns over `(frame, ky)`.
//!
//! The readout `kx` is always fully sampled; a pattern decides which phase-encode lines
//! `ky` are kept in each frame. Every pattern keeps a fully sampled centre of
//! auto-calibration (ACS) lines around the k-space centre (index `rows / 2`, the DC line
//! of the centred FFT).

use ndarray::{Array2, ArrayViewMut4, Axis};
use num_complex::Complex32;
use serde::Serialize;

/// Pattern identifiers, as users type them.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Pattern {
    /// Every line in every frame (the `reference` method, R = 1).
    Full,
    /// Every R-th line, the same in every frame, plus the ACS block.
    Equispaced,
}

impl Pattern {
    /// Identifier used on the command line and in results.
    pub fn id(self) -> &'static str {
        match self {
            Pattern::Full => "full",
            Pattern::Equispaced => "equispaced",
        }
    }
}

/// Why a sampling request was refused.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum SamplingError {
    /// Acceleration out of range or not allowed for the pattern.
    #[error("acceleration {accel} is not valid for pattern `{pattern}`: {why}")]
    Accel {
        /// Pattern identifier.
        pattern: &'static str,
        /// Requested acceleration.
        accel: f64,
        /// Reason.
        why: &'static str,
    },
    /// ACS block does not fit.
    #[error("{acs} calibration lines do not fit in {rows} phase-encode lines")]
    Acs {
        /// Requested ACS lines.
        acs: usize,
        /// Available lines.
        rows: usize,
    },
}

/// A validated sampling request.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SamplingSpec {
    /// Pattern.
    pub pattern: Pattern,
    /// Nominal acceleration R (lines outside the ACS block are kept every R-th).
    pub accel: f64,
    /// Width of the fully sampled centre, in lines.
    pub acs_lines: usize,
}

/// Default width of the fully sampled centre (common practice for cine calibration: 16–24 lines).
pub const DEFAULT_ACS_LINES: usize = 16;

impl SamplingSpec {
    /// The fully sampled pattern.
    pub fn full() -> Self {
        SamplingSpec {
            pattern: Pattern::Full,
            accel: 1.0,
            acs_lines: 0,
        }
    }

    /// Checks and builds a request.
    ///
    /// # Errors
    /// R outside 2–24, a non-integer R for `equispaced`.
    pub fn new(pattern: Pattern, accel: f64, acs_lines: usize) -> Result<Self, SamplingError> {
        match pattern {
            Pattern::Full => Ok(Self::full()),
            Pattern::Equispaced => {
                let err = |why| SamplingError::Accel {
                    pattern: pattern.id(),
                    accel,
                    why,
                };
                if !(2.0..=24.0).contains(&accel) {
                    return Err(err("R must lie between 2 and 24"));
                }
                if accel.fract() != 0.0 {
                    return Err(err("equispaced sampling needs a whole-number R"));
                }
                Ok(SamplingSpec {
                    pattern,
                    accel,
                    acs_lines,
                })
            }
        }
    }

    /// Builds the mask for `frames × rows` phase-encode positions.
    ///
    /// # Errors
    /// When the ACS block is wider than the matrix.
    pub fn mask(&self, frames: usize, rows: usize) -> Result<SamplingMask, SamplingError> {
        if self.acs_lines > rows {
            return Err(SamplingError::Acs {
                acs: self.acs_lines,
                rows,
            });
        }
        let centre = rows / 2;
        let acs_lo = centre - self.acs_lines / 2;
        let acs_hi = acs_lo + self.acs_lines;
        let r = self.accel.round() as usize;
        let m = Array2::from_shape_fn((frames, rows), |(_, ky)| match self.pattern {
            Pattern::Full => true,
            Pattern::Equispaced => (ky >= acs_lo && ky < acs_hi) || (ky.abs_diff(centre) % r == 0),
        });
        Ok(SamplingMask {
            lines: m,
            accel_nominal: self.accel,
            pattern: self.pattern,
        })
    }
}

/// Which `(frame, ky)` lines are acquired.
#[derive(Debug, Clone, PartialEq)]
pub struct SamplingMask {
    /// `[frame, ky]`, true where the line is acquired.
    pub lines: Array2<bool>,
    /// Nominal acceleration.
    pub accel_nominal: f64,
    /// Pattern that made it.
    pub pattern: Pattern,
}

impl SamplingMask {
    /// Effective acceleration: all lines ÷ acquired lines (ACS included).
    ///
    /// ```
    /// use cinegauge::sampling::{Pattern, SamplingSpec};
    /// // 64 lines, R = 4, 8 ACS lines: ACS 28..=35 (8), and lines with |ky − 32| divisible
    /// // by 4 outside it, 0, 4, …, 24 (7) and 36, …, 60 (7): 22 lines in all.
    /// let m = SamplingSpec::new(Pattern::Equispaced, 4.0, 8).unwrap().mask(1, 64).unwrap();
    /// assert!((m.accel_effective() - 64.0 / 22.0).abs() < 1e-12);
    /// ```
    pub fn accel_effective(&self) -> f64 {
        let acquired = self.lines.iter().filter(|&&b| b).count();
        self.lines.len() as f64 / acquired.max(1) as f64
    }

    /// True when every line is acquired.
    pub fn is_full(&self) -> bool {
        self.lines.iter().all(|&b| b)
    }

    /// Lines acquired in every frame, as a contiguous block around the centre (the ACS
    /// block usable for calibration): `(first, end)` half-open, or `None`.
    pub fn calibration_block(&self) -> Option<(usize, usize)> {
        let rows = self.lines.ncols();
        let all = |ky: usize| self.lines.column(ky).iter().all(|&b| b);
        let centre = rows / 2;
        if !all(centre) {
            return None;
        }
        let mut lo = centre;
        while lo > 0 && all(lo - 1) {
            lo -= 1;
        }
        let mut hi = centre + 1;
        while hi < rows && all(hi) {
            hi += 1;
        }
        Some((lo, hi))
    }

    /// Sampling density of each `(frame, ky)` line, from a sliding window of `round(R)`
    /// lines: 1 in the ACS block, `1/R` in the equispaced periphery. Used for density
    /// compensation of zero-filled data.
    pub fn density(&self) -> Array2<f32> {
        let (frames, rows) = self.lines.dim();
        let len = (self.accel_nominal.round() as usize).max(1);
        let back = (len - 1) / 2;
        Array2::from_shape_fn((frames, rows), |(f, ky)| {
            let lo = ky.saturating_sub(back);
            let hi = (lo + len).min(rows);
            let lo = hi.saturating_sub(len);
            let hits = (lo..hi).filter(|&k| self.lines[(f, k)]).count();
            hits.max(1) as f32 / (hi - lo) as f32
        })
    }

    /// Zeroes the lines that are not acquired in `[coil, frame, ky, kx]` k-space.
    ///
    /// # Panics
    /// If the frame or ky sizes differ from the mask.
    pub fn apply(&self, mut kspace: ArrayViewMut4<Complex32>) {
        let (_, nf, nky, _) = kspace.dim();
        assert_eq!(
            (nf, nky),
            self.lines.dim(),
            "k-space (frame, ky) {:?} does not match the mask {:?}",
            (nf, nky),
            self.lines.dim()
        );
        for mut coil in kspace.axis_iter_mut(Axis(0)) {
            for ((f, ky), &keep) in self.lines.indexed_iter() {
                if !keep {
                    coil.slice_mut(ndarray::s![f, ky, ..])
                        .fill(Complex32::default());
                }
            }
        }
    }
}
