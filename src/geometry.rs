//! Geometry and timing of an image or k-space stack, and its `geometry.json` sidecar.
//!
//! The sidecar is read as given ([`GeometrySidecar`], unknown keys kept aside so the
//! caller can warn), then validated once into a [`Geometry`] that later stages trust.

use std::collections::BTreeMap;
use std::path::Path;

use serde::{Deserialize, Serialize};

/// What is wrong with a geometry: the file, the field, what was found and what was expected.
#[derive(Debug, thiserror::Error)]
pub enum GeometryError {
    /// The sidecar could not be read.
    #[error("{path}: cannot read: {source}")]
    Read {
        /// File at fault.
        path: String,
        /// Underlying error.
        source: std::io::Error,
    },
    /// The sidecar is not valid JSON of the expected shape.
    #[error("{path}: not a valid geometry sidecar: {message}")]
    Parse {
        /// File at fault.
        path: String,
        /// Parser message (names line and column).
        message: String,
    },
    /// A field has an impossible value.
    #[error("{origin}: field `{field}`: expected {expected}, found {found}")]
    Field {
        /// File (or other origin) at fault.
        origin: String,
        /// Field name.
        field: &'static str,
        /// What was expected.
        expected: String,
        /// What was found.
        found: String,
    },
}

/// The `geometry.json` sidecar as written on disk (DESIGN.md conventions).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct GeometrySidecar {
    /// In-plane pixel spacing `[row_mm, col_mm]`.
    pub pixel_spacing_mm: Vec<f64>,
    /// Slice thickness in mm.
    pub slice_thickness_mm: f64,
    /// Centre-to-centre slice spacing in mm (thickness + gap).
    pub slice_spacing_mm: f64,
    /// Trigger time of each frame in ms (either this or `frame_interval_ms`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub trigger_times_ms: Option<Vec<f64>>,
    /// Constant frame interval in ms.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub frame_interval_ms: Option<f64>,
    /// R–R interval in ms, if known.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rr_interval_ms: Option<f64>,
    /// Keys this tool does not know; ignored with a warning.
    #[serde(flatten, skip_serializing)]
    pub unknown: BTreeMap<String, serde_json::Value>,
}

/// Validated geometry and timing of a `[slice, frame, row, col]` stack.
#[derive(Debug, Clone, PartialEq)]
pub struct Geometry {
    /// Pixel spacing along rows (between row centres) in mm.
    pub row_spacing_mm: f64,
    /// Pixel spacing along columns in mm.
    pub col_spacing_mm: f64,
    /// Slice thickness in mm.
    pub slice_thickness_mm: f64,
    /// Centre-to-centre slice spacing in mm.
    pub slice_spacing_mm: f64,
    /// Trigger time of each frame in ms, strictly increasing.
    pub trigger_times_ms: Vec<f64>,
    /// R–R interval in ms if given by the data.
    pub rr_interval_ms: Option<f64>,
}

fn positive(origin: &str, field: &'static str, v: f64) -> Result<f64, GeometryError> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(GeometryError::Field {
            origin: origin.to_string(),
            field,
            expected: "a positive finite number".into(),
            found: format!("{v}"),
        })
    }
}

impl Geometry {
    /// In-plane pixel spacing `(row, col)` in mm.
    pub fn pixel_mm(&self) -> (f64, f64) {
        (self.row_spacing_mm, self.col_spacing_mm)
    }

    /// Validates a sidecar for a stack with `frames` frames. `origin` names the file in errors.
    ///
    /// # Errors
    /// A [`GeometryError::Field`] naming the first field that is missing or impossible.
    pub fn from_sidecar(
        s: &GeometrySidecar,
        frames: usize,
        origin: &str,
    ) -> Result<Self, GeometryError> {
        let field = |field: &'static str, expected: String, found: String| GeometryError::Field {
            origin: origin.to_string(),
            field,
            expected,
            found,
        };
        if s.pixel_spacing_mm.len() != 2 {
            return Err(field(
                "pixel_spacing_mm",
                "2 positive values [row_mm, col_mm]".into(),
                format!("{} values", s.pixel_spacing_mm.len()),
            ));
        }
        let row = positive(origin, "pixel_spacing_mm", s.pixel_spacing_mm[0])?;
        let col = positive(origin, "pixel_spacing_mm", s.pixel_spacing_mm[1])?;
        let thick = positive(origin, "slice_thickness_mm", s.slice_thickness_mm)?;
        let spacing = positive(origin, "slice_spacing_mm", s.slice_spacing_mm)?;
        if spacing + 1e-9 < thick {
            // Overlapping slices are legal in acquisition but make discs overlap; refuse
            // rather than silently double-count.
            return Err(field(
                "slice_spacing_mm",
                format!("at least slice_thickness_mm ({thick}) (centre-to-centre distance)"),
                format!("{spacing}"),
            ));
        }
        let times = match (&s.trigger_times_ms, s.frame_interval_ms) {
            (Some(_), Some(_)) => {
                return Err(field(
                    "trigger_times_ms",
                    "either trigger_times_ms or frame_interval_ms, not both".into(),
                    "both".into(),
                ))
            }
            (None, None) => {
                return Err(field(
                    "trigger_times_ms",
                    "trigger_times_ms (one per frame) or frame_interval_ms".into(),
                    "neither".into(),
                ))
            }
            (Some(t), None) => {
                if t.len() != frames {
                    return Err(field(
                        "trigger_times_ms",
                        format!("{frames} values (one per frame)"),
                        format!("{} values", t.len()),
                    ));
                }
                if t.iter().any(|v| !v.is_finite() || *v < 0.0)
                    || t.windows(2).any(|w| w[1] <= w[0])
                {
                    return Err(field(
                        "trigger_times_ms",
                        "finite, non-negative, strictly increasing times".into(),
                        format!("{t:?}"),
                    ));
                }
                t.clone()
            }
            (None, Some(dt)) => {
                let dt = positive(origin, "frame_interval_ms", dt)?;
                (0..frames).map(|f| f as f64 * dt).collect()
            }
        };
        let rr = match s.rr_interval_ms {
            Some(rr) => {
                let rr = positive(origin, "rr_interval_ms", rr)?;
                if let Some(last) = times.last() {
                    if *last >= rr {
                        return Err(field(
                            "rr_interval_ms",
                            format!("longer than the last trigger time ({last} ms)"),
                            format!("{rr}"),
                        ));
                    }
                }
                Some(rr)
            }
            None => None,
        };
        Ok(Geometry {
            row_spacing_mm: row,
            col_spacing_mm: col,
            slice_thickness_mm: thick,
            slice_spacing_mm: spacing,
            trigger_times_ms: times,
            rr_interval_ms: rr,
        })
    }

    /// The sidecar that describes this geometry (trigger times written explicitly).
    pub fn to_sidecar(&self) -> GeometrySidecar {
        GeometrySidecar {
            pixel_spacing_mm: vec![self.row_spacing_mm, self.col_spacing_mm],
            slice_thickness_mm: self.slice_thickness_mm,
            slice_spacing_mm: self.slice_spacing_mm,
            trigger_times_ms: Some(self.trigger_times_ms.clone()),
            frame_interval_ms: None,
            rr_interval_ms: self.rr_interval_ms,
            unknown: BTreeMap::new(),
        }
    }

    /// Area of one pixel in mm².
    pub fn pixel_area_mm2(&self) -> f64 {
        self.row_spacing_mm * self.col_spacing_mm
    }

    /// Number of frames.
    pub fn frames(&self) -> usize {
        self.trigger_times_ms.len()
    }

    /// Length of the cardiac cycle in ms: the R–R interval when known, otherwise the
    /// number of frames times the mean frame interval (the cine is assumed to cover one
    /// cycle, as retrospectively gated cines do). `None` with fewer than two frames and no R–R.
    pub fn cycle_ms(&self) -> Option<f64> {
        if let Some(rr) = self.rr_interval_ms {
            return Some(rr);
        }
        let n = self.trigger_times_ms.len();
        if n < 2 {
            return None;
        }
        let span = self.trigger_times_ms[n - 1] - self.trigger_times_ms[0];
        Some(span / (n - 1) as f64 * n as f64)
    }
}

/// Reads `geometry.json` from `path`. Returns the sidecar and the unknown keys (to warn about).
///
/// # Errors
/// [`GeometryError::Read`] or [`GeometryError::Parse`] naming the file.
pub fn read_sidecar(path: &Path) -> Result<GeometrySidecar, GeometryError> {
    let text = std::fs::read_to_string(path).map_err(|source| GeometryError::Read {
        path: path.display().to_string(),
        source,
    })?;
    crate::json::parse(&text).map_err(|message| GeometryError::Parse {
        path: path.display().to_string(),
        message,
    })
}
