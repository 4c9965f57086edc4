//! The measurement's own repeatability floor: the same series segmented again with every
//! seed moved by a fixed set of offsets, and the spread of EDV, ESV and EF that results.
//!
//! A change caused by acceleration that is smaller than this spread is within what moving
//! the seed alone does.

use ndarray::ArrayView4;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::geometry::Geometry;
use crate::measure::{self, Numbers, PhaseChoice};
use crate::segment::{self, Seed, SegmentParams, SliceRange};

/// Spread of one number over the jittered runs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Spread {
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
    /// Largest absolute change from the unmoved seeds' value.
    pub max_change: f64,
    /// Sample standard deviation over the jittered runs (0 with one run).
    pub sd: f64,
}

/// What moving the seeds did.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SeedJitter {
    /// Distance the seeds were moved (px).
    pub jitter_px: usize,
    /// The `(row, col)` offsets tried, in order.
    pub offsets_px: Vec<(i64, i64)>,
    /// Runs that segmented and measured.
    pub runs_ok: usize,
    /// Runs that failed, with the offset and why (a moved seed can land in the wall).
    pub failed: Vec<String>,
    /// EDV spread (ml), absent when every run failed.
    pub edv_ml: Option<Spread>,
    /// ESV spread (ml).
    pub esv_ml: Option<Spread>,
    /// EF spread (percentage points).
    pub ef_pct: Option<Spread>,
}

/// The eight compass offsets at distance `px`: along rows and columns, and the diagonals
/// at `round(px / √2)` per axis.
pub fn offsets(px: usize) -> Vec<(i64, i64)> {
    let p = px as i64;
    let d = (px as f64 / std::f64::consts::SQRT_2).round() as i64;
    vec![
        (-p, 0),
        (p, 0),
        (0, -p),
        (0, p),
        (-d, -d),
        (-d, d),
        (d, -d),
        (d, d),
    ]
}

fn spread(values: &[f64], base: f64) -> Option<Spread> {
    if values.is_empty() {
        return None;
    }
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let var = if values.len() > 1 {
        values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)
    } else {
        0.0
    };
    Some(Spread {
        min: values.iter().cloned().fold(f64::INFINITY, f64::min),
        max: values.iter().cloned().fold(f64::NEG_INFINITY, f64::max),
        max_change: values.iter().map(|v| (v - base).abs()).fold(0.0, f64::max),
        sd: var.sqrt(),
    })
}

/// Segments and measures `images` once per offset of [`offsets`]`(px)`, every seed moved by
/// the same offset (offsets that would leave the image are skipped) and the same slice limits
/// applied, and compares with `base`, the numbers from the unmoved seeds.
pub fn seed_jitter(
    images: ArrayView4<f32>,
    geom: &Geometry,
    seeds: &[Seed],
    ranges: &[SliceRange],
    params: &SegmentParams,
    px: usize,
    base: &Numbers,
) -> SeedJitter {
    let (_, _, rows, cols) = images.dim();
    let moved = |(dr, dc): (i64, i64)| -> Option<Vec<Seed>> {
        seeds
            .iter()
            .map(|s| {
                let r = usize::try_from(s.row as i64 + dr)
                    .ok()
                    .filter(|r| *r < rows)?;
                let c = usize::try_from(s.col as i64 + dc)
                    .ok()
                    .filter(|c| *c < cols)?;
                Some(Seed {
                    row: r,
                    col: c,
                    ..*s
                })
            })
            .collect()
    };
    let tried: Vec<((i64, i64), Vec<Seed>)> = offsets(px)
        .into_iter()
        .filter_map(|o| moved(o).map(|s| (o, s)))
        .collect();
    let outcomes: Vec<Result<Numbers, String>> = tried
        .par_iter()
        .map(|(_, s)| {
            let mut seg = segment::segment(images, s, params).map_err(|e| e.to_string())?;
            segment::settle_extent(&mut seg, images, s, ranges, geom.pixel_mm(), params)
                .map_err(|e| e.to_string())?;
            measure::measure(seg.masks.view(), geom, PhaseChoice::default())
                .map(|v| v.numbers)
                .map_err(|e| e.to_string())
        })
        .collect();
    let mut ok = Vec::new();
    let mut failed = Vec::new();
    for ((o, _), out) in tried.iter().zip(outcomes) {
        match out {
            Ok(n) => ok.push(n),
            Err(e) => failed.push(format!("offset ({}, {}) px: {e}", o.0, o.1)),
        }
    }
    let pick = |f: fn(&Numbers) -> f64| ok.iter().map(f).collect::<Vec<f64>>();
    SeedJitter {
        jitter_px: px,
        offsets_px: tried.iter().map(|(o, _)| *o).collect(),
        runs_ok: ok.len(),
        failed,
        edv_ml: spread(&pick(|n| n.edv_ml), base.edv_ml),
        esv_ml: spread(&pick(|n| n.esv_ml), base.esv_ml),
        ef_pct: spread(&pick(|n| n.ef_pct), base.ef_pct),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn offsets_lie_at_the_jitter_distance() {
        for px in [1, 3, 5] {
            for (r, c) in offsets(px) {
                let d = ((r * r + c * c) as f64).sqrt();
                // Diagonals are rounded to whole pixels: within half a pixel per axis.
                assert!(
                    (d - px as f64).abs() <= 0.5 * std::f64::consts::SQRT_2,
                    "{px}: ({r}, {c})"
                );
            }
        }
    }

    /// Sample SD of 1, 2, 3, 4 is sqrt(5/3) (textbook).
    #[test]
    fn spread_is_min_max_change_and_sample_sd() {
        let s = spread(&[1.0, 2.0, 3.0, 4.0], 2.5).expect("values");
        assert_eq!((s.min, s.max, s.max_change), (1.0, 4.0, 1.5));
        assert!((s.sd - (5.0f64 / 3.0).sqrt()).abs() < 1e-12);
        assert_eq!(spread(&[], 0.0), None);
    }
}
