//! Which slices count: the basal rule and the apex stop.
//!
//! Basal rule (common practice in CMR volumetry): a basal slice counts while its blood pool is
//! at least half surrounded by myocardium; beyond that the bright blood is atrium or outflow
//! tract. It is measured as the myocardial cover of the region's border: the share of rays
//! from the region's centroid, evenly spread in angle, along which at least three of four
//! samples in the first [`ExtentRule::wall_depth_mm`] beyond the border lie at myocardial
//! signal ([`Levels::myocardial_band`]: below halfway between blood and wall, above halfway
//! between the dark background and the wall, so lung and air do not count). An atrial wall
//! (about 2 mm, from memory) is far thinner than a ventricular one (6 mm or more at
//! end-diastole, from memory), so rays leaving the atrium cross it within the first sample.
//!
//! Apex stop: a region of fewer than [`ExtentRule::apex_min_px`] pixels is taken as the
//! cavity having vanished (a speck of noise is not a cavity).
//!
//! In every frame the rule walks outward from the primary seed's slice in both directions;
//! the first slice that fails either test, and every slice beyond it, are not counted.
//! Slices holding a user seed always count, and in frames under a `[[slices]]` table of the
//! seeds file the user's limits decide which slices count instead of the basal rule (the apex
//! stop still applies and contours are still closed across gaps in the myocardium).

use ndarray::{Array2, ArrayView2, ArrayView3, ArrayView4, Axis};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use super::grow::levels;
use super::seeds::{Seed, SliceRange};
use super::window::Window;

/// Parameters of the basal rule and the apex stop.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ExtentRule {
    /// Smallest myocardial cover of a counted slice's border (0.5: half surrounded).
    pub min_cover: f64,
    /// Depth beyond the border that must be myocardium for a ray to count (mm).
    pub wall_depth_mm: f64,
    /// Rays from the centroid.
    pub rays: usize,
    /// Smallest region (px) taken as a cavity at the apex.
    pub apex_min_px: usize,
}

impl Default for ExtentRule {
    fn default() -> Self {
        ExtentRule {
            min_cover: 0.5,
            wall_depth_mm: 6.0,
            rays: 64,
            apex_min_px: 4,
        }
    }
}

impl ExtentRule {
    /// The rule in words, for every output.
    pub fn describe(&self) -> String {
        format!(
            "basal slices counted while at least {:.0} % of the blood pool's border has {} mm of \
             myocardium beyond it (contour closed straight across any gap), apex stop below {} px",
            100.0 * self.min_cover,
            self.wall_depth_mm,
            self.apex_min_px
        )
    }
}

/// Why a slice was not counted.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "rule", rename_all = "kebab-case")]
pub enum StopReason {
    /// The blood pool is less than half surrounded by myocardium.
    BasalCover {
        /// Share of the border that is myocardium.
        cover: f64,
    },
    /// The cavity vanished.
    ApexVanished {
        /// Region size (px).
        area_px: usize,
    },
}

/// A slice the rule stopped at (it and every slice beyond are not counted in that frame).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SliceStop {
    /// Slice.
    pub slice: usize,
    /// Why.
    #[serde(flatten)]
    pub reason: StopReason,
}

/// The slices counted in one frame and where the rule stopped.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FrameExtent {
    /// Frame.
    pub frame: usize,
    /// First and last slice counted (`None`: no slice).
    pub slices: Option<[usize; 2]>,
    /// Where the basal rule or the apex stop acted.
    pub stops: Vec<SliceStop>,
    /// The frame lies under a `[[slices]]` table: the user's limits decide which slices count,
    /// not the rule.
    pub fixed_by_user: bool,
}

/// One ray from a region's centroid: where it crosses the border and whether myocardium lies
/// beyond.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ray {
    /// Border point `(row, col)` in pixels.
    pub border: (f64, f64),
    /// Myocardium beyond the border.
    pub myocardial: bool,
}

/// The rays of one region, evenly spread in angle from its centroid (empty for an empty
/// region).
#[derive(Debug, Clone, PartialEq)]
pub struct BorderScan {
    /// Centroid `(row, col)` in pixels.
    pub centroid: (f64, f64),
    /// Pixel spacing `(row, col)` in mm (ray angles are in mm space).
    pub pixel_mm: (f64, f64),
    /// Rays in order of angle.
    pub rays: Vec<Ray>,
}

impl BorderScan {
    /// Myocardial cover: the share of rays with myocardium beyond the border.
    pub fn cover(&self) -> f64 {
        if self.rays.is_empty() {
            return 0.0;
        }
        self.rays.iter().filter(|r| r.myocardial).count() as f64 / self.rays.len() as f64
    }

    /// Closes the contour across each gap in the myocardium with a straight line between the
    /// border points of the myocardial rays on either side (common practice: basal contours
    /// close across the valve plane): region pixels outside the polygon of the myocardial rays'
    /// border points, by more than 0.75 px (so the region's own edge pixels along the
    /// myocardium stay), are removed. Nothing changes when the myocardium surrounds the
    /// region or when fewer than three rays are myocardial (no arc to close).
    pub fn close_across_gaps(&self, mask: &mut Array2<bool>) {
        let n = self.rays.len();
        let myo: Vec<usize> = (0..n).filter(|&k| self.rays[k].myocardial).collect();
        if myo.len() == n {
            return;
        }
        if myo.len() < 3 {
            return;
        }
        let polygon: Vec<(f64, f64)> = myo.iter().map(|&k| self.rays[k].border).collect();
        for ((r, c), m) in mask.indexed_iter_mut() {
            let p = (r as f64, c as f64);
            if *m && !inside_polygon(&polygon, p) && distance_to_polygon(&polygon, p) > 0.75 {
                *m = false;
            }
        }
    }
}

/// Distance (px) from `p` to the nearest edge of a closed polygon.
fn distance_to_polygon(polygon: &[(f64, f64)], p: (f64, f64)) -> f64 {
    let mut best = f64::INFINITY;
    let mut j = polygon.len() - 1;
    for i in 0..polygon.len() {
        let (a, b) = (polygon[j], polygon[i]);
        let (ex, ey) = (b.0 - a.0, b.1 - a.1);
        let len2 = ex * ex + ey * ey;
        let t = if len2 > 0.0 {
            (((p.0 - a.0) * ex + (p.1 - a.1) * ey) / len2).clamp(0.0, 1.0)
        } else {
            0.0
        };
        best = best.min((p.0 - a.0 - t * ex).hypot(p.1 - a.1 - t * ey));
        j = i;
    }
    best
}

/// Even–odd point-in-polygon test (ray casting along the column axis).
fn inside_polygon(polygon: &[(f64, f64)], (pr, pc): (f64, f64)) -> bool {
    let mut inside = false;
    let mut j = polygon.len() - 1;
    for i in 0..polygon.len() {
        let ((ri, ci), (rj, cj)) = (polygon[i], polygon[j]);
        if (ri > pr) != (rj > pr) && pc < ci + (pr - ri) * (cj - ci) / (rj - ri) {
            inside = !inside;
        }
        j = i;
    }
    inside
}

/// Casts `rule.rays` rays from the centroid of `mask` and finds, on each, the border and
/// whether the first `rule.wall_depth_mm` beyond it are myocardium (see the module text).
/// `levels` are this image's blood, wall and dark (lung, air) signal; `pixel_mm` is the
/// `(row, col)` spacing.
pub fn scan_border(
    image: ArrayView2<f32>,
    mask: ArrayView2<bool>,
    levels: Levels,
    pixel_mm: (f64, f64),
    rule: &ExtentRule,
) -> BorderScan {
    let (rows, cols) = mask.dim();
    let (n, sr, sc) = mask
        .indexed_iter()
        .filter(|(_, &m)| m)
        .fold((0usize, 0.0, 0.0), |(n, sr, sc), ((r, c), _)| {
            (n + 1, sr + r as f64, sc + c as f64)
        });
    if n == 0 {
        return BorderScan {
            centroid: (0.0, 0.0),
            pixel_mm,
            rays: Vec::new(),
        };
    }
    let (r0, c0) = (sr / n as f64, sc / n as f64);
    let (lo, hi) = levels.myocardial_band();
    let step_mm = 0.25 * pixel_mm.0.min(pixel_mm.1);
    let pixel = pixel_mm.0.max(pixel_mm.1);
    let reach_mm = (rows as f64 * pixel_mm.0).hypot(cols as f64 * pixel_mm.1);
    let at = |t: f64, (dr, dc): (f64, f64)| (r0 + t * dr, c0 + t * dc);
    let rays = (0..rule.rays)
        .map(|k| {
            let theta = std::f64::consts::TAU * k as f64 / rule.rays as f64;
            // Pixel steps per mm along the ray (angle measured from the column axis towards
            // increasing rows).
            let dir = (theta.sin() / pixel_mm.0, theta.cos() / pixel_mm.1);
            // The outermost point of the region on the ray...
            let mut last_inside = 0.0;
            let mut t = 0.0;
            while t <= reach_mm {
                let (r, c) = at(t, dir);
                let (ri, ci) = (r.round(), c.round());
                if ri < 0.0 || ci < 0.0 || ri >= rows as f64 || ci >= cols as f64 {
                    break;
                }
                if mask[(ri as usize, ci as usize)] {
                    last_inside = t;
                }
                t += step_mm;
            }
            // ...then the border itself, where the signal falls below the blood threshold
            // (within a pixel of it).
            let mut border = last_inside;
            while border < last_inside + pixel
                && bilinear(image, at(border, dir)).is_some_and(|v| v >= hi)
            {
                border += step_mm;
            }
            let in_band = (1..=4)
                .filter(|j| {
                    let p = at(border + rule.wall_depth_mm * *j as f64 / 4.0, dir);
                    bilinear(image, p).is_some_and(|v| v >= lo && v < hi)
                })
                .count();
            Ray {
                border: at(border, dir),
                myocardial: in_band >= 3,
            }
        })
        .collect();
    BorderScan {
        centroid: (r0, c0),
        pixel_mm,
        rays,
    }
}

/// Signal levels of one image that the basal rule compares against.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Levels {
    /// Blood.
    pub blood: f32,
    /// Myocardium.
    pub wall: f32,
    /// Dark background (lung, air), noise floor included.
    pub dark: f32,
}

impl Levels {
    /// Myocardial signal band `[lo, hi)`: below halfway between blood and wall, above halfway
    /// between the dark background and the wall.
    pub fn myocardial_band(&self) -> (f32, f32) {
        let lo = (0.5 * (self.dark + self.wall)).max(0.5 * self.wall);
        (lo, 0.5 * (self.blood + self.wall))
    }
}

/// Dark level of an image: its 2nd percentile (air and lung, with the magnitude noise floor).
pub fn dark_level(image: ArrayView2<f32>) -> f32 {
    let mut v: Vec<f32> = image.iter().copied().filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return 0.0;
    }
    let k = v.len() / 50;
    *v.select_nth_unstable_by(k, f32::total_cmp).1
}

/// Bilinear interpolation at `(r, c)`; `None` outside the image.
fn bilinear(image: ArrayView2<f32>, (r, c): (f64, f64)) -> Option<f32> {
    let (rows, cols) = image.dim();
    if r < 0.0 || c < 0.0 || r > (rows - 1) as f64 || c > (cols - 1) as f64 {
        return None;
    }
    let (r0, c0) = (r.floor() as usize, c.floor() as usize);
    let (r1, c1) = ((r0 + 1).min(rows - 1), (c0 + 1).min(cols - 1));
    let (fr, fc) = ((r - r0 as f64) as f32, (c - c0 as f64) as f32);
    let top = image[(r0, c0)] * (1.0 - fc) + image[(r0, c1)] * fc;
    let bottom = image[(r1, c0)] * (1.0 - fc) + image[(r1, c1)] * fc;
    Some(top * (1.0 - fr) + bottom * fr)
}

/// What the rule does to one slice's mask in one frame.
enum Change {
    /// Not counted.
    Clear,
    /// Closed across a gap: the new mask on a window.
    Close(Window, Array2<bool>),
}

/// Applies the basal rule and the apex stop to `masks` (`[slice, frame, row, col]`, cleared
/// where a slice is not counted) and returns, per frame, where the rule stopped. `seeds[0]`
/// is the primary seed; `ranges` are the user's slice limits. Frames are independent and
/// run in parallel; each region is judged on a window around it.
pub fn apply(
    stack: ArrayView4<f32>,
    masks: &mut ndarray::Array4<bool>,
    seeds: &[Seed],
    ranges: &[SliceRange],
    pixel_mm: (f64, f64),
    rule: &ExtentRule,
) -> Vec<FrameExtent> {
    let nf = masks.dim().1;
    let Some(primary) = seeds.first() else {
        return Vec::new();
    };
    let view = masks.view();
    let per_frame: Vec<(FrameExtent, Vec<(usize, Change)>)> = (0..nf)
        .into_par_iter()
        .map(|f| {
            let fixed_by_user = ranges.iter().any(|r| r.covers(f));
            let (stops, changes) = frame_rule(
                stack.index_axis(Axis(1), f),
                view.index_axis(Axis(1), f),
                primary.slice,
                |s| seeds.iter().any(|x| x.slice == s && x.frame == f),
                fixed_by_user,
                pixel_mm,
                rule,
            );
            let extent = FrameExtent {
                frame: f,
                slices: None,
                stops,
                fixed_by_user,
            };
            (extent, changes)
        })
        .collect();
    let mut out = Vec::with_capacity(nf);
    for (f, (extent, changes)) in per_frame.into_iter().enumerate() {
        for (s, change) in changes {
            let mut m = masks.index_axis_mut(Axis(0), s).index_axis_move(Axis(0), f);
            match change {
                Change::Clear => m.fill(false),
                Change::Close(w, local) => m
                    .slice_mut(ndarray::s![w.rows.clone(), w.cols.clone()])
                    .assign(&local),
            }
        }
        out.push(extent);
    }
    out
}

/// The rule in one frame: `images` and `masks` are `[slice, row, col]`, `s0` the primary
/// seed's slice, `seeded(s)` whether slice `s` holds a user seed in this frame.
fn frame_rule(
    images: ArrayView3<f32>,
    masks: ArrayView3<bool>,
    s0: usize,
    seeded: impl Fn(usize) -> bool,
    fixed_by_user: bool,
    pixel_mm: (f64, f64),
    rule: &ExtentRule,
) -> (Vec<SliceStop>, Vec<(usize, Change)>) {
    let ns = masks.dim().0;
    let (mut stops, mut changes) = (Vec::new(), Vec::new());
    // Wide enough for the samples beyond the border, the border search and the wall ring.
    let margin = (rule.wall_depth_mm / pixel_mm.0.min(pixel_mm.1)).ceil() as usize + 4;
    let local = |s: usize| {
        let m = masks.index_axis(Axis(0), s);
        let w = Window::around(m, margin);
        let img = images.index_axis(Axis(0), s);
        (w.view(img), w.view(m).to_owned(), w)
    };
    let (img0, mask0, _) = local(s0);
    let (Some(b0), Some(w0)) = levels(img0, &mask0, f32::NEG_INFINITY) else {
        return (stops, changes);
    };
    let dark = dark_level(images.index_axis(Axis(0), s0));
    let up: Vec<usize> = ((s0 + 1)..ns).collect();
    let down: Vec<usize> = (0..s0).rev().collect();
    for path in [up, down] {
        let mut stopped = false;
        for s in path {
            if seeded(s) {
                continue;
            }
            let area = masks.index_axis(Axis(0), s).iter().filter(|&&b| b).count();
            if area == 0 {
                stopped = true;
                continue;
            }
            if stopped {
                changes.push((s, Change::Clear));
                continue;
            }
            let reason = if area < rule.apex_min_px {
                Some(StopReason::ApexVanished { area_px: area })
            } else {
                let (img, m, w) = local(s);
                let blood = levels(img, &m, f32::NEG_INFINITY).0.unwrap_or(b0);
                // The wall level scales with the local blood level (coil shading).
                let wall = w0 * blood / b0;
                let lv = Levels { blood, wall, dark };
                let scan = scan_border(img, m.view(), lv, pixel_mm, rule);
                let cover = scan.cover();
                if cover >= rule.min_cover && cover < 1.0 {
                    let mut closed = m;
                    scan.close_across_gaps(&mut closed);
                    changes.push((s, Change::Close(w, closed)));
                }
                (cover < rule.min_cover).then_some(StopReason::BasalCover { cover })
            };
            // Under the user's limits the basal rule stops nothing (the limits decide); a
            // vanished cavity is no slice choice and stops anyway.
            let user_decides =
                fixed_by_user && matches!(reason, Some(StopReason::BasalCover { .. }));
            if let Some(reason) = reason.filter(|_| !user_decides) {
                stops.push(SliceStop { slice: s, reason });
                changes.push((s, Change::Clear));
                stopped = true;
            }
        }
    }
    (stops, changes)
}

/// Fills each frame's first and last counted slice from the final masks.
pub fn record_counted(masks: ArrayView4<bool>, extents: &mut [FrameExtent]) {
    for e in extents {
        let counted: Vec<usize> = (0..masks.dim().0)
            .filter(|&s| {
                masks
                    .index_axis(Axis(0), s)
                    .index_axis(Axis(0), e.frame)
                    .iter()
                    .any(|&b| b)
            })
            .collect();
        e.slices = counted.first().zip(counted.last()).map(|(a, b)| [*a, *b]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    const LEVELS: Levels = Levels {
        blood: 1.0,
        wall: 0.28,
        dark: 0.04,
    };

    /// A disc of blood (1.0) of radius 10 px in a wall ring out to `wall_px`, then lung (0.04).
    fn disc(wall_px: f64) -> (Array2<f32>, Array2<bool>) {
        let n = 64;
        let c = 31.5;
        let image = Array2::from_shape_fn((n, n), |(r, k)| {
            let d = (r as f64 - c).hypot(k as f64 - c);
            if d <= 10.0 {
                1.0
            } else if d <= 10.0 + wall_px {
                0.28
            } else {
                0.04
            }
        });
        let mask = image.mapv(|v| v > 0.6);
        (image, mask)
    }

    #[test]
    fn thick_wall_covers_the_border_and_a_thin_one_does_not() {
        // Analytic: a ring of wall all round covers every ray; a 1 px wall (2 mm at 2 mm
        // pixels) covers none, since three of the four samples at 1.5–6 mm lie in lung.
        let rule = ExtentRule::default();
        let (img, mask) = disc(5.0);
        let cover = scan_border(img.view(), mask.view(), LEVELS, (2.0, 2.0), &rule).cover();
        assert_eq!(cover, 1.0);
        let (img, mask) = disc(1.0);
        let cover = scan_border(img.view(), mask.view(), LEVELS, (2.0, 2.0), &rule).cover();
        assert_eq!(cover, 0.0);
    }

    #[test]
    fn half_wall_gives_half_cover() {
        // Wall on the right half only (columns right of the centre): the share of rays
        // pointing right is one half, within one ray each side of the dividing line.
        let rule = ExtentRule::default();
        let (mut img, mask) = disc(5.0);
        for ((_, k), v) in img.indexed_iter_mut() {
            if (k as f64) < 31.5 && *v < 0.5 {
                *v = 0.04;
            }
        }
        let cover = scan_border(img.view(), mask.view(), LEVELS, (2.0, 2.0), &rule).cover();
        assert!((cover - 0.5).abs() <= 2.0 / 64.0, "cover {cover}");
    }

    #[test]
    fn gap_in_the_wall_is_closed_by_a_straight_line() {
        // A disc of blood with wall on the right half and, on the left, a bright bulge
        // (atrium-like) joined to it with only lung around. The myocardial arc's ends lie
        // on the vertical through the centre, so closing across the gap keeps the right half
        // disc: π·10²/2 ≈ 157 px, within 15 px (pixel steps along the arc and the chord,
        // plus the bulge's pull on the centroid).
        let rule = ExtentRule::default();
        let (mut img, _) = disc(5.0);
        for ((r, k), v) in img.indexed_iter_mut() {
            let (dr, dk) = (r as f64 - 31.5, k as f64 - 31.5);
            if dk < 0.0 && *v < 0.5 {
                *v = 0.04;
            }
            if dk < -5.0 && dk > -16.0 && dr.abs() < 6.0 {
                *v = 1.0;
            }
        }
        let mut mask = img.mapv(|v| v > 0.6);
        let scan = scan_border(img.view(), mask.view(), LEVELS, (2.0, 2.0), &rule);
        let cover = scan.cover();
        assert!((0.4..0.6).contains(&cover), "cover {cover}");
        scan.close_across_gaps(&mut mask);
        let area = mask.iter().filter(|&&b| b).count() as f64;
        let half = std::f64::consts::PI * 100.0 / 2.0;
        assert!((area - half).abs() <= 15.0, "area {area} vs {half:.0}");
        assert!(
            mask.indexed_iter().all(|((_, k), &m)| !m || k >= 29),
            "left part cut"
        );
    }
}
