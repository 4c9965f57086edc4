//! Leak guards: a region grown from a neighbouring frame's or slice's blood pool that has
//! broken through a thin wall (septum into the right ventricle, outflow tract, atrium) is
//! detected against that neighbour and cut back.
//!
//! Detection: the region is larger than a set ratio of the neighbour's area (plus a margin
//! for tiny apical regions), or more than [`MAX_FAR_FRACTION`] of it lies far from the
//! neighbour's region (it reached a structure the neighbour did not), or it has lost its
//! compactness — its solidity (area over convex-hull area) fell below [`MIN_SOLIDITY`] while
//! the neighbour's did not. A blood pool is close to convex; two cavities joined through a
//! gap are not.
//!
//! Cut: morphological opening with a disc of growing radius (1, 2, … px) breaks the narrow
//! bridge; the connected piece that overlaps the neighbour most is kept. The smallest radius
//! whose piece passes the detection test and keeps at least half the neighbour's area wins.

use imageproc::distance_transform::{euclidean_squared_distance_transform, Norm};
use imageproc::morphology::open;
use ndarray::{Array2, ArrayView2};

use super::grow::{self, Region};

/// Solidity below which a region counts as having leaked (when its neighbour was above it).
/// A disc or ellipse has solidity 1; a crescent around a convex region about 0.6–0.8.
pub const MIN_SOLIDITY: f64 = 0.8;

/// Regions smaller than this (px) are not judged by solidity: pixel steps dominate the hull.
pub const SOLIDITY_MIN_PX: usize = 60;

/// Largest fraction of a region that may lie "far" from its neighbour's region: farther
/// than half the neighbour's equivalent radius (at least 3 px). A wall moves a few pixels
/// between neighbouring frames or slices; a leak adds a second cavity.
pub const MAX_FAR_FRACTION: f64 = 0.2;

/// Largest far fraction of a cut region: a cut must remove the leak, not trim it below the
/// detection threshold.
pub const ACCEPT_FAR_FRACTION: f64 = 0.05;

/// Neighbours smaller than this (px) are not used for the far test (apical slices change
/// size too fast from one to the next).
pub const FAR_MIN_PX: usize = 120;

/// Fraction of `mask` farther from `reference` than `max(3, r_eq / 2)` px, `r_eq` the
/// radius of a disc with the reference's area.
pub fn far_fraction(mask: ArrayView2<bool>, reference: ArrayView2<bool>) -> f64 {
    let n = reference.iter().filter(|&&b| b).count();
    let a = mask.iter().filter(|&&b| b).count();
    if a == 0 {
        return 0.0;
    }
    let r_eq = (n as f64 / std::f64::consts::PI).sqrt();
    let d = (0.5 * r_eq).max(3.0);
    // Squared distance of every pixel to the nearest reference pixel.
    let dist = euclidean_squared_distance_transform(&grow::to_gray(reference));
    let far = mask
        .indexed_iter()
        .filter(|((r, c), &m)| m && dist.get_pixel(*c as u32, *r as u32)[0] > d * d)
        .count();
    far as f64 / a as f64
}

/// How a leak was cut.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum CutBy {
    /// Morphological opening with a disc of this radius.
    Opening {
        /// Radius (px).
        radius_px: usize,
    },
    /// Kept what lies within this distance of the neighbour's region.
    Envelope {
        /// Distance (px).
        distance_px: f64,
    },
}

impl std::fmt::Display for CutBy {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            CutBy::Opening { radius_px } => write!(f, "opening with radius {radius_px} px"),
            CutBy::Envelope { distance_px } => {
                write!(
                    f,
                    "keeping {distance_px:.1} px around the neighbour's region"
                )
            }
        }
    }
}

/// What the guard found and did.
#[derive(Debug, Clone, PartialEq)]
pub struct Cut {
    /// The region after cutting.
    pub region: Region,
    /// How.
    pub how: CutBy,
    /// Area before the cut (px).
    pub area_before_px: usize,
}

/// Limits of the leak test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LeakLimits {
    /// Largest area ratio to the neighbour.
    pub area_ratio: f64,
    /// Slack in pixels added to the area test.
    pub margin_px: usize,
    /// Largest opening radius tried (px).
    pub max_radius_px: usize,
}

/// Why `region` counts as a leak from `neighbour`, or `None`.
pub fn leak(region: &Region, neighbour: &Region, limits: &LeakLimits) -> Option<String> {
    let (a, n) = (region.area_px(), neighbour.area_px());
    if a as f64 > limits.area_ratio * n as f64 + limits.margin_px as f64 {
        return Some(format!(
            "area {a} px is {:.1}× the neighbour's {n} px",
            a as f64 / n.max(1) as f64
        ));
    }
    if n >= FAR_MIN_PX {
        let far = far_fraction(region.mask.view(), neighbour.mask.view());
        if far > MAX_FAR_FRACTION {
            return Some(format!(
                "{:.0} % of the region lies far outside the neighbour's blood pool",
                100.0 * far
            ));
        }
    }
    if a >= SOLIDITY_MIN_PX {
        let s = solidity(region.mask.view());
        let sn = solidity(neighbour.mask.view());
        if s < MIN_SOLIDITY && sn >= MIN_SOLIDITY {
            return Some(format!(
                "solidity {s:.2} (the neighbour's {sn:.2}): no longer compact"
            ));
        }
    }
    None
}

/// Cuts a leaked region back. First by opening with a growing radius (a narrow bridge
/// breaks while the rest keeps its shape); when no radius up to the limit gives a piece that
/// passes [`leak`] and keeps half the neighbour's area — a broad junction, as through a long
/// thin septum — by keeping only what lies within [`envelope_px`] of the neighbour's region
/// (a wall moves about a pixel between neighbouring frames). `None` when neither works.
pub fn cut(region: &Region, neighbour: &Region, limits: &LeakLimits) -> Option<Cut> {
    let image = grow::to_gray(region.mask.view());
    let min_area = neighbour.area_px() / 2;
    let accept = |mask: Array2<bool>, how: CutBy| -> Option<Cut> {
        let piece = piece_over(mask.view(), neighbour.mask.view())?;
        let candidate = Region {
            mask: piece,
            ..region.clone()
        };
        let clean = candidate.area_px() >= min_area
            && leak(&candidate, neighbour, limits).is_none()
            && (neighbour.area_px() < FAR_MIN_PX
                || far_fraction(candidate.mask.view(), neighbour.mask.view())
                    <= ACCEPT_FAR_FRACTION);
        clean.then(|| Cut {
            region: candidate,
            how,
            area_before_px: region.area_px(),
        })
    };
    for radius in 1..=limits.max_radius_px.min(u8::MAX as usize) {
        let opened = open(&image, Norm::L2, radius as u8);
        let mask = Array2::from_shape_fn(region.mask.dim(), |(r, c)| {
            opened.get_pixel(c as u32, r as u32)[0] > 0
        });
        if let Some(c) = accept(mask, CutBy::Opening { radius_px: radius }) {
            return Some(c);
        }
    }
    let d = envelope_px(neighbour.area_px());
    let dist = euclidean_squared_distance_transform(&grow::to_gray(neighbour.mask.view()));
    let mask = Array2::from_shape_fn(region.mask.dim(), |(r, c)| {
        region.mask[(r, c)] && dist.get_pixel(c as u32, r as u32)[0] <= d * d
    });
    accept(mask, CutBy::Envelope { distance_px: d })
}

/// Distance (px) from a neighbour's region within which a cut region is kept when opening
/// cannot cut a leak: 15 % of the neighbour's equivalent radius, at least 2 px.
pub fn envelope_px(neighbour_area_px: usize) -> f64 {
    (0.15 * (neighbour_area_px as f64 / std::f64::consts::PI).sqrt()).max(2.0)
}

/// The 4-connected piece of `mask` that overlaps `reference` most (ties: the first label).
fn piece_over(mask: ArrayView2<bool>, reference: ArrayView2<bool>) -> Option<Array2<bool>> {
    let labels = grow::label(mask, imageproc::region_labelling::Connectivity::Four);
    let mut overlap = std::collections::BTreeMap::<u32, usize>::new();
    for ((p, &l), &m) in labels.indexed_iter().zip(mask.iter()) {
        if m && reference[p] {
            *overlap.entry(l).or_default() += 1;
        }
    }
    let best = overlap
        .iter()
        .max_by(|a, b| a.1.cmp(b.1).then(b.0.cmp(a.0)))
        .map(|(l, _)| *l)?;
    Some(Array2::from_shape_fn(mask.dim(), |p| {
        mask[p] && labels[p] == best
    }))
}

/// Area of `mask` over the area of the convex hull of its pixels (as unit squares).
pub fn solidity(mask: ArrayView2<bool>) -> f64 {
    let mut corners = Vec::new();
    let mut area = 0usize;
    for ((r, c), &m) in mask.indexed_iter() {
        if m {
            area += 1;
            let (r, c) = (r as i64, c as i64);
            corners.extend([(c, r), (c + 1, r), (c, r + 1), (c + 1, r + 1)]);
        }
    }
    let hull = hull_area(corners);
    if hull <= 0.0 {
        return 1.0;
    }
    area as f64 / hull
}

/// Area of the convex hull of integer points (monotone chain, then the shoelace formula).
fn hull_area(mut pts: Vec<(i64, i64)>) -> f64 {
    pts.sort_unstable();
    pts.dedup();
    if pts.len() < 3 {
        return 0.0;
    }
    let cross = |o: (i64, i64), a: (i64, i64), b: (i64, i64)| {
        (a.0 - o.0) * (b.1 - o.1) - (a.1 - o.1) * (b.0 - o.0)
    };
    let mut hull: Vec<(i64, i64)> = Vec::with_capacity(2 * pts.len());
    for pass in 0..2 {
        let start = hull.len();
        let iter: Box<dyn Iterator<Item = &(i64, i64)>> = if pass == 0 {
            Box::new(pts.iter())
        } else {
            Box::new(pts.iter().rev())
        };
        for &p in iter {
            while hull.len() >= start + 2
                && cross(hull[hull.len() - 2], hull[hull.len() - 1], p) <= 0
            {
                hull.pop();
            }
            hull.push(p);
        }
        hull.pop();
    }
    let twice: i64 = (0..hull.len())
        .map(|i| {
            let (a, b) = (hull[i], hull[(i + 1) % hull.len()]);
            a.0 * b.1 - b.0 * a.1
        })
        .sum();
    twice.abs() as f64 / 2.0
}

#[cfg(test)]
mod tests {
    use super::*;

    fn region(mask: Array2<bool>) -> Region {
        Region {
            mask,
            threshold: 0.5,
            blood: 1.0,
            wall: 0.0,
        }
    }

    fn disc(rows: usize, cols: usize, centre: (f64, f64), r: f64) -> Array2<bool> {
        Array2::from_shape_fn((rows, cols), |(y, x)| {
            (y as f64 - centre.0).powi(2) + (x as f64 - centre.1).powi(2) <= r * r
        })
    }

    /// A w × h rectangle of pixels is its own hull: solidity 1 (exact).
    #[test]
    fn a_rectangle_has_solidity_one() {
        let m = Array2::from_shape_fn((20, 20), |(r, c)| {
            (3..9).contains(&r) && (2..15).contains(&c)
        });
        assert_eq!(solidity(m.view()), 1.0);
        assert_eq!(
            hull_area(vec![(0, 0), (4, 0), (4, 3), (0, 3), (2, 1)]),
            12.0
        );
    }

    /// Two discs joined by a one-pixel bridge: the leak is found (the second disc is far from
    /// the neighbour, and the pair is not compact), and opening with radius 1 or 2 cuts the bridge and keeps the disc that overlaps the neighbour.
    #[test]
    fn a_bridge_to_a_second_cavity_is_detected_and_cut() {
        let (rows, cols) = (40, 70);
        let lv = disc(rows, cols, (20.0, 18.0), 10.0);
        let rv = disc(rows, cols, (20.0, 50.0), 12.0);
        let mut joined = &lv | &rv;
        for c in 28..=38 {
            joined[(20, c)] = true;
        }
        let limits = LeakLimits {
            area_ratio: 3.0,
            margin_px: 30,
            max_radius_px: 4,
        };
        let neighbour = region(disc(rows, cols, (20.0, 18.0), 9.5));
        let leaked = region(joined);
        let why = leak(&leaked, &neighbour, &limits).expect("a leak");
        assert!(why.contains("far outside the neighbour"), "{why}");
        assert!(
            solidity(leaked.mask.view()) < MIN_SOLIDITY,
            "two joined discs are not compact"
        );
        let cut = cut(&leaked, &neighbour, &limits).expect("cut");
        assert!(
            matches!(cut.how, CutBy::Opening { radius_px } if radius_px <= 2),
            "{:?}",
            cut.how
        );
        let kept = &cut.region.mask;
        assert!(
            kept.iter().zip(rv.iter()).all(|(k, r)| !(*k && *r)),
            "nothing of the second cavity kept"
        );
        let lost = lv
            .iter()
            .zip(kept.iter())
            .filter(|(l, k)| **l && !**k)
            .count();
        assert!(
            lost <= lv.iter().filter(|&&b| b).count() / 10,
            "lost {lost} px of the LV"
        );
        assert!(
            leak(&region(lv.clone()), &neighbour, &limits).is_none(),
            "a disc is no leak"
        );
    }
}
