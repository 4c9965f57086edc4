//! How closely one reconstruction follows the reference reconstruction of the same subject:
//! image quality (NRMSE, PSNR, SSIM over the whole stack and near the LV) and overlap of the
//! LV masks (Dice per frame, 95th-percentile Hausdorff distance at ED and ES).

use imageproc::distance_transform::Norm;
use imageproc::morphology::dilate;
use ndarray::{ArrayView4, Axis};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::geometry::Geometry;
use crate::segment::grow::{from_gray, to_gray};
use crate::stats::image_quality::{mean_in, nrmse, psnr, ssim_map, ssim_of_map};
use crate::stats::overlap::{dice, hausdorff95};

/// LV region for the local SSIM: the reference's mask dilated by this many pixels.
pub const LV_MARGIN_PX: u8 = 5;

/// Fidelity of one reconstruction to the reference (`null` where undefined).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Fidelity {
    /// ‖test − ref‖ / ‖ref‖ over the whole stack.
    pub nrmse: Option<f64>,
    /// PSNR over the whole stack (dB), range = the reference's max − min.
    pub psnr_db: Option<f64>,
    /// Mean SSIM over every slice and frame image.
    pub ssim: f64,
    /// Mean SSIM inside the reference's LV mask dilated by [`LV_MARGIN_PX`].
    pub ssim_lv: Option<f64>,
    /// Dice of the LV masks, mean over frames.
    pub dice_mean: Option<f64>,
    /// Dice at the reference's ED frame.
    pub dice_ed: Option<f64>,
    /// Dice at the reference's ES frame.
    pub dice_es: Option<f64>,
    /// 95th-percentile Hausdorff distance at ED (mm).
    pub hd95_ed_mm: Option<f64>,
    /// 95th-percentile Hausdorff distance at ES (mm).
    pub hd95_es_mm: Option<f64>,
}

/// Fidelity of `test` (images and LV masks, `[slice, frame, row, col]`) to `reference`, with
/// the reference's ED and ES frames.
pub fn fidelity(
    test: ArrayView4<f32>,
    reference: ArrayView4<f32>,
    test_masks: ArrayView4<bool>,
    ref_masks: ArrayView4<bool>,
    geom: &Geometry,
    (ed, es): (usize, usize),
) -> Fidelity {
    let (ns, nf, _, _) = reference.dim();
    let t64 = test.mapv(f64::from);
    let r64 = reference.mapv(f64::from);
    // The whole stack as one row, for the stack-wide NRMSE and PSNR.
    let flat_t = t64
        .view()
        .into_shape_with_order((1, t64.len()))
        .expect("contiguous");
    let flat_r = r64
        .view()
        .into_shape_with_order((1, r64.len()))
        .expect("contiguous");
    let (lo, hi) = r64
        .iter()
        .fold((f64::MAX, f64::MIN), |(l, h), v| (l.min(*v), h.max(*v)));
    let range = hi - lo;
    let per_image: Vec<(f64, Option<(f64, usize)>)> = (0..ns * nf)
        .into_par_iter()
        .map(|i| {
            let (s, f) = (i / nf, i % nf);
            let t = t64.slice(ndarray::s![s, f, .., ..]);
            let r = r64.slice(ndarray::s![s, f, .., ..]);
            let map = ssim_map(t, r, range);
            let whole = ssim_of_map(map.view());
            let m = ref_masks.slice(ndarray::s![s, f, .., ..]);
            let near = if m.iter().any(|&b| b) {
                let region = from_gray(&dilate(&to_gray(m), Norm::LInf, LV_MARGIN_PX));
                let n = region.iter().filter(|&&b| b).count();
                mean_in(map.view(), region.view()).map(|v| (v, n))
            } else {
                None
            };
            (whole, near)
        })
        .collect();
    let ssim_mean = per_image.iter().map(|p| p.0).sum::<f64>() / per_image.len() as f64;
    let (sum, n) = per_image
        .iter()
        .filter_map(|p| p.1)
        .fold((0.0, 0usize), |(s, n), (v, k)| (s + v * k as f64, n + k));
    let frame_dice = |f: usize| {
        dice(
            test_masks.index_axis(Axis(1), f).iter(),
            ref_masks.index_axis(Axis(1), f).iter(),
        )
    };
    let dices: Vec<f64> = (0..nf).filter_map(frame_dice).collect();
    let spacing = (
        geom.slice_spacing_mm,
        geom.row_spacing_mm,
        geom.col_spacing_mm,
    );
    let hd = |f: usize| {
        hausdorff95(
            test_masks.index_axis(Axis(1), f),
            ref_masks.index_axis(Axis(1), f),
            spacing,
        )
    };
    Fidelity {
        nrmse: nrmse(flat_t, flat_r),
        psnr_db: psnr(flat_t, flat_r, range),
        ssim: ssim_mean,
        ssim_lv: (n > 0).then(|| sum / n as f64),
        dice_mean: (!dices.is_empty()).then(|| dices.iter().sum::<f64>() / dices.len() as f64),
        dice_ed: frame_dice(ed),
        dice_es: frame_dice(es),
        hd95_ed_mm: hd(ed),
        hd95_es_mm: hd(es),
    }
}
