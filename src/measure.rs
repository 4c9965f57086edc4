//! Volumetry by the method of discs: slice areas → volume curve → EDV, ESV, SV, EF, rates.
//!
//! ```text
//! area[s][f]  = pixels in mask × row_spacing_mm × col_spacing_mm          (mm²)
//! V[f]        = Σ_s area[s][f] × slice_spacing_mm / 1000                   (ml)
//! EDV = max_f V, ESV = min_f V  (first frame on ties), SV = EDV − ESV, EF = 100·SV/EDV (%)
//! dV/dt[f]    = (V[f+1] − V[f−1]) / (t[f+1] − t[f−1]) × 1000, one-sided at the ends (ml/s)
//! ```
//! Peak ejection rate is `max(−dV/dt)`, peak filling rate `max(dV/dt)`, both positive ml/s.
//! No NaN can come out: an empty blood pool is an error.

use ndarray::{ArrayView4, Axis};
use serde::{Deserialize, Serialize};

use crate::geometry::Geometry;

/// Why a volume curve could not be measured.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum MeasureError {
    /// No blood pool in any frame.
    #[error("the LV blood pool is empty in every frame; nothing to measure")]
    Empty,
    /// Geometry and masks disagree.
    #[error("masks have {masks} frames but the geometry has {geometry} trigger times")]
    Frames {
        /// Frames in the masks.
        masks: usize,
        /// Frames in the geometry.
        geometry: usize,
    },
    /// A fixed ED or ES frame is out of range.
    #[error("fixed {which} frame {frame} is outside the {frames} frames")]
    FixedFrame {
        /// `ED` or `ES`.
        which: &'static str,
        /// Frame given.
        frame: usize,
        /// Frames available.
        frames: usize,
    },
}

/// Clinical numbers of one volume curve, with the result-row keys (DESIGN.md vocabulary).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Numbers {
    /// End-diastolic volume, ml.
    pub edv_ml: f64,
    /// End-systolic volume, ml.
    pub esv_ml: f64,
    /// Stroke volume, ml.
    pub sv_ml: f64,
    /// Ejection fraction, %.
    pub ef_pct: f64,
    /// End-diastolic frame (zero-based).
    pub ed_frame: usize,
    /// End-systolic frame (zero-based).
    pub es_frame: usize,
    /// Heart rate from the R–R interval; `None` (null) when the data gives none.
    pub heart_rate_bpm: Option<f64>,
    /// Peak ejection rate, ml/s (positive); `None` with fewer than 2 frames.
    pub peak_ejection_rate_ml_s: Option<f64>,
    /// Peak filling rate, ml/s; `None` with fewer than 2 frames.
    pub peak_filling_rate_ml_s: Option<f64>,
    /// Volume per frame, ml.
    pub volume_curve_ml: Vec<f64>,
}

/// Clinical numbers of one image series and the slice areas they came from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Volumetry {
    /// Blood-pool area per slice and frame, `[slice][frame]`, mm².
    pub slice_areas_mm2: Vec<Vec<f64>>,
    /// EDV, ESV, SV, EF, phases, rates and the volume curve.
    #[serde(flatten)]
    pub numbers: Numbers,
}

/// Fixed ED/ES frames, when the plan sets them instead of max/min volume.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct PhaseChoice {
    /// Fixed end-diastolic frame.
    pub ed_frame: Option<usize>,
    /// Fixed end-systolic frame.
    pub es_frame: Option<usize>,
}

/// Slice areas `[slice][frame]` in mm² of `[slice, frame, row, col]` masks.
pub fn slice_areas_mm2(masks: ArrayView4<bool>, geom: &Geometry) -> Vec<Vec<f64>> {
    let px = geom.pixel_area_mm2();
    masks
        .axis_iter(Axis(0))
        .map(|slice| {
            slice
                .axis_iter(Axis(0))
                .map(|frame| frame.iter().filter(|&&b| b).count() as f64 * px)
                .collect()
        })
        .collect()
}

/// Measures masks `[slice, frame, row, col]`.
///
/// # Errors
/// See [`volumetry_from_areas`].
pub fn measure(
    masks: ArrayView4<bool>,
    geom: &Geometry,
    phases: PhaseChoice,
) -> Result<Volumetry, MeasureError> {
    volumetry_from_areas(slice_areas_mm2(masks, geom), geom, phases)
}

/// Volumetry from slice areas `[slice][frame]` in mm².
///
/// ```
/// use cinegauge::geometry::Geometry;
/// use cinegauge::measure::{volumetry_from_areas, PhaseChoice};
/// let g = Geometry {
///     row_spacing_mm: 1.5, col_spacing_mm: 1.5, slice_thickness_mm: 8.0, slice_spacing_mm: 10.0,
///     trigger_times_ms: vec![0.0, 400.0], rr_interval_ms: Some(800.0),
/// };
/// // Two slices of 6000 and 4000 mm² at ED, 2500 mm² each at ES, discs 10 mm apart.
/// let v = volumetry_from_areas(vec![vec![6000.0, 2500.0], vec![4000.0, 2500.0]], &g, PhaseChoice::default()).unwrap();
/// let n = &v.numbers;
/// assert_eq!((n.edv_ml, n.esv_ml, n.ef_pct), (100.0, 50.0, 50.0));
/// ```
///
/// # Errors
/// [`MeasureError::Empty`] when every volume is zero, [`MeasureError::Frames`] when the
/// areas and the geometry disagree, [`MeasureError::FixedFrame`] for a fixed frame out of range.
pub fn volumetry_from_areas(
    areas: Vec<Vec<f64>>,
    geom: &Geometry,
    phases: PhaseChoice,
) -> Result<Volumetry, MeasureError> {
    let nf = geom.frames();
    if let Some(bad) = areas.iter().find(|a| a.len() != nf) {
        return Err(MeasureError::Frames {
            masks: bad.len(),
            geometry: nf,
        });
    }
    let curve: Vec<f64> = (0..nf)
        .map(|f| areas.iter().map(|a| a[f]).sum::<f64>() * geom.slice_spacing_mm / 1000.0)
        .collect();
    let argmax = (0..nf).fold(0, |b, f| if curve[f] > curve[b] { f } else { b });
    let argmin = (0..nf).fold(0, |b, f| if curve[f] < curve[b] { f } else { b });
    let check = |which, frame: Option<usize>, default| match frame {
        Some(fr) if fr >= nf => Err(MeasureError::FixedFrame {
            which,
            frame: fr,
            frames: nf,
        }),
        Some(fr) => Ok(fr),
        None => Ok(default),
    };
    let ed = check("ED", phases.ed_frame, argmax)?;
    let es = check("ES", phases.es_frame, argmin)?;
    let (edv, esv) = (curve[ed], curve[es]);
    if nf == 0 || edv <= 0.0 {
        return Err(MeasureError::Empty);
    }
    let sv = edv - esv;
    let rates = rates_ml_s(&curve, &geom.trigger_times_ms);
    Ok(Volumetry {
        slice_areas_mm2: areas,
        numbers: Numbers {
            edv_ml: edv,
            esv_ml: esv,
            sv_ml: sv,
            ef_pct: 100.0 * sv / edv,
            ed_frame: ed,
            es_frame: es,
            heart_rate_bpm: geom.rr_interval_ms.map(|rr| 60_000.0 / rr),
            peak_ejection_rate_ml_s: rates
                .as_ref()
                .map(|d| d.iter().fold(0.0f64, |m, v| m.max(-v))),
            peak_filling_rate_ml_s: rates
                .as_ref()
                .map(|d| d.iter().fold(0.0f64, |m, v| m.max(*v))),
            volume_curve_ml: curve,
        },
    })
}

/// dV/dt in ml/s: central differences inside, one-sided at the two ends (for evenly spaced
/// frames this equals `numpy.gradient(V, t, edge_order=1)`); `None` with fewer than two frames.
fn rates_ml_s(curve: &[f64], t_ms: &[f64]) -> Option<Vec<f64>> {
    let n = curve.len();
    if n < 2 {
        return None;
    }
    Some(
        (0..n)
            .map(|f| {
                let (a, b) = (f.saturating_sub(1), (f + 1).min(n - 1));
                (curve[b] - curve[a]) / (t_ms[b] - t_ms[a]) * 1000.0
            })
            .collect(),
    )
}
