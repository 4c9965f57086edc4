//! Seed proposals for the user to confirm: in every slice, the round bright region that moves
//! through the cycle (the LV blood pool), found without any seed.
//!
//! Per slice at the chosen frame: bright regions are the 4-connected components above the
//! image's Otsu threshold; each is scored by its solidity (the LV pool is round, the right
//! ventricle a crescent, fat a ring) times the mean temporal standard deviation inside it
//! (blood pools move, static tissue does not). The anchor is the region, over all slices,
//! whose deepest pixel keeps at least 70 % of its signal in every frame (a section that holds blood through the
//! cycle, as a mid-ventricular one does) with the best score times the square root of its
//! area; in every slice the best region whose centre lies within two radii of that region's
//! centre is taken, and the seed slice is the middle one of the slices whose region holds
//! blood all through the cycle. The proposed seed is the deepest pixel of the region. Proposals
//! are never used in place of the user's seeds.

use ndarray::{Array2, ArrayView2, ArrayView4, Axis};

use super::extent::{dark_level, scan_border, ExtentRule, Levels};
use super::grow::{deepest_point, label, levels, otsu};
use super::guard::{solidity, MIN_SOLIDITY};
use super::Seed;

/// One proposed seed and why.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Proposal {
    /// The seed.
    pub seed: Seed,
    /// Solidity of its region.
    pub solidity: f64,
    /// Area of its region (px).
    pub area_px: usize,
}

/// A candidate region of one slice.
struct Candidate {
    mask: Array2<bool>,
    centre: (f64, f64),
    area: usize,
    solidity: f64,
    score: f64,
}

/// A pixel holds blood through the cycle when it keeps this fraction of its signal at the
/// chosen frame in every frame (blood against wall is about 3:1 in bSSFP cine, common
/// practice; 0.7 rejects a pixel that becomes even partly wall).
const LASTING: f32 = 0.7;

/// Regions smaller than this (px) are not proposed.
const MIN_AREA_PX: usize = 20;

fn candidates(image: ArrayView2<f32>, motion: &Array2<f32>) -> Vec<Candidate> {
    let values: Vec<f32> = image.iter().copied().collect();
    let t = otsu(&values);
    let bright = image.mapv(|v| v >= t);
    let labels = label(
        bright.view(),
        imageproc::region_labelling::Connectivity::Four,
    );
    let n = labels.iter().copied().max().unwrap_or(0) as usize;
    let max_area = image.len() / 4;
    // Areas in one pass, so that masks are built only for regions of a plausible size (a
    // noisy background holds hundreds of bright specks).
    let mut areas = vec![0usize; n + 1];
    for &l in labels.iter() {
        areas[l as usize] += 1;
    }
    (1..=n)
        .filter(|&l| (MIN_AREA_PX..=max_area).contains(&areas[l]))
        .filter_map(|l| {
            let mask = labels.mapv(|x| x as usize == l);
            let area = areas[l];
            let s = solidity(mask.view());
            if s < MIN_SOLIDITY {
                return None;
            }
            let (mut sr, mut sc, mut m) = (0.0, 0.0, 0.0);
            for ((r, c), &b) in mask.indexed_iter() {
                if b {
                    sr += r as f64;
                    sc += c as f64;
                    m += f64::from(motion[(r, c)]);
                }
            }
            let a = area as f64;
            Some(Candidate {
                centre: (sr / a, sc / a),
                area,
                solidity: s,
                score: s * m / a,
                mask,
            })
        })
        .collect()
}

/// Temporal standard deviation of every pixel of one slice `[frame, row, col]`.
fn motion(slice: ArrayView4<f32>, k: usize) -> Array2<f32> {
    let s = slice.index_axis(Axis(0), k);
    let n = s.dim().0 as f32;
    let mean = s.mean_axis(Axis(0)).expect("at least one frame");
    let mut var = Array2::<f32>::zeros(mean.dim());
    for f in s.outer_iter() {
        ndarray::Zip::from(&mut var)
            .and(&f)
            .and(&mean)
            .for_each(|v, x, m| *v += (x - m) * (x - m) / n);
    }
    var.mapv(f32::sqrt)
}

/// What [`suggest`] found.
#[derive(Debug, Clone, PartialEq)]
pub struct Suggestions {
    /// A proposal per slice (`None` where no region qualifies).
    pub proposals: Vec<Option<Proposal>>,
    /// The slice of the most confident proposal (`None`: nothing found anywhere).
    pub anchor: Option<usize>,
    /// Slices whose best region failed the basal rule (less than half surrounded by
    /// myocardium: atrium or outflow tract), with its myocardial cover; no seed is proposed
    /// there.
    pub past_base: Vec<(usize, f64)>,
}

/// Proposals for every slice of `[slice, frame, row, col]` at `frame` (pixel spacing
/// `pixel_mm`, `(row, col)`); the anchor slice's proposal is the most confident one. A region
/// that fails the basal rule ([`super::extent`], judged with the anchor region's blood and
/// wall levels) is set aside, not proposed.
pub fn suggest(stack: ArrayView4<f32>, frame: usize, pixel_mm: (f64, f64)) -> Suggestions {
    let ns = stack.dim().0;
    let per_slice: Vec<Vec<Candidate>> = (0..ns)
        .map(|k| {
            let image = stack.index_axis(Axis(0), k).index_axis_move(Axis(0), frame);
            candidates(image, &motion(stack, k))
        })
        .collect();
    // The anchor must hold blood all through the cycle (a mid-ventricular section: a basal
    // one loses its cavity in systole, which also makes it move the most), and among those the
    // larger section wins.
    let lasting = |k: usize, c: &Candidate| -> bool {
        let Some((r, col)) = deepest_point(c.mask.view(), |_, _| true) else {
            return false;
        };
        let slice = stack.index_axis(Axis(0), k);
        let here = slice[(frame, r, col)];
        slice
            .outer_iter()
            .all(|img| img[(r, col)] >= LASTING * here)
    };
    let anchor = per_slice
        .iter()
        .enumerate()
        .flat_map(|(k, cs)| cs.iter().map(move |c| (k, c)))
        .filter(|(k, c)| lasting(*k, c))
        .max_by(|a, b| {
            let key = |c: &Candidate| c.score * (c.area as f64).sqrt();
            key(a.1).total_cmp(&key(b.1))
        });
    let Some((first_choice, a)) = anchor else {
        return Suggestions {
            proposals: vec![None; ns],
            anchor: None,
            past_base: Vec::new(),
        };
    };
    let radius = (a.area as f64 / std::f64::consts::PI).sqrt();
    let centre = a.centre;
    let near = |c: &&Candidate| {
        ((c.centre.0 - centre.0).powi(2) + (c.centre.1 - centre.1).powi(2)).sqrt() <= 2.0 * radius
    };
    let image = |k: usize| stack.index_axis(Axis(0), k).index_axis_move(Axis(0), frame);
    let (blood, wall) = levels(image(first_choice), &a.mask, f32::NEG_INFINITY);
    let dark = dark_level(image(first_choice));
    let rule = ExtentRule::default();
    let mut past_base = Vec::new();
    let best: Vec<Option<&Candidate>> = per_slice
        .iter()
        .enumerate()
        .map(|(k, cs)| {
            let c = cs
                .iter()
                .filter(near)
                .max_by(|x, y| x.score.total_cmp(&y.score))?;
            let (Some(b0), Some(w0)) = (blood, wall) else {
                return Some(c);
            };
            let b = levels(image(k), &c.mask, f32::NEG_INFINITY).0.unwrap_or(b0);
            let lv = Levels {
                blood: b,
                wall: w0 * b / b0,
                dark,
            };
            let cover = scan_border(image(k), c.mask.view(), lv, pixel_mm, &rule).cover();
            if cover < rule.min_cover {
                past_base.push((k, cover));
                return None;
            }
            Some(c)
        })
        .collect();
    // The seed slice: the middle one of those whose region holds blood all through the cycle
    // (the best-scoring one may be basal in a ventricle that barely shortens).
    let holding: Vec<usize> = (0..ns)
        .filter(|&k| best[k].is_some_and(|c| lasting(k, c)))
        .collect();
    let anchor_slice = holding
        .get(holding.len() / 2)
        .copied()
        .unwrap_or(first_choice);
    let proposals = best
        .iter()
        .enumerate()
        .map(|(k, best)| {
            let best = (*best)?;
            let (row, col) = deepest_point(best.mask.view(), |_, _| true)?;
            Some(Proposal {
                seed: Seed {
                    slice: k,
                    frame,
                    row,
                    col,
                },
                solidity: best.solidity,
                area_px: best.area,
            })
        })
        .collect();
    Suggestions {
        proposals,
        anchor: Some(anchor_slice),
        past_base,
    }
}
