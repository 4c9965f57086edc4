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
    write_rgb(path, &img)
}

/// Writes an RGB image as PNG, atomically.
///
/// # Errors
/// [`IoError`] naming the file.
pub fn write_rgb(path: &Path, img: &RgbImage) -> Result<(), IoError> {
    write_atomic_with(path, |f| {
        image::codecs::png::PngEncoder::new(std::io::BufWriter::new(f))
            .write_image(
                img.as_raw(),
                img.width(),
                img.height(),
                image::ExtendedColorType::Rgb8,
            )
            .map_err(std::io::Error::other)
    })
}

/// Digits 0–9 in a 3 × 5 pixel font, one row of 3 bits per entry (most significant bit left).
const DIGITS: [[u8; 5]; 10] = [
    [7, 5, 5, 5, 7],
    [2, 6, 2, 2, 7],
    [7, 1, 7, 4, 7],
    [7, 1, 7, 1, 7],
    [5, 5, 7, 1, 1],
    [7, 4, 7, 1, 7],
    [7, 4, 7, 5, 7],
    [7, 1, 2, 2, 2],
    [7, 5, 7, 5, 7],
    [7, 5, 7, 1, 7],
];

/// Draws the decimal number `n` with its top-left corner at `(x, y)`, 4 px per digit.
fn draw_number(img: &mut RgbImage, x: u32, y: u32, n: usize, colour: [u8; 3]) {
    for (i, ch) in n.to_string().bytes().enumerate() {
        let glyph = DIGITS[usize::from(ch - b'0')];
        for (dy, bits) in glyph.iter().enumerate() {
            for dx in 0..3u32 {
                let (px, py) = (x + 4 * i as u32 + dx, y + dy as u32);
                if bits & (4 >> dx) != 0 && px < img.width() && py < img.height() {
                    img.put_pixel(px, py, Rgb(colour));
                }
            }
        }
    }
}

/// One slice of a seed sheet: the image and the proposed seed `(row, col)`, if any.
pub type SheetTile<'a> = (ArrayView2<'a, f32>, Option<(usize, usize)>);

/// Magnification of the image in a seed sheet.
pub const SHEET_SCALE: u32 = 2;
/// Grid spacing of a seed sheet, in image pixels; every second line is labelled.
pub const SHEET_GRID: usize = 10;
/// Seed-sheet colours: grid, labels, slice number, proposed seed.
const GRID: [u8; 3] = [40, 70, 140];
const LABEL: [u8; 3] = [200, 200, 200];
const SLICE: [u8; 3] = [240, 200, 40];
const PROPOSAL: [u8; 3] = [230, 40, 40];

/// Writes a seed sheet: one tile per slice (slice number in yellow at the top), each image
/// magnified [`SHEET_SCALE`] times under a grid every [`SHEET_GRID`] pixels with row and column
/// numbers every second line, and the proposed seed, if any, as a red cross; four tiles per row.
///
/// # Errors
/// [`IoError`] naming the file; slices of different sizes.
pub fn write_seed_sheet(
    path: &Path,
    slices: &[SheetTile],
    window: (f32, f32),
) -> Result<(), IoError> {
    let Some((first, _)) = slices.first() else {
        return Err(IoError::content(path, "no slices to draw"));
    };
    let (nr, nc) = first.dim();
    if slices.iter().any(|(im, _)| im.dim() != (nr, nc)) {
        return Err(IoError::content(path, "slices must all have one size"));
    }
    let (left, top) = (14u32, 14u32);
    let (tw, th) = (
        left + SHEET_SCALE * nc as u32 + GAP,
        top + SHEET_SCALE * nr as u32 + GAP,
    );
    let per_row = 4.min(slices.len()) as u32;
    let rows = (slices.len() as u32).div_ceil(per_row);
    let mut img = RgbImage::new(per_row * tw, rows * th);
    for (k, (im, seed)) in slices.iter().enumerate() {
        let (x0, y0) = ((k as u32 % per_row) * tw, (k as u32 / per_row) * th);
        draw_number(&mut img, x0 + 1, y0 + 1, k, SLICE);
        for ((r, c), v) in im.indexed_iter() {
            let on_grid = r % SHEET_GRID == 0 || c % SHEET_GRID == 0;
            let g = grey(*v, window.0, window.1);
            for (dy, dx) in [(0, 0), (0, 1), (1, 0), (1, 1)] {
                let grid_px = on_grid
                    && ((r % SHEET_GRID == 0 && dy == 0) || (c % SHEET_GRID == 0 && dx == 0));
                let px = if grid_px { GRID } else { [g; 3] };
                img.put_pixel(
                    x0 + left + SHEET_SCALE * c as u32 + dx,
                    y0 + top + SHEET_SCALE * r as u32 + dy,
                    Rgb(px),
                );
            }
        }
        for c in (0..nc).step_by(2 * SHEET_GRID) {
            draw_number(
                &mut img,
                x0 + left + SHEET_SCALE * c as u32,
                y0 + 8,
                c,
                LABEL,
            );
        }
        for r in (0..nr).step_by(2 * SHEET_GRID) {
            draw_number(
                &mut img,
                x0 + 1,
                y0 + top + SHEET_SCALE * r as u32,
                r,
                LABEL,
            );
        }
        if let Some((r, c)) = seed {
            let (cx, cy) = (
                (x0 + left + SHEET_SCALE * *c as u32) as i64,
                (y0 + top + SHEET_SCALE * *r as u32) as i64,
            );
            for d in -4i64..=5 {
                for (x, y) in [(cx + d, cy), (cx, cy + d)] {
                    if x >= 0 && y >= 0 && (x as u32) < img.width() && (y as u32) < img.height() {
                        img.put_pixel(x as u32, y as u32, Rgb(PROPOSAL));
                    }
                }
            }
        }
    }
    write_rgb(path, &img)
}
