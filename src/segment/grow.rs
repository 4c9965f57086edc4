//! Seeded region growing of a bright blood pool in one 2-D image.
//!
//! The growth criterion comes from the image: a threshold halfway between the blood
//! signal (median inside the region) and the wall signal (median of a ring just outside
//! it), refined a few times from an initial local Otsu threshold. Halfway is where a pixel
//! that is half blood and half wall sits, so partial-volume pixels are counted when they
//! are at least half blood. The region is the 4-connected component of the seed above the
//! threshold; enclosed holes (papillary muscles, trabeculae) are filled.

use image::{GrayImage, Luma};
use imageproc::distance_transform::{euclidean_squared_distance_transform, Norm};
use imageproc::morphology::{dilate, erode};
use imageproc::region_labelling::{connected_components, Connectivity};
use ndarray::{Array2, ArrayView2};

/// A grown region and the levels that defined it.
#[derive(Debug, Clone, PartialEq)]
pub struct Region {
    /// Blood pool with holes filled, `[row, col]`.
    pub mask: Array2<bool>,
    /// Threshold used.
    pub threshold: f32,
    /// Median signal inside (blood).
    pub blood: f32,
    /// Median signal of the ring outside (wall).
    pub wall: f32,
}

impl Region {
    /// Pixels in the region (holes filled).
    pub fn area_px(&self) -> usize {
        self.mask.iter().filter(|&&b| b).count()
    }
}

/// Why growth failed in one image.
#[derive(Debug, Clone, PartialEq)]
pub enum GrowFailure {
    /// The start point is not brighter than the blood threshold.
    Dark {
        /// Median around the start point.
        value: f32,
        /// Threshold it had to exceed.
        threshold: f32,
    },
    /// The region covers more than the allowed fraction of the image.
    Runaway {
        /// Fraction of the image covered.
        fraction: f64,
    },
}

/// How papillary muscles and trabeculae are counted (both are accepted practice; every
/// output says which was used).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum BloodPoolConvention {
    /// Counted in the blood pool: every hole enclosed by the region is filled.
    PapillaryIncluded,
    /// Left out: enclosed holes stay out of the region, except specks of at most
    /// [`NOISE_HOLE_PX`] pixels, which are noise rather than muscle.
    PapillaryExcluded,
}

impl BloodPoolConvention {
    /// Text written in every output.
    pub fn describe(self) -> &'static str {
        match self {
            BloodPoolConvention::PapillaryIncluded => {
                "papillary muscles and trabeculae included in the blood pool"
            }
            BloodPoolConvention::PapillaryExcluded => {
                "papillary muscles and trabeculae excluded from the blood pool"
            }
        }
    }
}

/// Enclosed holes up to this size (px) are filled under either convention: a papillary
/// muscle seen in a slice spans tens of pixels at cine resolution, a noise speck one or two.
pub const NOISE_HOLE_PX: usize = 2;

/// Parameters of growth in one image.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GrowParams {
    /// Half-width (px) of the square window whose median is the seed's signal.
    pub seed_radius_px: usize,
    /// Half-width (px) of the window for the initial local Otsu threshold.
    pub otsu_radius_px: usize,
    /// Largest fraction of the image a blood pool may cover.
    pub max_area_fraction: f64,
    /// Refinement passes of the halfway threshold.
    pub refinements: usize,
    /// Regions smaller than this (px) keep the threshold they were given.
    pub min_refine_px: usize,
    /// Blood-pool convention (which enclosed holes are filled).
    pub convention: BloodPoolConvention,
}

impl Default for GrowParams {
    fn default() -> Self {
        GrowParams {
            seed_radius_px: 1,
            otsu_radius_px: 28,
            max_area_fraction: 0.25,
            refinements: 4,
            min_refine_px: 25,
            convention: BloodPoolConvention::PapillaryIncluded,
        }
    }
}

/// Median of a slice of values (upper median for even lengths); `None` when empty.
pub fn median(values: &mut [f32]) -> Option<f32> {
    if values.is_empty() {
        return None;
    }
    let mid = values.len() / 2;
    let (_, m, _) = values.select_nth_unstable_by(mid, f32::total_cmp);
    Some(*m)
}

/// Otsu's threshold (Otsu 1979) of `values`, computed by imageproc on a 256-bin
/// quantisation between the minimum and the maximum.
pub fn otsu(values: &[f32]) -> f32 {
    let lo = values.iter().cloned().fold(f32::INFINITY, f32::min);
    let hi = values.iter().cloned().fold(f32::NEG_INFINITY, f32::max);
    if hi.is_nan() || hi <= lo {
        return lo;
    }
    let scale = 255.0 / (hi - lo);
    let img = GrayImage::from_fn(values.len() as u32, 1, |x, _| {
        Luma([((values[x as usize] - lo) * scale).round() as u8])
    });
    let level = imageproc::contrast::otsu_level(&img);
    // Pixels above `level` form the bright class; put the threshold between the bins.
    lo + (f32::from(level) + 0.5) / scale
}

/// Labels of the 4- or 8-connected components of the true pixels of `mask` (0 = false).
///
/// imageproc 0.27 panics on a 1×1 image with a foreground pixel; that case is labelled here.
/// Connected-component labels of a mask (0 for background).
pub fn label(mask: ArrayView2<bool>, conn: Connectivity) -> Array2<u32> {
    if mask.len() == 1 {
        return mask.mapv(u32::from);
    }
    let labels = connected_components(&to_gray(mask), conn, Luma([0u8]));
    Array2::from_shape_fn(mask.dim(), |(r, c)| labels.get_pixel(c as u32, r as u32)[0])
}

/// Converts a boolean mask `[row, col]` to an 8-bit image (255 where true).
pub fn to_gray(mask: ArrayView2<bool>) -> GrayImage {
    let (rows, cols) = mask.dim();
    GrayImage::from_fn(cols as u32, rows as u32, |x, y| {
        Luma([if mask[(y as usize, x as usize)] {
            255
        } else {
            0
        }])
    })
}

pub(crate) fn from_gray(img: &GrayImage) -> Array2<bool> {
    Array2::from_shape_fn((img.height() as usize, img.width() as usize), |(r, c)| {
        img.get_pixel(c as u32, r as u32)[0] != 0
    })
}

/// The 4-connected component of pixels `>= threshold` that contains `start`.
pub fn component(image: ArrayView2<f32>, threshold: f32, start: (usize, usize)) -> Array2<bool> {
    let bin = image.mapv(|v| v >= threshold);
    if !bin[start] {
        return Array2::from_elem(bin.dim(), false);
    }
    let labels = label(bin.view(), Connectivity::Four);
    let target = labels[start];
    labels.mapv(|l| l == target)
}

/// Fills holes: background pixels (8-connected) that cannot reach the image border.
pub fn fill_holes(mask: ArrayView2<bool>) -> Array2<bool> {
    fill_holes_up_to(mask, usize::MAX)
}

/// Fills the holes (8-connected background components not reaching the border) of at most
/// `max_px` pixels.
pub fn fill_holes_up_to(mask: ArrayView2<bool>, max_px: usize) -> Array2<bool> {
    let (rows, cols) = mask.dim();
    let outside = mask.mapv(|b| !b);
    let labels = label(outside.view(), Connectivity::Eight);
    let mut touches = std::collections::BTreeSet::new();
    let mut sizes = std::collections::BTreeMap::<u32, usize>::new();
    for ((r, c), l) in labels.indexed_iter() {
        if r == 0 || c == 0 || r + 1 == rows || c + 1 == cols {
            touches.insert(*l);
        }
        *sizes.entry(*l).or_default() += 1;
    }
    Array2::from_shape_fn((rows, cols), |p| {
        let l = labels[p];
        mask[p] || (!touches.contains(&l) && sizes[&l] <= max_px)
    })
}

/// The region of a thresholded component under a blood-pool convention.
fn complete(component: Array2<bool>, convention: BloodPoolConvention) -> Array2<bool> {
    match convention {
        BloodPoolConvention::PapillaryIncluded => fill_holes(component.view()),
        BloodPoolConvention::PapillaryExcluded => fill_holes_up_to(component.view(), NOISE_HOLE_PX),
    }
}

/// The pixel of `mask` farthest from its outside (Euclidean), among those where `ok` holds;
/// ties go to the first in row-major order.
pub fn deepest_point(
    mask: ArrayView2<bool>,
    ok: impl Fn(usize, usize) -> bool,
) -> Option<(usize, usize)> {
    let outside = to_gray(mask.mapv(|b| !b).view());
    let dist = euclidean_squared_distance_transform(&outside);
    let mut best: Option<((usize, usize), f64)> = None;
    for ((r, c), &inside) in mask.indexed_iter() {
        if inside && ok(r, c) {
            let d = dist.get_pixel(c as u32, r as u32)[0];
            if best.is_none_or(|(_, bd)| d > bd) {
                best = Some(((r, c), d));
            }
        }
    }
    best.map(|(p, _)| p)
}

fn window(image: ArrayView2<f32>, centre: (usize, usize), radius: usize) -> Vec<f32> {
    let (rows, cols) = image.dim();
    let (r0, r1) = (
        centre.0.saturating_sub(radius),
        (centre.0 + radius + 1).min(rows),
    );
    let (c0, c1) = (
        centre.1.saturating_sub(radius),
        (centre.1 + radius + 1).min(cols),
    );
    image
        .slice(ndarray::s![r0..r1, c0..c1])
        .iter()
        .cloned()
        .collect()
}

/// Blood and wall levels of a region: median of its above-threshold interior, median of a
/// ring 2–3 px outside it.
pub(crate) fn levels(
    image: ArrayView2<f32>,
    region: &Array2<bool>,
    threshold: f32,
) -> (Option<f32>, Option<f32>) {
    let g = to_gray(region.view());
    let interior = from_gray(&erode(&g, Norm::LInf, 1));
    let use_interior = interior.iter().filter(|&&b| b).count() >= 9;
    let mut inside: Vec<f32> = image
        .indexed_iter()
        .filter(|(p, v)| {
            (if use_interior {
                interior[*p]
            } else {
                region[*p]
            }) && **v >= threshold
        })
        .map(|(_, v)| *v)
        .collect();
    let near = from_gray(&dilate(&g, Norm::LInf, 1));
    let far = from_gray(&dilate(&g, Norm::LInf, 3));
    let mut ring: Vec<f32> = image
        .indexed_iter()
        .filter(|(p, _)| far[*p] && !near[*p])
        .map(|(_, v)| *v)
        .collect();
    (median(&mut inside), median(&mut ring))
}

/// Grows the blood pool from `seed`. `hint` is a threshold carried over from a neighbouring
/// frame or slice; without it, the initial threshold is Otsu's in a window around the seed.
///
/// # Errors
/// [`GrowFailure::Dark`] when the seed is not in a bright region, [`GrowFailure::Runaway`]
/// when the region covers too much of the image.
pub fn grow(
    image: ArrayView2<f32>,
    seed: (usize, usize),
    hint: Option<f32>,
    p: &GrowParams,
) -> Result<Region, GrowFailure> {
    grow_with(image, seed, hint, None, p, image.len())
}

/// Like [`grow`] from a threshold carried over, on a window of an image of `image_len`
/// pixels (the area limit is a fraction of the whole image). `blood`: see
/// [`grow_from_neighbour`].
///
/// # Errors
/// As [`grow`].
pub fn grow_in_window(
    window: ArrayView2<f32>,
    start: (usize, usize),
    threshold: f32,
    blood: Option<f32>,
    p: &GrowParams,
    image_len: usize,
) -> Result<Region, GrowFailure> {
    grow_with(window, start, Some(threshold), blood, p, image_len)
}

/// Like [`grow`] from a neighbouring slice's region, with that region's blood level kept:
/// the threshold is refined halfway between `blood` and this image's wall level. A basal or
/// apical slice only partly inside the cavity has no pure blood of its own; its own median
/// would pull the threshold down and count pixels that are mostly outside the cavity (the
/// half-blood rule for partial-volume pixels is common practice).
///
/// # Errors
/// As [`grow`].
pub fn grow_from_neighbour(
    image: ArrayView2<f32>,
    start: (usize, usize),
    threshold: f32,
    blood: f32,
    p: &GrowParams,
) -> Result<Region, GrowFailure> {
    grow_with(image, start, Some(threshold), Some(blood), p, image.len())
}

fn grow_with(
    image: ArrayView2<f32>,
    seed: (usize, usize),
    hint: Option<f32>,
    blood_level: Option<f32>,
    p: &GrowParams,
    image_len: usize,
) -> Result<Region, GrowFailure> {
    // A user's seed is judged by the median of its neighbourhood (robust to a noisy pixel);
    // a propagated start point, already chosen bright, by its own value.
    let seed_value = match hint {
        Some(_) => image[seed],
        None => median(&mut window(image, seed, p.seed_radius_px)).unwrap_or(0.0),
    };
    let mut threshold = match hint {
        Some(t) => t,
        None => {
            // The seed must be brighter than the body/background split of the whole image
            // and than the local split of bright and dark tissue.
            let all: Vec<f32> = image.iter().cloned().collect();
            let global = otsu(&all);
            if seed_value < global {
                return Err(GrowFailure::Dark {
                    value: seed_value,
                    threshold: global,
                });
            }
            otsu(&window(image, seed, p.otsu_radius_px))
        }
    };
    let mut region = None;
    for pass in 0..=p.refinements {
        if seed_value < threshold {
            return Err(GrowFailure::Dark {
                value: seed_value,
                threshold,
            });
        }
        let start = brightest_near(image, seed);
        let grown = complete(component(image, threshold, start), p.convention);
        let area = grown.iter().filter(|&&b| b).count();
        if area == 0 {
            return Err(GrowFailure::Dark {
                value: image[start],
                threshold,
            });
        }
        let fraction = area as f64 / image_len as f64;
        if fraction > p.max_area_fraction {
            return Err(GrowFailure::Runaway { fraction });
        }
        let (blood, wall) = levels(image, &grown, threshold);
        let blood = blood_level.or(blood).unwrap_or(seed_value);
        let wall = wall.unwrap_or(threshold);
        region = Some(Region {
            mask: grown,
            threshold,
            blood,
            wall,
        });
        if pass == p.refinements || area < p.min_refine_px {
            break;
        }
        let next = 0.5 * (blood + wall);
        if (next - threshold).abs() <= 0.005 * blood.abs() {
            break;
        }
        threshold = next;
    }
    Ok(region.expect("at least one pass runs"))
}

/// The seed itself, or the brightest pixel of its 3×3 neighbourhood (noise can leave a seed
/// pixel just under the threshold while its neighbourhood is blood).
fn brightest_near(image: ArrayView2<f32>, seed: (usize, usize)) -> (usize, usize) {
    let (rows, cols) = image.dim();
    let mut best = seed;
    for r in seed.0.saturating_sub(1)..(seed.0 + 2).min(rows) {
        for c in seed.1.saturating_sub(1)..(seed.1 + 2).min(cols) {
            if image[(r, c)] > image[best] {
                best = (r, c);
            }
        }
    }
    best
}
