//! Synthetic short-axis cine of a beating left ventricle, with analytic truth.
//!
//! The phantom is the project's own scenario: a truncated prolate-ellipsoid LV cavity
//! whose volume follows a physiological curve ([`anatomy::volume_at_phase`]), a wall that
//! thickens in systole at constant myocardial volume, a right-ventricular crescent beside
//! the septum, papillary muscles inside the cavity, a left atrium above the base plane,
//! chest wall, lungs and air, rendered
//! with partial volume, and multi-coil k-space with complex Gaussian noise.
//!
//! Truth per slice and frame is the cavity area averaged over the slab (papillary muscles
//! counted in the blood pool), its disc sum, and the exact continuous volume.

pub mod anatomy;
pub mod coils;
pub mod render;

use ndarray::{Array3, Array4};
use num_complex::Complex32;
use rayon::prelude::*;
use serde::Serialize;

use crate::geometry::Geometry;
use anatomy::{LvModel, LvShape};
use render::{offsets, Scene, SUBSAMPLES_INPLANE, SUBSAMPLES_THROUGH};

/// Why a phantom specification was refused.
#[derive(Debug, thiserror::Error)]
#[error("phantom parameter `{field}`: expected {expected}, found {found}")]
pub struct PhantomError {
    /// Parameter at fault.
    pub field: &'static str,
    /// What is allowed.
    pub expected: String,
    /// What was given.
    pub found: String,
}

/// Parameters of a synthetic subject.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PhantomSpec {
    /// End-diastolic LV volume in ml.
    pub edv_ml: f64,
    /// Ejection fraction in percent.
    pub ef_pct: f64,
    /// Heart rate in beats per minute (sets the R–R interval and frame timing).
    pub heart_rate_bpm: f64,
    /// Number of short-axis slices.
    pub slices: usize,
    /// Slice thickness in mm.
    pub slice_thickness_mm: f64,
    /// Gap between slices in mm (spacing = thickness + gap).
    pub slice_gap_mm: f64,
    /// In-plane pixel size in mm (square pixels).
    pub pixel_mm: f64,
    /// Matrix rows (phase encoding, ky).
    pub rows: usize,
    /// Matrix columns (readout, kx).
    pub cols: usize,
    /// Frames per R–R interval.
    pub frames: usize,
    /// Receive coils.
    pub coils: usize,
    /// LV blood signal divided by the complex noise standard deviation of the
    /// sensitivity-combined image.
    pub snr: f64,
    /// Seed of every random choice (noise).
    pub rng_seed: u64,
    /// A septum thinned at one frame (a test of the segmentation's leak guard).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub thin_septum: Option<ThinSeptum>,
}

/// The interventricular septum thinned at one frame: the right-ventricular blood reaches into
/// the LV wall until `septum_mm` of wall are left between the two cavities (the LV cavity and
/// its truth are unchanged).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ThinSeptum {
    /// Frame (zero-based).
    pub frame: usize,
    /// Septal wall left, in mm.
    pub septum_mm: f64,
}

impl Default for PhantomSpec {
    fn default() -> Self {
        PhantomSpec {
            edv_ml: 150.0,
            ef_pct: 60.0,
            heart_rate_bpm: 68.0,
            slices: 13,
            slice_thickness_mm: 8.0,
            slice_gap_mm: 2.0,
            pixel_mm: 1.8,
            rows: 112,
            cols: 128,
            frames: 20,
            coils: 8,
            snr: 25.0,
            rng_seed: 1,
            thin_septum: None,
        }
    }
}

fn check(
    ok: bool,
    field: &'static str,
    expected: &str,
    found: impl ToString,
) -> Result<(), PhantomError> {
    if ok {
        Ok(())
    } else {
        Err(PhantomError {
            field,
            expected: expected.into(),
            found: found.to_string(),
        })
    }
}

impl PhantomSpec {
    /// Checks every parameter against what the phantom can represent.
    ///
    /// # Errors
    /// The first parameter out of range, with the allowed range.
    pub fn validate(&self) -> Result<(), PhantomError> {
        check(
            (20.0..=600.0).contains(&self.edv_ml),
            "edv_ml",
            "20 to 600 ml",
            self.edv_ml,
        )?;
        check(
            (5.0..=90.0).contains(&self.ef_pct),
            "ef_pct",
            "5 to 90 %",
            self.ef_pct,
        )?;
        check(
            (30.0..=200.0).contains(&self.heart_rate_bpm),
            "heart_rate_bpm",
            "30 to 200 bpm",
            self.heart_rate_bpm,
        )?;
        check(
            (3..=40).contains(&self.slices),
            "slices",
            "3 to 40",
            self.slices,
        )?;
        check(
            (1.0..=20.0).contains(&self.slice_thickness_mm),
            "slice_thickness_mm",
            "1 to 20 mm",
            self.slice_thickness_mm,
        )?;
        check(
            (0.0..=20.0).contains(&self.slice_gap_mm),
            "slice_gap_mm",
            "0 to 20 mm",
            self.slice_gap_mm,
        )?;
        check(
            (0.5..=5.0).contains(&self.pixel_mm),
            "pixel_mm",
            "0.5 to 5 mm",
            self.pixel_mm,
        )?;
        check(
            (32..=512).contains(&self.rows),
            "rows",
            "32 to 512",
            self.rows,
        )?;
        check(
            (32..=512).contains(&self.cols),
            "cols",
            "32 to 512",
            self.cols,
        )?;
        check(
            (4..=100).contains(&self.frames),
            "frames",
            "4 to 100",
            self.frames,
        )?;
        check(
            (1..=64).contains(&self.coils),
            "coils",
            "1 to 64",
            self.coils,
        )?;
        check(
            self.snr.is_finite() && self.snr > 0.0,
            "snr",
            "a positive number",
            self.snr,
        )?;
        if let Some(t) = self.thin_septum {
            check(
                t.frame < self.frames,
                "thin_septum.frame",
                &format!("a frame below {}", self.frames),
                t.frame,
            )?;
            check(
                t.septum_mm > 0.0 && t.septum_mm < anatomy::WALL_ED_MM,
                "thin_septum.septum_mm",
                &format!(
                    "more than 0 and less than the wall ({} mm)",
                    anatomy::WALL_ED_MM
                ),
                t.septum_mm,
            )?;
        }
        let fov_y = self.rows as f64 * self.pixel_mm;
        let fov_x = self.cols as f64 * self.pixel_mm;
        check(
            fov_x.min(fov_y) >= 160.0,
            "rows/cols/pixel_mm",
            "a field of view of at least 160 mm on each side, to hold the chest",
            format!("{fov_y:.0} × {fov_x:.0} mm"),
        )
    }
}

/// Analytic truth of a phantom.
#[derive(Debug, Clone, Serialize)]
pub struct Truth {
    /// True LV blood-pool area per slice and frame (slab average, papillary muscles in), `[slice][frame]`.
    pub slice_areas_mm2: Vec<Vec<f64>>,
    /// Method-of-discs volume of the true areas per frame (what perfect segmentation gives).
    pub disc_volume_curve_ml: Vec<f64>,
    /// Exact continuous cavity volume per frame.
    pub continuous_volume_curve_ml: Vec<f64>,
    /// Papillary-muscle area per slice and frame (slab average), `[slice][frame]`.
    pub papillary_areas_mm2: Vec<Vec<f64>>,
    /// Method-of-discs volume of the papillary muscles per frame (slab-averaged areas), the
    /// amount by which excluding them lowers the blood pool.
    pub papillary_volume_curve_ml: Vec<f64>,
}

/// A synthetic subject ready to render.
#[derive(Debug, Clone)]
pub struct Phantom {
    spec: PhantomSpec,
    scenes: Vec<Scene>,
}

impl Phantom {
    /// Builds the anatomy of every frame.
    ///
    /// # Errors
    /// If the specification is out of range.
    pub fn new(spec: PhantomSpec) -> Result<Self, PhantomError> {
        spec.validate()?;
        let edv = spec.edv_ml;
        let esv = edv * (1.0 - spec.ef_pct / 100.0);
        // The stack is planned from the mitral-valve plane at end-diastole (common practice):
        // the ED base plane is the upper edge of the second-highest slice, leaving one slice
        // above the base.
        let spacing = spec.slice_thickness_mm + spec.slice_gap_mm;
        let top_slice = (spec.slices as f64 - 1.0) / 2.0 * spacing;
        let z_base_ed = top_slice - spacing + spec.slice_thickness_mm / 2.0;
        let model = LvModel::new(edv, z_base_ed);
        let ed = model.shape(edv);
        let stack_bottom = -top_slice - spec.slice_thickness_mm / 2.0;
        check(
            ed.z_apex() >= stack_bottom,
            "slices",
            &format!(
                "enough slices to cover the LV from base to apex ({:.0} mm long at end-diastole)",
                ed.z_base - ed.z_apex()
            ),
            format!(
                "{} slices spanning {:.0} mm",
                spec.slices,
                2.0 * top_slice + spec.slice_thickness_mm
            ),
        )?;
        let r_epi = ed.a + ed.wall;
        let fov_x = spec.cols as f64 * spec.pixel_mm;
        let fov_y = spec.rows as f64 * spec.pixel_mm;
        let body_axes = (0.44 * fov_x, 0.42 * fov_y);
        let scenes = (0..spec.frames)
            .map(|f| {
                let v = anatomy::volume_at_phase(edv, esv, f as f64 / spec.frames as f64);
                let lv = model.shape(v);
                let rv_scale = (v / edv).powf(0.25);
                Scene {
                    lv,
                    papillary_radius_mm: render::PAPILLARY_RADIUS * model.shape(edv).a,
                    thin_septum_mm: spec
                        .thin_septum
                        .filter(|t| t.frame == f)
                        .map(|t| t.septum_mm),
                    lv_centre: (0.06 * fov_x, 0.03 * fov_y),
                    rv_axes: ((r_epi + 3.0) * rv_scale, 1.12 * r_epi * rv_scale),
                    rv_offset: (-0.38 * r_epi, -0.12 * r_epi),
                    body_axes,
                    fat_mm: 9.0,
                    atrium: render::Atrium {
                        offset: (0.1 * ed.a, 0.25 * ed.a),
                        axes: (0.65 * ed.a, 0.6 * ed.a),
                        height_mm: 40.0,
                    },
                    lungs: [
                        (
                            (0.62 * body_axes.0, -0.05 * body_axes.1),
                            (0.27 * body_axes.0, 0.55 * body_axes.1),
                        ),
                        (
                            (-0.62 * body_axes.0, -0.05 * body_axes.1),
                            (0.27 * body_axes.0, 0.55 * body_axes.1),
                        ),
                    ],
                }
            })
            .collect();
        Ok(Phantom { spec, scenes })
    }

    /// The specification this phantom was built from.
    pub fn spec(&self) -> &PhantomSpec {
        &self.spec
    }

    /// Geometry and timing of the rendered stack (frames evenly spread over one R–R interval).
    pub fn geometry(&self) -> Geometry {
        let rr = 60_000.0 / self.spec.heart_rate_bpm;
        let n = self.spec.frames;
        Geometry {
            row_spacing_mm: self.spec.pixel_mm,
            col_spacing_mm: self.spec.pixel_mm,
            slice_thickness_mm: self.spec.slice_thickness_mm,
            slice_spacing_mm: self.spec.slice_thickness_mm + self.spec.slice_gap_mm,
            trigger_times_ms: (0..n).map(|f| f as f64 * rr / n as f64).collect(),
            rr_interval_ms: Some(rr),
        }
    }

    /// Position of slice `k` along the normal (mm), the stack centred on 0.
    pub fn slice_z_mm(&self, k: usize) -> f64 {
        let spacing = self.spec.slice_thickness_mm + self.spec.slice_gap_mm;
        (k as f64 - (self.spec.slices as f64 - 1.0) / 2.0) * spacing
    }

    /// Pixel centre `(x, y)` in mm for `(row, col)`.
    pub fn pixel_xy_mm(&self, row: f64, col: f64) -> (f64, f64) {
        let px = self.spec.pixel_mm;
        (
            (col - (self.spec.cols as f64 - 1.0) / 2.0) * px,
            (row - (self.spec.rows as f64 - 1.0) / 2.0) * px,
        )
    }

    /// Noise-free tissue signal at the centre of pixel `(row, col)` of `slice` at `frame`
    /// (the values of [`render::signal`]): which structure lies there.
    pub fn tissue_signal(&self, frame: usize, slice: usize, row: usize, col: usize) -> f32 {
        let (x, y) = self.pixel_xy_mm(row as f64, col as f64);
        self.scenes[frame]
            .sample(x, y, self.slice_z_mm(slice))
            .signal
    }

    /// Whether the centre of pixel `(row, col)` of `slice` at `frame` lies in the LV blood pool
    /// (papillary muscles included; the atrium above the base is not).
    pub fn in_lv_pool(&self, frame: usize, slice: usize, row: usize, col: usize) -> bool {
        let (x, y) = self.pixel_xy_mm(row as f64, col as f64);
        self.scenes[frame]
            .sample(x, y, self.slice_z_mm(slice))
            .lv_pool
    }

    /// LV shape at `frame`.
    pub fn lv_shape(&self, frame: usize) -> &LvShape {
        &self.scenes[frame].lv
    }

    /// The slice nearest the LV centre at end-diastole, and the pixel `(row, col)` of the LV
    /// long axis: a natural single mid-ventricular seed.
    pub fn mid_ventricular_pixel(&self) -> (usize, usize, usize) {
        let lv = &self.scenes[0].lv;
        let z_mid = 0.5 * (lv.z_apex() + lv.z_base);
        let slice = (0..self.spec.slices)
            .min_by(|&a, &b| {
                (self.slice_z_mm(a) - z_mid)
                    .abs()
                    .total_cmp(&(self.slice_z_mm(b) - z_mid).abs())
            })
            .unwrap_or(0);
        let (cx, cy) = self.scenes[0].lv_centre;
        let px = self.spec.pixel_mm;
        let col = (cx / px + (self.spec.cols as f64 - 1.0) / 2.0).round() as usize;
        let row = (cy / px + (self.spec.rows as f64 - 1.0) / 2.0).round() as usize;
        (slice, row, col)
    }

    /// Renders one slice: magnitude image `[frame, row, col]` and the fraction of each pixel
    /// that is LV blood pool (papillary muscles included) `[frame, row, col]`.
    pub fn render_slice(&self, slice: usize) -> (Array3<f32>, Array3<f32>) {
        let (f, r, c) = (self.spec.frames, self.spec.rows, self.spec.cols);
        let mut image = Array3::<f32>::zeros((f, r, c));
        let mut pool = Array3::<f32>::zeros((f, r, c));
        let inplane = offsets(SUBSAMPLES_INPLANE);
        let through = offsets(SUBSAMPLES_THROUGH);
        let z0 = self.slice_z_mm(slice);
        let t = self.spec.slice_thickness_mm;
        let px = self.spec.pixel_mm;
        let n = (inplane.len() * inplane.len() * through.len()) as f32;
        image
            .outer_iter_mut()
            .into_par_iter()
            .zip(pool.outer_iter_mut().into_par_iter())
            .enumerate()
            .for_each(|(frame, (mut img, mut frac))| {
                let scene = &self.scenes[frame];
                let sections: Vec<_> = through
                    .iter()
                    .map(|dz| scene.section(z0 + dz * t))
                    .collect();
                for row in 0..r {
                    for col in 0..c {
                        let (x, y) = self.pixel_xy_mm(row as f64, col as f64);
                        let (mut s, mut p) = (0.0f32, 0.0f32);
                        for section in &sections {
                            for dy in &inplane {
                                for dx in &inplane {
                                    let smp = section.sample(x + dx * px, y + dy * px);
                                    s += smp.signal;
                                    p += f32::from(u8::from(smp.lv_pool));
                                }
                            }
                        }
                        img[(row, col)] = s / n;
                        frac[(row, col)] = p / n;
                    }
                }
            });
        (image, pool)
    }

    /// Multi-coil k-space `[coil, frame, ky, kx]` of one slice rendered by [`Self::render_slice`].
    pub fn slice_kspace(&self, slice: usize, image: &Array3<f32>) -> Array4<Complex32> {
        coils::acquire(self, slice, image)
    }

    /// Analytic truth: slab-averaged cavity areas, their disc sum and the exact volume.
    pub fn truth(&self) -> Truth {
        let spacing = self.spec.slice_thickness_mm + self.spec.slice_gap_mm;
        let half = self.spec.slice_thickness_mm / 2.0;
        let areas: Vec<Vec<f64>> = (0..self.spec.slices)
            .map(|k| {
                let z = self.slice_z_mm(k);
                self.scenes
                    .iter()
                    .map(|s| s.lv.mean_cavity_area_mm2(z - half, z + half))
                    .collect()
            })
            .collect();
        let disc = (0..self.spec.frames)
            .map(|f| areas.iter().map(|a| a[f]).sum::<f64>() * spacing / 1000.0)
            .collect();
        let papillary_areas: Vec<Vec<f64>> = (0..self.spec.slices)
            .map(|k| {
                let z = self.slice_z_mm(k);
                self.scenes
                    .iter()
                    .map(|s| s.mean_papillary_area_mm2(z - half, z + half))
                    .collect()
            })
            .collect();
        let papillary = (0..self.spec.frames)
            .map(|f| papillary_areas.iter().map(|a| a[f]).sum::<f64>() * spacing / 1000.0)
            .collect();
        Truth {
            slice_areas_mm2: areas,
            disc_volume_curve_ml: disc,
            papillary_areas_mm2: papillary_areas,
            papillary_volume_curve_ml: papillary,
            continuous_volume_curve_ml: self.scenes.iter().map(|s| s.lv.volume_ml).collect(),
        }
    }
}
