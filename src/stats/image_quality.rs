//! Image quality of a reconstruction against the reference: NRMSE, PSNR and SSIM (Wang et al.
//! 2004, IEEE Trans Image Process 13:600: Gaussian window σ = 1.5 truncated at 3.5σ, i.e.
//! 11 × 11, K1 = 0.01, K2 = 0.03, population covariances, borders reflected).

use ndarray::{Array2, ArrayView2, Zip};

/// Normalised root-mean-square error `‖test − ref‖ / ‖ref‖`; `None` for an all-zero reference.
pub fn nrmse(test: ArrayView2<f64>, reference: ArrayView2<f64>) -> Option<f64> {
    let num: f64 = Zip::from(&test)
        .and(&reference)
        .fold(0.0, |s, t, r| s + (t - r).powi(2));
    let den: f64 = reference.iter().map(|r| r * r).sum();
    (den > 0.0).then(|| (num / den).sqrt())
}

/// Peak signal-to-noise ratio in dB, `10·log10(range² / MSE)`; `None` for identical images.
pub fn psnr(test: ArrayView2<f64>, reference: ArrayView2<f64>, data_range: f64) -> Option<f64> {
    let mse = Zip::from(&test)
        .and(&reference)
        .fold(0.0, |s, t, r| s + (t - r).powi(2))
        / test.len() as f64;
    (mse > 0.0).then(|| 10.0 * (data_range * data_range / mse).log10())
}

/// Half-width of the Gaussian window: `int(3.5·σ + 0.5)` = 5 for σ = 1.5.
const RADIUS: usize = 5;
const SIGMA: f64 = 1.5;

fn kernel() -> [f64; 2 * RADIUS + 1] {
    let mut k = [0.0; 2 * RADIUS + 1];
    for (i, w) in k.iter_mut().enumerate() {
        let x = i as f64 - RADIUS as f64;
        *w = (-x * x / (2.0 * SIGMA * SIGMA)).exp();
    }
    let s: f64 = k.iter().sum();
    k.map(|w| w / s)
}

/// Index reflected at the borders, edge sample repeated (`d c b a | a b c d`).
fn reflect(i: isize, n: usize) -> usize {
    let n = n as isize;
    let period = 2 * n;
    let mut j = i.rem_euclid(period);
    if j >= n {
        j = period - 1 - j;
    }
    j as usize
}

/// Separable Gaussian filter with reflected borders. Each output is the taps' products
/// added in tap order (rows first, then columns), over a reflected copy of each row and over
/// whole rows at a time, so the loops run on contiguous memory.
fn blur(img: &Array2<f64>) -> Array2<f64> {
    let k = kernel();
    let (rows, cols) = img.dim();
    let mut tmp = Array2::<f64>::zeros((rows, cols));
    let mut padded = vec![0.0; cols + 2 * RADIUS];
    for (src, mut dst) in img.outer_iter().zip(tmp.outer_iter_mut()) {
        for (j, p) in padded.iter_mut().enumerate() {
            *p = src[reflect(j as isize - RADIUS as isize, cols)];
        }
        for (c, o) in dst.iter_mut().enumerate() {
            let window = &padded[c..c + k.len()];
            *o = k.iter().zip(window).map(|(w, v)| w * v).sum();
        }
    }
    let mut out = Array2::<f64>::zeros((rows, cols));
    for (r, mut dst) in out.outer_iter_mut().enumerate() {
        for (i, w) in k.iter().enumerate() {
            let src = tmp.row(reflect(r as isize + i as isize - RADIUS as isize, rows));
            dst.zip_mut_with(&src, |o, v| *o += w * v);
        }
    }
    out
}

/// SSIM map of `test` against `reference` for the given dynamic range.
pub fn ssim_map(test: ArrayView2<f64>, reference: ArrayView2<f64>, data_range: f64) -> Array2<f64> {
    let (x, y) = (reference.to_owned(), test.to_owned());
    let ux = blur(&x);
    let uy = blur(&y);
    let uxx = blur(&(&x * &x));
    let uyy = blur(&(&y * &y));
    let uxy = blur(&(&x * &y));
    let c1 = (0.01 * data_range).powi(2);
    let c2 = (0.03 * data_range).powi(2);
    let mut s = Array2::<f64>::zeros(x.dim());
    Zip::from(&mut s)
        .and(&ux)
        .and(&uy)
        .and(&uxx)
        .and(&uyy)
        .and(&uxy)
        .for_each(|s, &ux, &uy, &uxx, &uyy, &uxy| {
            let (vx, vy, vxy) = (uxx - ux * ux, uyy - uy * uy, uxy - ux * uy);
            *s = ((2.0 * ux * uy + c1) * (2.0 * vxy + c2))
                / ((ux * ux + uy * uy + c1) * (vx + vy + c2));
        });
    s
}

/// Mean SSIM over the image, leaving out a border as wide as the window's half-width (as the
/// reference implementations do).
pub fn ssim(test: ArrayView2<f64>, reference: ArrayView2<f64>, data_range: f64) -> f64 {
    ssim_of_map(ssim_map(test, reference, data_range).view())
}

/// The mean SSIM of [`ssim`] from an SSIM map already computed.
pub fn ssim_of_map(map: ArrayView2<f64>) -> f64 {
    let (rows, cols) = map.dim();
    let inner = map.slice(ndarray::s![RADIUS..rows - RADIUS, RADIUS..cols - RADIUS]);
    inner.mean().unwrap_or(f64::NAN)
}

/// Mean of an SSIM map inside `mask`; `None` for an empty mask.
pub fn mean_in(map: ArrayView2<f64>, mask: ArrayView2<bool>) -> Option<f64> {
    let (n, s) =
        Zip::from(&map).and(&mask).fold(
            (0usize, 0.0),
            |(n, s), v, &m| if m { (n + 1, s + v) } else { (n, s) },
        );
    (n > 0).then(|| s / n as f64)
}
