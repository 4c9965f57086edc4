//! Image panels for the report: for every measured run of a subject, the primary seed's slice
//! at the reference's ED and ES frames, cropped around the LV, side by side with the LV contour
//! drawn, in one window/level per subject (0 to the 99.5th percentile of the reference's
//! slice), magnified 4× (nearest neighbour) so the contour stays crisp in print.

use std::path::{Path, PathBuf};

use image::{Rgb, RgbImage};
use ndarray::{s, ArrayView2, ArrayView4, Axis};

use crate::io::png::{grey, on_edge, write_rgb, CONTOUR, GAP};
use crate::io::IoError;

/// Magnification of the crops.
pub const ZOOM: u32 = 4;

/// The panel file of one run, inside `dir`.
pub fn file(dir: &Path, subject: &str, method: &str, pattern: &str, accel: f64) -> PathBuf {
    let clean = |t: &str| -> String {
        t.chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || c == '.' {
                    c
                } else {
                    '-'
                }
            })
            .collect()
    };
    dir.join(format!(
        "{}_{}_{}_R{}.png",
        clean(subject),
        clean(method),
        clean(pattern),
        clean(&format!("{accel}"))
    ))
}

/// Crop box `(rows, cols)` around the reference's LV at ED on `slice`: a square 1.8× the
/// mask's larger extent plus 8 px, clipped to the image.
pub fn crop_box(
    ref_masks: ArrayView4<bool>,
    slice: usize,
    ed: usize,
) -> (std::ops::Range<usize>, std::ops::Range<usize>) {
    let m = ref_masks.slice(s![slice, ed, .., ..]);
    let (nr, nc) = m.dim();
    let pts: Vec<(usize, usize)> = m
        .indexed_iter()
        .filter(|(_, &b)| b)
        .map(|(p, _)| p)
        .collect();
    if pts.is_empty() {
        return (0..nr, 0..nc);
    }
    let (r0, r1) = pts
        .iter()
        .fold((nr, 0), |(a, b), p| (a.min(p.0), b.max(p.0)));
    let (c0, c1) = pts
        .iter()
        .fold((nc, 0), |(a, b), p| (a.min(p.1), b.max(p.1)));
    let half = ((r1 - r0).max(c1 - c0) as f64 * 0.9) as usize + 8;
    let (cr, cc) = ((r0 + r1) / 2, (c0 + c1) / 2);
    let span = |c: usize, n: usize| {
        let lo = c.saturating_sub(half);
        let hi = (c + half + 1).min(n);
        lo..hi
    };
    (span(cr, nr), span(cc, nc))
}

/// Writes one run's ED | ES panel pair.
///
/// # Errors
/// [`IoError`] naming the file.
#[allow(clippy::too_many_arguments)]
pub fn write_pair(
    path: &Path,
    stack: ArrayView4<f32>,
    masks: ArrayView4<bool>,
    slice: usize,
    (ed, es): (usize, usize),
    crop: &(std::ops::Range<usize>, std::ops::Range<usize>),
    window: (f32, f32),
) -> Result<(), IoError> {
    let (h, w) = (crop.0.len() as u32, crop.1.len() as u32);
    let mut img = RgbImage::from_pixel(2 * w * ZOOM + GAP, h * ZOOM, Rgb([255, 255, 255]));
    for (k, f) in [ed, es].into_iter().enumerate() {
        let im: ArrayView2<f32> = stack.slice(s![slice, f, crop.0.clone(), crop.1.clone()]);
        let full = masks.index_axis(Axis(0), slice).index_axis_move(Axis(0), f);
        let m = full.slice_move(s![crop.0.clone(), crop.1.clone()]);
        let x0 = k as u32 * (w * ZOOM + GAP);
        for ((r, c), v) in im.indexed_iter() {
            let px = if on_edge(&m, r, c) {
                CONTOUR
            } else {
                [grey(*v, window.0, window.1); 3]
            };
            for dy in 0..ZOOM {
                for dx in 0..ZOOM {
                    img.put_pixel(x0 + c as u32 * ZOOM + dx, r as u32 * ZOOM + dy, Rgb(px));
                }
            }
        }
    }
    write_rgb(path, &img)
}

/// Window of a subject's panels: 0 to the 99.5th percentile of the reference's `slice`.
pub fn window(ref_stack: ArrayView4<f32>, slice: usize) -> (f32, f32) {
    let mut v: Vec<f32> = ref_stack
        .index_axis(Axis(0), slice)
        .iter()
        .copied()
        .collect();
    v.sort_by(f32::total_cmp);
    let hi = v
        .get(((v.len().max(1) - 1) as f64 * 0.995) as usize)
        .copied()
        .unwrap_or(1.0);
    (0.0, hi.max(f32::MIN_POSITIVE))
}
