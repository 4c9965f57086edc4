//! PNG previews: image panels side by side with the LV contour drawn on them.

use std::path::Path;

use image::{ImageEncoder, Rgb, RgbImage};
use ndarray::ArrayView2;

use super::{write_atomic_with, IoError};

/// Contour colour (a saturated teal, distinct from grey anatomy).
pub const CONTOUR: [u8; 3] = [0, 200, 190];
/// Gap between panels, in pixels (black).
pub const GAP: u32 = 4;

/// Whether pixel `(r, c)` of `mask` is on the region's edge: inside, with a 4-neighbour
/// outside the region or outside the image.
pub fn on_edge(mask: &ArrayView2<bool>, r: usize, c: usize) -> bool {
    let (nr, nc) = mask.dim();
    mask[(r, c)]
        && (r == 0
            || c == 0
            || r + 1 == nr
            || c + 1 == nc
            || !mask[(r - 1, c)]
            || !mask[(r + 1, c)]
            || !mask[(r, c - 1)]
            || !mask[(r, c + 1)])
}

/// Grey level of `v` in the window `[lo, hi]`: `round(255·(v − lo)/(hi − lo))`, clamped.
pub fn grey(v: f32, lo: f32, hi: f32) -> u8 {
    let t = if hi > lo { (v - lo) / (hi - lo) } else { 0.0 };
    (255.0 * t.clamp(0.0, 1.0)).round() as u8
}

/// Writes panels of equal size side by side (same window for all), each with the edge of
/// its mask in [`CONTOUR`], atomically.
///
/// # Errors
/// [`IoError`] naming the file; panels of different sizes.
pub fn write_panels(
    path: &Path,
    panels: &[(ArrayView2<f32>, ArrayView2<bool>)],
    window: (f32, f32),
) -> Result<(), IoError> {
    let Some((first, _)) = panels.first() else {
        return Err(IoError::content(path, "no panels to draw"));
    };
    let (nr, nc) = first.dim();
    if panels
        .iter()
        .any(|(im, m)| im.dim() != (nr, nc) || m.dim() != (nr, nc))
    {
        return Err(IoError::content(
            path,
            "panels and masks must all have one size",
        ));
    }
    let n = panels.len() as u32;
    let width = n * nc as u32 + (n - 1) * GAP;
    let mut img = RgbImage::new(width, nr as u32);
    for (i, (im, mask)) in panels.iter().enumerate() {
        let x0 = i as u32 * (nc as u32 + GAP);
        for ((r, c), v) in im.indexed_iter() {
            let px = if on_edge(mask, r, c) {
                CONTOUR
            } else {
                [grey(*v, window.0, window.1); 3]
            };
            img.put_pixel(x0 + c as u32, r as u32, Rgb(px));
        }
    }
    write_atomic_with(path, |f| {
        image::codecs::png::PngEncoder::new(std::io::BufWriter::new(f))
            .write_image(
                img.as_raw(),
                width,
                nr as u32,
                image::ExtendedColorType::Rgb8,
            )
            .map_err(std::io::Error::other)
    })
}
