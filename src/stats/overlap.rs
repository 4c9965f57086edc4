//! Overlap of two LV masks: the Dice coefficient (Dice 1945) and the 95th-percentile symmetric
//! Hausdorff distance in mm (the larger of the two directed 95th percentiles of boundary-point
//! distances, the common definition in segmentation studies).

use ndarray::{ArrayView2, ArrayView3};

use crate::io::png::on_edge;

/// Dice coefficient `2|A∩B| / (|A| + |B|)`; `None` when both masks are empty.
pub fn dice<'a>(
    a: impl IntoIterator<Item = &'a bool>,
    b: impl IntoIterator<Item = &'a bool>,
) -> Option<f64> {
    let (mut both, mut na, mut nb) = (0usize, 0usize, 0usize);
    for (&x, &y) in a.into_iter().zip(b) {
        both += usize::from(x && y);
        na += usize::from(x);
        nb += usize::from(y);
    }
    (na + nb > 0).then(|| 2.0 * both as f64 / (na + nb) as f64)
}

/// Boundary pixels of one slice: in the mask with a 4-neighbour outside it or at the edge.
fn boundary(mask: ArrayView2<bool>) -> Vec<(usize, usize)> {
    mask.indexed_iter()
        .filter(|&((r, c), _)| on_edge(&mask, r, c))
        .map(|(p, _)| p)
        .collect()
}

/// Boundary points of a `[slice, row, col]` stack in mm: in-plane boundaries of every slice,
/// placed at the slice's position along the normal.
fn points(stack: ArrayView3<bool>, spacing_mm: (f64, f64, f64)) -> Vec<[f64; 3]> {
    stack
        .outer_iter()
        .enumerate()
        .flat_map(|(s, m)| {
            boundary(m).into_iter().map(move |(r, c)| {
                [
                    s as f64 * spacing_mm.0,
                    r as f64 * spacing_mm.1,
                    c as f64 * spacing_mm.2,
                ]
            })
        })
        .collect()
}

/// Linear-interpolated percentile `q` (0–100) of `v` (NumPy's default rule).
pub fn percentile(v: &mut [f64], q: f64) -> f64 {
    v.sort_by(f64::total_cmp);
    let pos = q / 100.0 * (v.len() - 1) as f64;
    let (lo, hi) = (pos.floor() as usize, pos.ceil() as usize);
    v[lo] + (v[hi] - v[lo]) * (pos - lo as f64)
}

fn directed(from: &[[f64; 3]], to: &[[f64; 3]]) -> Vec<f64> {
    from.iter()
        .map(|p| {
            to.iter()
                .map(|q| (p[0] - q[0]).powi(2) + (p[1] - q[1]).powi(2) + (p[2] - q[2]).powi(2))
                .fold(f64::INFINITY, f64::min)
                .sqrt()
        })
        .collect()
}

/// 95th-percentile symmetric Hausdorff distance (mm) between two `[slice, row, col]` masks
/// of one frame; `spacing_mm` is `(slice, row, col)`. `None` when either mask is empty.
pub fn hausdorff95(
    a: ArrayView3<bool>,
    b: ArrayView3<bool>,
    spacing_mm: (f64, f64, f64),
) -> Option<f64> {
    let (pa, pb) = (points(a, spacing_mm), points(b, spacing_mm));
    if pa.is_empty() || pb.is_empty() {
        return None;
    }
    let ab = percentile(&mut directed(&pa, &pb), 95.0);
    let ba = percentile(&mut directed(&pb, &pa), 95.0);
    Some(ab.max(ba))
}
