//! Shape of the synthetic left ventricle through the cardiac cycle, with exact volumes.
//!
//! The LV cavity is a prolate ellipsoid with semi-axes `a`, `b` (in-plane) and `c` (along
//! the slice normal), truncated by a base plane at height `τ·c` above its centre. Its volume
//! is, by integrating the elliptical cross-sections `π·a·b·(1 − u²/c²)` from the apex
//! (`u = −c`) to the base (`u = τ·c`) (textbook solid geometry):
//!
//! ```text
//! V = π·a·b·(τ·c − τ³·c/3 + 2·c/3)
//! ```
//!
//! The apex stays fixed and the base descends in systole (longitudinal shortening). The
//! epicardium is the ellipsoid with semi-axes `a+w, b+w, c+w` about the same centre, cut
//! by the same base plane; `w` is solved per frame so the myocardial volume is constant,
//! which thickens the wall in systole.

use std::f64::consts::PI;

/// Base-plane height above the ellipsoid centre, as a fraction of `c`.
pub const TRUNCATION: f64 = 0.8;
/// In-plane aspect ratio `b / a` of the cavity.
pub const ASPECT_B_OVER_A: f64 = 0.92;
/// Long-to-short semi-axis ratio `c / a` at end-diastole.
pub const ELONGATION_ED: f64 = 1.9;
/// Exponent of longitudinal shortening: `c ∝ (V/EDV)^k`.
pub const LONGITUDINAL_EXPONENT: f64 = 0.2;
/// End-diastolic wall thickness in mm.
pub const WALL_ED_MM: f64 = 9.0;

/// Knots of the volume curve: (phase in the R–R interval, fraction of stroke volume still
/// ejected, 0 = at EDV, 1 = at ESV). ED at 0, end-systole at 0.36, rapid filling to 0.58
/// (75 % refilled), diastasis to 0.82 (85 %), atrial contraction back to EDV at 1.
const KNOTS: [(f64, f64); 5] = [
    (0.0, 0.0),
    (0.36, 1.0),
    (0.58, 0.25),
    (0.82, 0.15),
    (1.0, 0.0),
];

/// Physiological LV volume at `phase ∈ [0, 1)` of the R–R interval, in ml.
///
/// Half-cosine interpolation between knots: smooth, monotone between knots, with zero
/// slope at each knot, so ED and ES are exact extrema.
///
/// ```
/// use cinegauge::phantom::anatomy::volume_at_phase;
/// assert_eq!(volume_at_phase(150.0, 60.0, 0.0), 150.0);
/// assert!((volume_at_phase(150.0, 60.0, 0.36) - 60.0).abs() < 1e-9);
/// ```
pub fn volume_at_phase(edv_ml: f64, esv_ml: f64, phase: f64) -> f64 {
    let p = phase.rem_euclid(1.0);
    let sv = edv_ml - esv_ml;
    for w in KNOTS.windows(2) {
        let ((p0, f0), (p1, f1)) = (w[0], w[1]);
        if p >= p0 && p <= p1 {
            let s = (p - p0) / (p1 - p0);
            let f = f0 + (f1 - f0) * (1.0 - (PI * s).cos()) / 2.0;
            return edv_ml - f * sv;
        }
    }
    edv_ml
}

/// Volume (mm³) of an ellipsoid with semi-axes `a, b, c`, cut at `h` above its centre.
///
/// ```
/// use cinegauge::phantom::anatomy::truncated_ellipsoid_volume;
/// let whole = truncated_ellipsoid_volume(10.0, 20.0, 30.0, 30.0);
/// assert!((whole - 4.0 / 3.0 * std::f64::consts::PI * 6000.0).abs() < 1e-6);
/// ```
pub fn truncated_ellipsoid_volume(a: f64, b: f64, c: f64, h: f64) -> f64 {
    let h = h.clamp(-c, c);
    PI * a * b * (h - h * h * h / (3.0 * c * c) + 2.0 * c / 3.0)
}

/// Integral over `z ∈ [z0, z1]` of the cross-section area of an ellipsoid centred at `zc`
/// with semi-axes `a, b, c`, cut above `z_cut` (mm³).
pub fn ellipsoid_slab_volume(a: f64, b: f64, c: f64, zc: f64, z_cut: f64, z0: f64, z1: f64) -> f64 {
    let lo = (z0 - zc).max(-c);
    let hi = (z1 - zc).min(c).min(z_cut - zc);
    if hi <= lo {
        return 0.0;
    }
    let prim = |u: f64| u - u * u * u / (3.0 * c * c);
    PI * a * b * (prim(hi) - prim(lo))
}

/// LV shape at one instant; lengths in mm along the slice normal `z`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LvShape {
    /// Cavity semi-axis along in-plane x (columns).
    pub a: f64,
    /// Cavity semi-axis along in-plane y (rows).
    pub b: f64,
    /// Cavity semi-axis along z.
    pub c: f64,
    /// Ellipsoid centre on z.
    pub zc: f64,
    /// Base plane on z; cavity and wall exist only below it.
    pub z_base: f64,
    /// Wall thickness (epicardial semi-axes are `a+w, b+w, c+w`).
    pub wall: f64,
    /// Exact cavity volume in ml (papillary muscles included).
    pub volume_ml: f64,
}

impl LvShape {
    /// Apex position on z.
    pub fn z_apex(&self) -> f64 {
        self.zc - self.c
    }

    /// Cavity cross-section scale at `z`: `sqrt(1 − u²/c²)` inside, `None` outside.
    pub fn cavity_scale(&self, z: f64) -> Option<f64> {
        section_scale(z - self.zc, self.c, self.z_base - self.zc)
    }

    /// Epicardial cross-section scale at `z` (relative to `c + w`), `None` outside.
    pub fn epi_scale(&self, z: f64) -> Option<f64> {
        section_scale(z - self.zc, self.c + self.wall, self.z_base - self.zc)
    }

    /// Cavity area (mm²) averaged over the slab `[z0, z1]`.
    pub fn mean_cavity_area_mm2(&self, z0: f64, z1: f64) -> f64 {
        ellipsoid_slab_volume(self.a, self.b, self.c, self.zc, self.z_base, z0, z1) / (z1 - z0)
    }
}

fn section_scale(u: f64, c: f64, u_cut: f64) -> Option<f64> {
    if u < -c || u > c || u > u_cut {
        return None;
    }
    Some((1.0 - (u / c).powi(2)).max(0.0).sqrt())
}

/// LV geometry over the cycle: the ED shape fixes the apex and the myocardial volume.
#[derive(Debug, Clone)]
pub struct LvModel {
    edv_ml: f64,
    z_apex: f64,
    c_ed: f64,
    myo_mm3: f64,
}

impl LvModel {
    /// Builds the model for an end-diastolic volume with the ED base plane at `z_base_ed`
    /// (the apex lies below it, towards smaller `z`).
    pub fn new(edv_ml: f64, z_base_ed: f64) -> Self {
        let (a, c) = cavity_axes(edv_ml, edv_ml, None);
        let length = (1.0 + TRUNCATION) * c;
        let z_apex = z_base_ed - length;
        let b = ASPECT_B_OVER_A * a;
        let h = TRUNCATION * c;
        let w = WALL_ED_MM;
        let epi = truncated_ellipsoid_volume(a + w, b + w, c + w, h);
        let endo = truncated_ellipsoid_volume(a, b, c, h);
        LvModel {
            edv_ml,
            z_apex,
            c_ed: c,
            myo_mm3: epi - endo,
        }
    }

    /// Shape with cavity volume `volume_ml`.
    pub fn shape(&self, volume_ml: f64) -> LvShape {
        let (a, c) = cavity_axes(volume_ml, self.edv_ml, Some(self.c_ed));
        let b = ASPECT_B_OVER_A * a;
        let h = TRUNCATION * c;
        let endo = truncated_ellipsoid_volume(a, b, c, h);
        // Myocardial volume is monotone in w: bisection on [0, 60] mm.
        let (mut lo, mut hi) = (0.0f64, 60.0f64);
        for _ in 0..80 {
            let mid = 0.5 * (lo + hi);
            let myo = truncated_ellipsoid_volume(a + mid, b + mid, c + mid, h) - endo;
            if myo < self.myo_mm3 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let zc = self.z_apex + c;
        LvShape {
            a,
            b,
            c,
            zc,
            z_base: zc + h,
            wall: 0.5 * (lo + hi),
            volume_ml,
        }
    }
}

/// Semi-axes `(a, c)` giving cavity volume `v_ml`; `c` shortens as `(V/EDV)^k` from `c_ed`.
fn cavity_axes(v_ml: f64, edv_ml: f64, c_ed: Option<f64>) -> (f64, f64) {
    let k = PI * (TRUNCATION - TRUNCATION.powi(3) / 3.0 + 2.0 / 3.0);
    let v = v_ml * 1000.0;
    match c_ed {
        None => {
            let a = (v / (k * ASPECT_B_OVER_A * ELONGATION_ED)).cbrt();
            (a, ELONGATION_ED * a)
        }
        Some(c0) => {
            let c = c0 * (v_ml / edv_ml).powf(LONGITUDINAL_EXPONENT);
            let a = (v / (k * ASPECT_B_OVER_A * c)).sqrt();
            (a, c)
        }
    }
}
