//! Line selection of each pattern over `(frame, ky)`.
//!
//! All patterns keep the ACS block `[c − acs/2, c − acs/2 + acs)` around the centre line
//! `c = rows / 2` in every frame; R applies to the lines outside it.

use ndarray::Array2;
use rand::RngExt;
use serde::{Deserialize, Serialize};

use super::{Pattern, SamplingError, SamplingSpec};

/// Density law of `variable-density` as a function of the distance `d ∈ [0, 1]` from the
/// k-space centre (relative to half the matrix).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "law", rename_all = "kebab-case")]
pub enum DensityLaw {
    /// `w(d) = (1 − d)^power + floor`.
    Polynomial {
        /// Exponent (larger: denser centre).
        power: f64,
    },
    /// `w(d) = exp(−d² / (2·width²)) + floor`.
    Gaussian {
        /// Standard deviation relative to half the matrix.
        width: f64,
    },
}

impl Default for DensityLaw {
    fn default() -> Self {
        DensityLaw::Polynomial { power: 2.0 }
    }
}

/// Small weight every line keeps, so the edge of k-space is never left out entirely.
const DENSITY_FLOOR: f64 = 0.02;

impl DensityLaw {
    /// The law in words, with its floor (for the report).
    pub fn describe(self) -> String {
        match self {
            DensityLaw::Polynomial { power } => {
                format!("polynomial (1 − d)^{power} + {DENSITY_FLOOR}")
            }
            DensityLaw::Gaussian { width } => {
                format!("Gaussian exp(−d²/(2·{width}²)) + {DENSITY_FLOOR}")
            }
        }
    }

    fn weight(self, d: f64) -> f64 {
        let d = d.clamp(0.0, 1.0);
        DENSITY_FLOOR
            + match self {
                DensityLaw::Polynomial { power } => (1.0 - d).powf(power),
                DensityLaw::Gaussian { width } => (-d * d / (2.0 * width * width)).exp(),
            }
    }
}

fn gcd(a: usize, b: usize) -> usize {
    if b == 0 {
        a
    } else {
        gcd(b, a % b)
    }
}

/// `[frame, ky]` acquisition table for `spec`.
pub(super) fn lines(
    spec: &SamplingSpec,
    frames: usize,
    rows: usize,
) -> Result<Array2<bool>, SamplingError> {
    let centre = rows / 2;
    let acs_lo = centre - spec.acs_lines.min(rows) / 2;
    let acs_hi = (acs_lo + spec.acs_lines).min(rows);
    let in_acs = |ky: usize| ky >= acs_lo && ky < acs_hi;
    let r = spec.accel.round() as usize;
    let mut m = Array2::from_elem((frames, rows), false);
    match spec.pattern {
        Pattern::Full => m.fill(true),
        Pattern::Equispaced => {
            m.indexed_iter_mut()
                .for_each(|((_, ky), v)| *v = in_acs(ky) || ky.abs_diff(centre).is_multiple_of(r));
        }
        Pattern::KtLattice => {
            if spec.shear == 0 || gcd(spec.shear, r) != 1 {
                return Err(SamplingError::Parameter {
                    name: "shear",
                    expected: "a whole number ≥ 1 with no common factor with R",
                    found: format!("{} (R = {r})", spec.shear),
                });
            }
            m.indexed_iter_mut().for_each(|((f, ky), v)| {
                let shift = (f * spec.shear) % r;
                *v = in_acs(ky) || (ky + r * rows - centre - shift).is_multiple_of(r);
            });
        }
        Pattern::VariableDensity => {
            let outer: Vec<usize> = (0..rows).filter(|&ky| !in_acs(ky)).collect();
            let want = ((outer.len() as f64) / spec.accel).round() as usize;
            let half = (rows as f64 / 2.0).max(1.0);
            for f in 0..frames {
                // Weighted sampling without replacement (Efraimidis & Spirakis 2006): keep
                // the `want` lines with the largest key u^(1/w).
                let mut rng = crate::rng::stream(spec.rng_seed, 0x5A4D_0000 + f as u64);
                let mut keyed: Vec<(f64, usize)> = outer
                    .iter()
                    .map(|&ky| {
                        let w = spec.law.weight(ky.abs_diff(centre) as f64 / half);
                        let u: f64 = rng.random_range(f64::MIN_POSITIVE..1.0);
                        (u.ln() / w, ky)
                    })
                    .collect();
                keyed.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
                for &(_, ky) in keyed.iter().take(want) {
                    m[(f, ky)] = true;
                }
                for ky in acs_lo..acs_hi {
                    m[(f, ky)] = true;
                }
            }
        }
    }
    Ok(m)
}
