//! Tissue layout of one short-axis plane and its partial-volume rendering.
//!
//! Intensities imitate balanced SSFP cine contrast: blood bright, myocardium dark, fat
//! bright, lung nearly black. Each pixel is the mean over a regular grid of sub-samples
//! in-plane and across the slice thickness (partial-volume rendering by supersampling).

use super::anatomy::{ellipsoid_slab_volume, LvShape};

/// Signal of each tissue (arbitrary units; LV blood = 1).
pub mod signal {
    /// LV blood.
    pub const LV_BLOOD: f32 = 1.0;
    /// RV blood.
    pub const RV_BLOOD: f32 = 0.95;
    /// Myocardium (LV, RV free wall, papillary muscles).
    pub const MYOCARDIUM: f32 = 0.28;
    /// Chest-wall muscle and mediastinum.
    pub const TISSUE: f32 = 0.34;
    /// Subcutaneous fat.
    pub const FAT: f32 = 0.85;
    /// Lung.
    pub const LUNG: f32 = 0.04;
    /// Air outside the body.
    pub const AIR: f32 = 0.0;
}

/// In-plane sub-samples per pixel side.
pub const SUBSAMPLES_INPLANE: usize = 3;
/// Sub-samples across the slice thickness.
pub const SUBSAMPLES_THROUGH: usize = 5;

/// Everything needed to classify a point `(x, y, z)` in mm at one instant.
#[derive(Debug, Clone)]
pub struct Scene {
    /// LV shape at this instant.
    pub lv: LvShape,
    /// Papillary-muscle radius at the widest section (mm), the same in every frame: the
    /// muscles keep their size while the cavity around them shrinks in systole.
    pub papillary_radius_mm: f64,
    /// Septal wall left (mm) where the septum is thinned at this instant: within 35° of the
    /// direction of the RV, the wall beyond this depth from the cavity is RV blood.
    pub thin_septum_mm: Option<f64>,
    /// LV long axis position in-plane `(x, y)` mm.
    pub lv_centre: (f64, f64),
    /// RV semi-axes `(x, y)` in mm at the widest section, at this instant.
    pub rv_axes: (f64, f64),
    /// RV centre offset from the LV centre `(dx, dy)` mm.
    pub rv_offset: (f64, f64),
    /// Body semi-axes `(x, y)` mm.
    pub body_axes: (f64, f64),
    /// Subcutaneous fat thickness (mm).
    pub fat_mm: f64,
    /// Lung ellipses: centre `(x, y)` and semi-axes `(x, y)` in mm.
    pub lungs: [((f64, f64), (f64, f64)); 2],
    /// Left atrium above the base plane.
    pub atrium: Atrium,
}

/// The left atrium: a blood-filled half-ellipsoid standing on the LV base plane (it follows
/// the plane down in systole), with a thin wall and, around it, lung and pericardial recesses
/// (dark). Its blood is as bright as the ventricle's and joins it at the base, so a region
/// grown from the LV walks into it unless a basal rule stops it.
#[derive(Debug, Clone, Copy)]
pub struct Atrium {
    /// Centre offset from the LV long axis `(dx, dy)` in mm.
    pub offset: (f64, f64),
    /// In-plane semi-axes `(x, y)` at the base plane, in mm.
    pub axes: (f64, f64),
    /// Height above the base plane, in mm.
    pub height_mm: f64,
}

/// Atrial wall thickness (mm); from memory, the left atrial wall is about 2 mm thick, far
/// thinner than the ventricle's.
pub const ATRIAL_WALL_MM: f64 = 2.0;
/// Dark surroundings (lung, pericardial recesses) outside the atrial wall (mm).
const ATRIAL_SURROUND_MM: f64 = 12.0;

/// Which tissue lies at a point, and whether it counts as LV blood pool (papillary
/// muscles are counted in the blood pool).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sample {
    /// Signal at the point.
    pub signal: f32,
    /// Inside the LV cavity (blood-pool convention: papillary muscles included).
    pub lv_pool: bool,
    /// Inside a papillary muscle.
    pub papillary: bool,
}

fn inside_ellipse(dx: f64, dy: f64, ax: f64, ay: f64) -> bool {
    (dx / ax).powi(2) + (dy / ay).powi(2) <= 1.0
}

/// A scene cut at height `z`: everything that depends on `z` alone worked out once, for
/// classifying many in-plane points (the renderer's sub-samples).
pub struct Section<'a> {
    scene: &'a Scene,
    /// Cavity semi-axes `(a·s, b·s)` where the plane cuts the cavity.
    cavity: Option<(f64, f64)>,
    /// Papillary discs' centres and squared radius, where the plane crosses their span.
    papillary: Option<([(f64, f64); 2], f64)>,
    /// Atrial blood semi-axes, where the plane cuts the atrium.
    atrium: Option<(f64, f64)>,
    /// Epicardial scale `s` and semi-axes `((a + w)·s, (b + w)·s)`.
    epi: Option<(f64, f64, f64)>,
    /// RV semi-axes, in the RV's extent along the long axis.
    rv: Option<(f64, f64)>,
}

impl Scene {
    /// Classifies the point `(x, y, z)` (mm; x along columns, y along rows, z along the normal).
    pub fn sample(&self, x: f64, y: f64, z: f64) -> Sample {
        self.section(z).sample(x, y)
    }

    /// The scene cut at height `z` (mm along the normal).
    pub fn section(&self, z: f64) -> Section<'_> {
        let lv = &self.lv;
        let cavity_s = lv.cavity_scale(z);
        let papillary = cavity_s.filter(|_| self.papillary_span(z)).map(|s| {
            let r = self.papillary_radius_mm * s;
            let centre = |(ang, frac): (f64, f64)| {
                (frac * lv.a * s * ang.cos(), frac * lv.b * s * ang.sin())
            };
            (
                [centre(PAPILLARY_SITES[0]), centre(PAPILLARY_SITES[1])],
                r * r,
            )
        });
        let la = &self.atrium;
        let u = z - lv.z_base;
        let atrium = (u > 0.0 && u <= la.height_mm).then(|| {
            let s = (1.0 - (u / la.height_mm).powi(2)).sqrt();
            (la.axes.0 * s, la.axes.1 * s)
        });
        let epi = lv.epi_scale(z);
        // The RV follows the epicardial profile in z, from 12 mm above the apex to the base.
        let rv = (z > lv.z_apex() + 12.0 && z <= lv.z_base).then(|| {
            let s = epi.unwrap_or(0.0);
            (self.rv_axes.0 * s, self.rv_axes.1 * s)
        });
        Section {
            scene: self,
            cavity: cavity_s.map(|s| (lv.a * s, lv.b * s)),
            papillary,
            atrium,
            epi: epi.map(|s| (s, (lv.a + lv.wall) * s, (lv.b + lv.wall) * s)),
            rv,
        }
    }

    /// Whether height `z` lies in the part of the long axis that holds the papillary muscles.
    fn papillary_span(&self, z: f64) -> bool {
        let lv = &self.lv;
        let length = lv.z_base - lv.z_apex();
        let rel = (z - lv.z_apex()) / length;
        (PAPILLARY_SPAN.0..=PAPILLARY_SPAN.1).contains(&rel)
    }

    /// Whether a wall point `(dx, dy)` from the LV centre lies in the septal sector (within
    /// 35° of the RV direction) deeper than `septum_mm` from the cavity (depth measured along
    /// the cavity's radial parameter, `(ρ − 1)·a·s`).
    fn beyond_thin_septum(&self, dx: f64, dy: f64, s: f64, septum_mm: f64) -> bool {
        let (ux, uy) = self.rv_offset;
        let (nd, nu) = (dx.hypot(dy), ux.hypot(uy));
        if nd == 0.0 || nu == 0.0 || (dx * ux + dy * uy) / (nd * nu) < 35f64.to_radians().cos() {
            return false;
        }
        let lv = &self.lv;
        let rho = ((dx / (lv.a * s)).powi(2) + (dy / (lv.b * s)).powi(2)).sqrt();
        (rho - 1.0) * lv.a * s > septum_mm
    }
}

/// Papillary-muscle radius as a fraction of the end-diastolic cavity semi-axis `a`.
pub const PAPILLARY_RADIUS: f64 = 0.14;
/// Part of the long axis (0 apex, 1 base) where the papillary muscles are.
const PAPILLARY_SPAN: (f64, f64) = (0.2, 0.7);
/// Two papillary muscles: discs of radius `r·s` (`r` = [`PAPILLARY_RADIUS`] of the
/// end-diastolic semi-axis `a`, `s` the local section scale) centred at 55 % of the local
/// cavity radius, anterolateral and posteromedial (angle in radians, fraction of the radius),
/// in the middle part of the long axis. They lie wholly inside the cavity and apart for any
/// end-systolic `a` above 0.4 of the end-diastolic one.
const PAPILLARY_SITES: [(f64, f64); 2] = [(0.6, 0.55), (-0.9, 0.55)];

impl Scene {
    /// Papillary-muscle area (mm²) averaged over the slab `[z0, z1]`: inside their span, the
    /// two discs of radius `r·s` take `2·r²/(a·b)` of the cavity's ellipse `π·a·b·s²` (the
    /// discs lie wholly inside the cavity and apart), so the slab integral is that fraction
    /// of the cavity's.
    pub fn mean_papillary_area_mm2(&self, z0: f64, z1: f64) -> f64 {
        let lv = &self.lv;
        let length = lv.z_base - lv.z_apex();
        let lo = z0.max(lv.z_apex() + PAPILLARY_SPAN.0 * length);
        let hi = z1.min(lv.z_apex() + PAPILLARY_SPAN.1 * length);
        if hi <= lo {
            return 0.0;
        }
        let fraction = 2.0 * self.papillary_radius_mm.powi(2) / (lv.a * lv.b);
        fraction * ellipsoid_slab_volume(lv.a, lv.b, lv.c, lv.zc, lv.z_base, lo, hi) / (z1 - z0)
    }
}

impl Section<'_> {
    /// Classifies the in-plane point `(x, y)` (mm) of this section.
    pub fn sample(&self, x: f64, y: f64) -> Sample {
        let sc = self.scene;
        let (cx, cy) = sc.lv_centre;
        let (dx, dy) = (x - cx, y - cy);
        if let Some((ca, cb)) = self.cavity {
            if inside_ellipse(dx, dy, ca, cb) {
                let pap = self.papillary.is_some_and(|(centres, r2)| {
                    centres
                        .iter()
                        .any(|&(px, py)| (dx - px).powi(2) + (dy - py).powi(2) <= r2)
                });
                let signal = if pap {
                    signal::MYOCARDIUM
                } else {
                    signal::LV_BLOOD
                };
                return Sample {
                    signal,
                    lv_pool: true,
                    papillary: pap,
                };
            }
        }
        if let Some(signal) = self.atrium_signal(dx, dy) {
            return tissue(signal);
        }
        let rv = self
            .rv
            .map(|(rx, ry)| (rx, ry, dx - sc.rv_offset.0, dy - sc.rv_offset.1));
        if let Some((s, ea, eb)) = self.epi {
            if inside_ellipse(dx, dy, ea, eb) {
                if let (Some(t), Some(_)) = (sc.thin_septum_mm, rv) {
                    if sc.beyond_thin_septum(dx, dy, s, t) {
                        return tissue(signal::RV_BLOOD);
                    }
                }
                return tissue(signal::MYOCARDIUM);
            }
        }
        if let Some((rx, ry, rdx, rdy)) = rv {
            if rx > 0.0 && inside_ellipse(rdx, rdy, rx, ry) {
                return tissue(signal::RV_BLOOD);
            }
            if rx > 0.0 && inside_ellipse(rdx, rdy, rx + 3.0, ry + 3.0) {
                return tissue(signal::MYOCARDIUM);
            }
        }
        let (bx, by) = sc.body_axes;
        if !inside_ellipse(x, y, bx, by) {
            return tissue(signal::AIR);
        }
        if !inside_ellipse(x, y, bx - sc.fat_mm, by - sc.fat_mm) {
            return tissue(signal::FAT);
        }
        for ((lx, ly), (ax, ay)) in sc.lungs {
            if inside_ellipse(x - lx, y - ly, ax, ay) {
                return tissue(signal::LUNG);
            }
        }
        tissue(signal::TISSUE)
    }

    /// Signal of the atrium, its wall or its dark surroundings at `(dx, dy)` from the LV
    /// axis; `None` outside them.
    fn atrium_signal(&self, dx: f64, dy: f64) -> Option<f32> {
        let (ax, ay) = self.atrium?;
        let la = &self.scene.atrium;
        let (x, y) = (dx - la.offset.0, dy - la.offset.1);
        if inside_ellipse(x, y, ax, ay) {
            return Some(signal::LV_BLOOD);
        }
        let w = ATRIAL_WALL_MM;
        if inside_ellipse(x, y, ax + w, ay + w) {
            return Some(signal::MYOCARDIUM);
        }
        let d = w + ATRIAL_SURROUND_MM;
        inside_ellipse(x, y, ax + d, ay + d).then_some(signal::LUNG)
    }
}

fn tissue(signal: f32) -> Sample {
    Sample {
        signal,
        lv_pool: false,
        papillary: false,
    }
}

/// Regular sub-sample offsets in `[-0.5, 0.5)` (cell midpoints), `n` per unit.
pub fn offsets(n: usize) -> Vec<f64> {
    (0..n).map(|i| (i as f64 + 0.5) / n as f64 - 0.5).collect()
}
