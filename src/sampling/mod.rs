//! Retrospective Cartesian undersampling patterns over `(frame, ky)`.
//!
//! The readout `kx` is always fully sampled; a pattern decides which phase-encode lines
//! `ky` are kept in each frame. Every pattern keeps a fully sampled centre of
//! auto-calibration (ACS) lines around the k-space centre (index `rows / 2`, the DC line
//! of the centred FFT).

use ndarray::{Array2, ArrayViewMut4, Axis};

use num_complex::Complex32;
use serde::Serialize;

mod patterns;

pub use patterns::DensityLaw;

/// Pattern identifiers, as users type them.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Pattern {
    /// Every line in every frame (the `reference` method, R = 1).
    Full,
    /// Every R-th line, the same in every frame, plus the ACS block.
    Equispaced,
    /// Pseudo-random lines drawn from a density law, different in every frame.
    VariableDensity,
    /// A regular lattice sheared from frame to frame; R consecutive frames cover k-space.
    KtLattice,
}

impl Pattern {
    /// Every pattern, in the order they are listed to users.
    pub const ALL: [Pattern; 4] = [
        Pattern::Full,
        Pattern::Equispaced,
        Pattern::VariableDensity,
        Pattern::KtLattice,
    ];

    /// Identifier used on the command line and in results.
    pub fn id(self) -> &'static str {
        match self {
            Pattern::Full => "full",
            Pattern::Equispaced => "equispaced",
            Pattern::VariableDensity => "variable-density",
            Pattern::KtLattice => "kt-lattice",
        }
    }

    /// The pattern named `id`.
    ///
    /// # Errors
    /// [`SamplingError::UnknownPattern`] listing the known identifiers.
    pub fn from_id(id: &str) -> Result<Self, SamplingError> {
        Self::ALL
            .into_iter()
            .find(|p| p.id() == id)
            .ok_or_else(|| SamplingError::UnknownPattern {
                found: id.to_string(),
                known: Self::ALL
                    .iter()
                    .map(|p| p.id())
                    .collect::<Vec<_>>()
                    .join(", "),
            })
    }

    /// One line on what the pattern does and where it comes from.
    pub fn description(self) -> &'static str {
        match self {
            Pattern::Full => "every phase-encode line in every frame (R = 1; the reference)",
            Pattern::Equispaced => {
                "every R-th line, the same in every frame, plus a fully sampled centre \
                 (parallel imaging: SENSE, Pruessmann 1999; GRAPPA, Griswold 2002)"
            }
            Pattern::VariableDensity => {
                "pseudo-random lines, different in every frame, denser near the centre \
                 (incoherent k-t sampling for compressed sensing, Lustig 2007)"
            }
            Pattern::KtLattice => {
                "every R-th line, shifted by `shear` lines from frame to frame, so R consecutive \
                 frames cover k-space (k-t lattice, Tsao 2003)"
            }
        }
    }

    /// Whether R must be a whole number.
    fn needs_whole_r(self) -> bool {
        matches!(self, Pattern::Equispaced | Pattern::KtLattice)
    }
}

/// Why a sampling request was refused.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum SamplingError {
    /// No pattern has this identifier.
    #[error("unknown sampling pattern `{found}` (known: {known})")]
    UnknownPattern {
        /// What was given.
        found: String,
        /// Known identifiers.
        known: String,
    },
    /// Acceleration out of range or not allowed for the pattern.
    #[error("acceleration R = {accel} is not valid for pattern `{pattern}`: {why}")]
    Accel {
        /// Pattern identifier.
        pattern: &'static str,
        /// Requested acceleration.
        accel: f64,
        /// Reason.
        why: String,
    },
    /// ACS block does not fit.
    #[error("{acs} calibration (ACS) lines do not fit in {rows} phase-encode lines")]
    Acs {
        /// Requested ACS lines.
        acs: usize,
        /// Available lines.
        rows: usize,
    },
    /// A pattern parameter is out of range.
    #[error("pattern parameter `{name}`: expected {expected}, found {found}")]
    Parameter {
        /// Parameter name.
        name: &'static str,
        /// Allowed values.
        expected: &'static str,
        /// Value given.
        found: String,
    },
}

/// A sampling request (validated against the matrix when the mask is built).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SamplingSpec {
    /// Pattern.
    pub pattern: Pattern,
    /// Nominal acceleration R: outside the ACS block, one line in R is kept.
    pub accel: f64,
    /// Width of the fully sampled centre, in lines.
    pub acs_lines: usize,
    /// Density law of `variable-density`.
    pub law: DensityLaw,
    /// Lines the `kt-lattice` moves from one frame to the next (coprime with R).
    pub shear: usize,
    /// Seed of the pseudo-random choices of `variable-density`.
    pub rng_seed: u64,
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
            law: DensityLaw::default(),
            shear: 1,
            rng_seed: 1,
        }
    }

    /// Checks and builds a request with default law, shear and seed.
    ///
    /// # Errors
    /// R below 2 or above 24, or not a whole number for `equispaced` and `kt-lattice`.
    pub fn new(pattern: Pattern, accel: f64, acs_lines: usize) -> Result<Self, SamplingError> {
        if pattern == Pattern::Full {
            return Ok(Self::full());
        }
        let err = |why: &str| SamplingError::Accel {
            pattern: pattern.id(),
            accel,
            why: why.into(),
        };
        if !accel.is_finite() || accel < 1.0 {
            return Err(err("R must be at least 1"));
        }
        if !(2.0..=24.0).contains(&accel) {
            return Err(err(
                "undersampled patterns take R from 2 to 24 (use `full` for R = 1)",
            ));
        }
        if pattern.needs_whole_r() && accel.fract() != 0.0 {
            return Err(err("this pattern needs a whole-number R"));
        }
        Ok(SamplingSpec {
            pattern,
            accel,
            acs_lines,
            ..Self::full()
        })
    }

    /// The same request with another seed for pseudo-random choices.
    pub fn with_rng_seed(mut self, seed: u64) -> Self {
        self.rng_seed = seed;
        self
    }

    /// Builds the mask for `frames × rows` phase-encode positions.
    ///
    /// # Errors
    /// When the ACS block is wider than the matrix, R exceeds the phase encodes, or the
    /// lattice shear is not coprime with R.
    pub fn mask(&self, frames: usize, rows: usize) -> Result<SamplingMask, SamplingError> {
        if self.acs_lines > rows {
            return Err(SamplingError::Acs {
                acs: self.acs_lines,
                rows,
            });
        }
        if self.accel > rows as f64 {
            return Err(SamplingError::Accel {
                pattern: self.pattern.id(),
                accel: self.accel,
                why: format!("larger than the {rows} phase-encode lines"),
            });
        }
        let lines = patterns::lines(self, frames, rows)?;
        Ok(SamplingMask {
            lines,
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

    /// Sampling density of each `ky` line: the fraction of acquired lines over all frames
    /// and a window of `round(R)` neighbouring lines. It is 1 in the ACS block and `1/R` in
    /// the periphery of `equispaced` and `kt-lattice` (each window of R lines holds exactly
    /// one acquired line per frame), and the local mean density of `variable-density`.
    /// Used for density compensation of zero-filled data.
    pub fn density(&self) -> ndarray::Array1<f32> {
        let (frames, rows) = self.lines.dim();
        let len = (self.accel_nominal.round() as usize).clamp(1, rows);
        let back = (len - 1) / 2;
        let per_line: Vec<usize> = (0..rows)
            .map(|ky| self.lines.column(ky).iter().filter(|&&b| b).count())
            .collect();
        ndarray::Array1::from_shape_fn(rows, |ky| {
            let lo = ky.saturating_sub(back);
            let hi = (lo + len).min(rows);
            let lo = hi.saturating_sub(len);
            let hits: usize = per_line[lo..hi].iter().sum();
            hits.max(1) as f32 / ((hi - lo) * frames) as f32
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
