//! LV blood-pool segmentation by seeded region growing, tracked through frames and slices.
//!
//! From one seed, the blood pool is grown in the seed's slice and frame ([`grow::grow`]),
//! then carried frame by frame through the cycle in that slice (each frame seeded at the
//! deepest interior point of the previous frame's region that is still bright), and from
//! there slice by slice towards base and apex in every frame. Propagation into a slice
//! stops when no pixel of the neighbouring region is bright there (the cavity has ended).
//! Every propagated region passes the leak guard ([`guard`]) against the region it came from:
//! a region that grew too large, reached far beyond its neighbour or lost its compactness is
//! cut back, and each cut is recorded ([`GuardEvent`]); a final pass walks every slice's
//! frames the same way. Further seeds override propagation at their own slice and frame.
//! Which slices count is settled afterwards ([`settle_extent`]): the basal rule and the apex
//! stop ([`extent`]), then the user's slice limits.
//! Every reconstruction of a subject is segmented with the same seeds and the same
//! parameters.

pub mod extent;
pub mod grow;
pub mod guard;
pub mod seeds;
pub mod suggest;
pub mod window;

use std::collections::BTreeMap;

use ndarray::{Array4, ArrayView2, ArrayView4, Axis};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

pub use extent::{ExtentRule, FrameExtent};
pub use grow::BloodPoolConvention;
use grow::{deepest_point, GrowFailure, GrowParams, Region};
pub use seeds::{Seed, SliceRange};
use window::Window;

/// Parameters of the whole segmentation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SegmentParams {
    /// Growth in one image.
    pub grow: GrowParams,
    /// A propagated region larger than this times its neighbour's area (plus
    /// [`Self::leak_margin_px`]) is taken as having left the LV.
    pub leak_area_ratio: f64,
    /// Slack in pixels added to the leak test, for tiny apical regions.
    pub leak_margin_px: usize,
    /// Largest area ratio between neighbouring frames of the seed slice; beyond it tracking
    /// is taken as lost (mid-ventricular areas change by about 10 % per frame at 20
    /// frames per cycle, common practice; 2× leaves ample room).
    pub frame_change_limit: f64,
    /// Largest opening radius (px) the leak guard tries when cutting a leak.
    pub leak_max_radius_px: usize,
    /// Whether the leak guard runs at all (off only to see what it prevents).
    pub leak_guard: bool,
    /// Basal rule and apex stop.
    pub extent: ExtentRule,
}

impl SegmentParams {
    /// Blood-pool convention (set in [`GrowParams::convention`]).
    pub fn convention(&self) -> BloodPoolConvention {
        self.grow.convention
    }
}

impl Default for SegmentParams {
    fn default() -> Self {
        SegmentParams {
            grow: GrowParams::default(),
            leak_area_ratio: 2.0,
            leak_margin_px: 30,
            frame_change_limit: 2.0,
            leak_max_radius_px: 6,
            leak_guard: true,
            extent: ExtentRule::default(),
        }
    }
}

/// Why segmentation failed; each names the seed or the place at fault.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum SegmentError {
    /// No seed given.
    #[error("no seed given: at least one seed inside the LV blood pool is needed")]
    NoSeeds,
    /// A seed lies outside the stack.
    #[error(
        "seed #{index} ({seed}) lies outside the image stack \
         ({slices} slices × {frames} frames × {rows} rows × {cols} columns; indices are zero-based)"
    )]
    SeedOutside {
        /// One-based position in the seeds list.
        index: usize,
        /// The seed.
        seed: Seed,
        /// Stack slices.
        slices: usize,
        /// Stack frames.
        frames: usize,
        /// Stack rows.
        rows: usize,
        /// Stack columns.
        cols: usize,
    },
    /// A seed is not in a bright blood pool.
    #[error(
        "seed #{index} ({seed}) is not inside a bright blood pool: its signal {value:.3} is below \
         the blood threshold {threshold:.3}; place it inside the LV cavity"
    )]
    SeedDark {
        /// One-based position in the seeds list.
        index: usize,
        /// The seed.
        seed: Seed,
        /// Signal around the seed.
        value: f32,
        /// Threshold it had to exceed.
        threshold: f32,
    },
    /// A seed's region covers most of the image.
    #[error(
        "seed #{index} ({seed}) grows into {pct:.0} % of the image, far more than an LV blood pool; \
         it is probably outside the heart"
    )]
    SeedRunaway {
        /// One-based position in the seeds list.
        index: usize,
        /// The seed.
        seed: Seed,
        /// Percentage of the image covered.
        pct: f64,
    },
    /// A seed's region is not round like an LV blood pool.
    #[error(
        "seed #{index} ({seed}) grows into a region that is not round (solidity {solidity:.2}; an LV \
         blood pool in short axis has at least {min:.2}): it is probably outside the LV, in the \
         right ventricle or another bright structure; place it inside the LV cavity"
    )]
    SeedNotRound {
        /// One-based position in the seeds list.
        index: usize,
        /// The seed.
        seed: Seed,
        /// Area over convex-hull area of its region.
        solidity: f64,
        /// Smallest solidity accepted.
        min: f64,
    },
    /// A `[[slices]]` table of the seeds file does not fit the stack.
    #[error("seeds file, [[slices]] table #{index}: {message}")]
    SliceRange {
        /// One-based position among the tables.
        index: usize,
        /// What does not fit.
        message: String,
    },
    /// Tracking through the seed's slice lost the blood pool.
    #[error(
        "tracking lost the LV blood pool on slice {slice} at frame {frame} ({why}); \
         add a seed for that slice and frame"
    )]
    Lost {
        /// Slice.
        slice: usize,
        /// Frame.
        frame: usize,
        /// What happened.
        why: String,
    },
}

/// LV masks of a stack and what the tracker had to decide on the way.
#[derive(Debug, Clone)]
pub struct Segmentation {
    /// `[slice, frame, row, col]`, true inside the LV blood pool.
    pub masks: Array4<bool>,
    /// Places where propagation stopped for a reason other than the cavity ending, and
    /// where the leak guard acted.
    pub notes: Vec<String>,
    /// Every slice and frame where the leak guard cut a region.
    pub guard_events: Vec<GuardEvent>,
    /// Convention used.
    pub convention: BloodPoolConvention,
    /// Per frame, the slices counted and where the basal rule or apex stop acted (filled by
    /// [`settle_extent`]).
    pub extent: Vec<FrameExtent>,
}

/// Where the leak guard cut a region, why, and by how much.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GuardEvent {
    /// Slice.
    pub slice: usize,
    /// Frame.
    pub frame: usize,
    /// What the detection saw.
    pub reason: String,
    /// How the leak was cut.
    pub cut_by: guard::CutBy,
    /// Area before the cut (px).
    pub area_before_px: usize,
    /// Area after the cut (px).
    pub area_after_px: usize,
}

impl GuardEvent {
    fn note(&self) -> String {
        format!(
            "leak guard: slice {}, frame {}: {}; cut by {} ({} → {} px)",
            self.slice,
            self.frame,
            self.reason,
            self.cut_by,
            self.area_before_px,
            self.area_after_px
        )
    }
}

/// Outcome of the leak guard on one propagated region.
enum Guarded {
    /// No leak.
    Clean(Region),
    /// A leak, cut.
    Cut(Region, GuardEvent),
    /// A leak that opening could not cut: why.
    Uncut(String),
}

/// Checks a propagated region against its neighbour and cuts a leak.
fn guard(
    region: Region,
    neighbour: &Region,
    area_ratio: f64,
    margin_px: usize,
    params: &SegmentParams,
    at: (usize, usize),
) -> Guarded {
    let limits = guard::LeakLimits {
        area_ratio,
        margin_px,
        max_radius_px: params.leak_max_radius_px,
    };
    // Both regions on a window around them, wide enough for the largest opening.
    let dims = region.mask.dim();
    let margin = params.leak_max_radius_px + 3;
    let win = Window::around(region.mask.view(), margin)
        .union(&Window::around(neighbour.mask.view(), margin));
    let (local, near) = (win.crop(&region), win.crop(neighbour));
    let Some(reason) = guard::leak(&local, &near, &limits).filter(|_| params.leak_guard) else {
        return Guarded::Clean(region);
    };
    match guard::cut(&local, &near, &limits).map(|c| guard::Cut {
        region: win.embed(c.region, dims),
        ..c
    }) {
        Some(c) => {
            let event = GuardEvent {
                slice: at.0,
                frame: at.1,
                reason,
                cut_by: c.how,
                area_before_px: c.area_before_px,
                area_after_px: c.region.area_px(),
            };
            Guarded::Cut(c.region, event)
        }
        None => Guarded::Uncut(reason),
    }
}

type Explicit = BTreeMap<(usize, usize), (usize, Seed)>;

/// Regions of every slice in one frame, and the notes and guard events made on the way.
type FrameColumn = (Vec<Option<Region>>, Vec<String>, Vec<GuardEvent>);

/// Segments the LV blood pool of a `[slice, frame, row, col]` stack from `seeds` (the first
/// is the primary, mid-ventricular seed).
///
/// # Errors
/// A [`SegmentError`] naming the seed, or the slice and frame, at fault.
pub fn segment(
    stack: ArrayView4<f32>,
    seeds: &[Seed],
    params: &SegmentParams,
) -> Result<Segmentation, SegmentError> {
    let (ns, nf, nr, nc) = stack.dim();
    let primary = *seeds.first().ok_or(SegmentError::NoSeeds)?;
    let mut explicit = Explicit::new();
    for (i, s) in seeds.iter().enumerate() {
        if s.slice >= ns || s.frame >= nf || s.row >= nr || s.col >= nc {
            return Err(SegmentError::SeedOutside {
                index: i + 1,
                seed: *s,
                slices: ns,
                frames: nf,
                rows: nr,
                cols: nc,
            });
        }
        explicit.entry((s.slice, s.frame)).or_insert((i + 1, *s));
    }
    // Every seed is checked, even where propagation alone would have done, and even when an
    // earlier seed in the same slice and frame is the one used there.
    for (i, seed) in seeds.iter().enumerate() {
        grow_explicit(stack, i + 1, *seed, params)?;
    }

    let image = |s: usize, f: usize| stack.index_axis(Axis(0), s).index_axis_move(Axis(0), f);
    let s0 = primary.slice;
    let mut chain: Vec<Option<Region>> = vec![None; nf];
    let mut chain_events = Vec::new();
    chain[primary.frame] = Some(grow_explicit(stack, 1, primary, params)?);
    let order: Vec<(usize, usize)> = ((primary.frame + 1)..nf)
        .map(|f| (f, f - 1))
        .chain((0..primary.frame).rev().map(|f| (f, f + 1)))
        .collect();
    for &(f, from) in &order {
        let region =
            if let Some((index, seed)) = explicit.get(&(s0, f)) {
                grow_explicit(stack, *index, *seed, params)?
            } else {
                let parent = chain[from].as_ref().expect("chain filled in order");
                let region = propagate(image(s0, f), parent, &params.grow, BloodLevel::Own)
                    .map_err(|why| SegmentError::Lost {
                        slice: s0,
                        frame: f,
                        why,
                    })?;
                let region = match guard(
                    region,
                    parent,
                    params.frame_change_limit,
                    0,
                    params,
                    (s0, f),
                ) {
                    Guarded::Clean(r) => r,
                    Guarded::Cut(r, e) => {
                        chain_events.push(e);
                        r
                    }
                    Guarded::Uncut(why) => {
                        return Err(SegmentError::Lost {
                            slice: s0,
                            frame: f,
                            why: format!(
                                "{why}, against frame {from}; the leak guard could not cut it"
                            ),
                        })
                    }
                };
                let ratio = region.area_px() as f64 / parent.area_px().max(1) as f64;
                if !(1.0 / params.frame_change_limit..=params.frame_change_limit).contains(&ratio) {
                    return Err(SegmentError::Lost {
                        slice: s0,
                        frame: f,
                        why: format!(
                        "the region is {ratio:.2}× its area in frame {from}, more change between \
                         neighbouring frames than a beating LV shows"
                    ),
                    });
                }
                region
            };
        chain[f] = Some(region);
    }

    let per_frame: Vec<Result<FrameColumn, SegmentError>> = (0..nf)
        .into_par_iter()
        .map(|f| {
            let mut col: Vec<Option<Region>> = vec![None; ns];
            let mut notes = Vec::new();
            let mut events = Vec::new();
            col[s0] = chain[f].clone();
            let up: Vec<usize> = ((s0 + 1)..ns).collect();
            let down: Vec<usize> = (0..s0).rev().collect();
            for path in [up, down] {
                let mut parent = col[s0].clone();
                for s in path {
                    let next = if let Some((index, seed)) = explicit.get(&(s, f)) {
                        Some(grow_explicit(stack, *index, *seed, params)?)
                    } else if let Some(p) = &parent {
                        match propagate(image(s, f), p, &params.grow, BloodLevel::Neighbour) {
                            Ok(r) => match guard(r, p, params.leak_area_ratio, params.leak_margin_px, params, (s, f)) {
                                Guarded::Clean(r) => Some(r),
                                Guarded::Cut(r, e) => {
                                    events.push(e);
                                    Some(r)
                                }
                                Guarded::Uncut(why) => {
                                    notes.push(format!(
                                        "slice {s}, frame {f}: {why} against the neighbouring slice \
                                         and the leak guard could not cut it; taken as outside the \
                                         LV, not counted"
                                    ));
                                    None
                                }
                            },
                            Err(_) => None,
                        }
                    } else {
                        None
                    };
                    col[s] = next.clone();
                    parent = next;
                }
            }
            Ok((col, notes, events))
        })
        .collect();

    let mut notes = Vec::new();
    let mut guard_events = chain_events;
    // [slice][frame] regions, for the temporal pass.
    let mut by_slice: Vec<Vec<Option<Region>>> = vec![vec![None; nf]; ns];
    for (f, res) in per_frame.into_iter().enumerate() {
        let (col, n, e) = res?;
        notes.extend(n);
        guard_events.extend(e);
        for (s, region) in col.into_iter().enumerate() {
            by_slice[s][f] = region;
        }
    }
    // Every other slice walks its frames the way the seed slice did, so a leak that slice
    // propagation let through (the neighbouring slice leaked the same way) is still caught
    // against the same slice one frame earlier.
    let temporal: Vec<(Vec<String>, Vec<GuardEvent>)> = by_slice
        .par_iter_mut()
        .enumerate()
        .filter(|(s, _)| *s != s0)
        .map(|(s, frames)| {
            let (mut notes, mut events) = (Vec::new(), Vec::new());
            for &(f, from) in &order {
                if explicit.contains_key(&(s, f)) {
                    continue;
                }
                let (Some(region), Some(previous)) = (frames[f].clone(), frames[from].clone())
                else {
                    continue;
                };
                // Basal and apical slices gain and lose area fast as the base plane moves
                // through them: judged by reach and shape only, against a sizeable region.
                if previous.area_px() < guard::FAR_MIN_PX {
                    continue;
                }
                match guard(region, &previous, f64::INFINITY, 0, params, (s, f)) {
                    Guarded::Clean(_) => {}
                    Guarded::Cut(r, e) => {
                        events.push(e);
                        frames[f] = Some(r);
                    }
                    Guarded::Uncut(why) => notes.push(format!(
                        "slice {s}, frame {f}: {why} against frame {from}; the leak guard could \
                         not cut it and the region is kept: check this slice"
                    )),
                }
            }
            (notes, events)
        })
        .collect();
    for (n, e) in temporal {
        notes.extend(n);
        guard_events.extend(e);
    }
    let mut masks = Array4::<bool>::from_elem((ns, nf, nr, nc), false);
    for (s, frames) in by_slice.into_iter().enumerate() {
        for (f, region) in frames.into_iter().enumerate() {
            if let Some(r) = region {
                masks
                    .index_axis_mut(Axis(0), s)
                    .index_axis_mut(Axis(0), f)
                    .assign(&r.mask);
            }
        }
    }
    guard_events.sort_by_key(|e| (e.frame, e.slice));
    notes.extend(guard_events.iter().map(GuardEvent::note));
    Ok(Segmentation {
        masks,
        notes,
        guard_events,
        convention: params.convention(),
        extent: Vec::new(),
    })
}

fn grow_explicit(
    stack: ArrayView4<f32>,
    index: usize,
    seed: Seed,
    params: &SegmentParams,
) -> Result<Region, SegmentError> {
    let img = stack
        .index_axis(Axis(0), seed.slice)
        .index_axis_move(Axis(0), seed.frame);
    let region =
        grow::grow(img, (seed.row, seed.col), None, &params.grow).map_err(|e| match e {
            GrowFailure::Dark { value, threshold } => SegmentError::SeedDark {
                index,
                seed,
                value,
                threshold,
            },
            GrowFailure::Runaway { fraction } => SegmentError::SeedRunaway {
                index,
                seed,
                pct: 100.0 * fraction,
            },
        })?;
    // A user's seed region must look like an LV blood pool: round (the right ventricle is a
    // crescent, fat a ring). Small regions are spared: pixel steps dominate their hull.
    if region.area_px() >= guard::SOLIDITY_MIN_PX {
        let solidity = guard::solidity(region.mask.view());
        if solidity < guard::MIN_SOLIDITY {
            return Err(SegmentError::SeedNotRound {
                index,
                seed,
                solidity,
                min: guard::MIN_SOLIDITY,
            });
        }
    }
    Ok(region)
}

/// How a propagated region sets its blood level.
#[derive(Clone, Copy)]
enum BloodLevel {
    /// Its own median (the next frame of the same slice).
    Own,
    /// The neighbouring slice's (see [`grow::grow_from_neighbour`]).
    Neighbour,
}

/// Grows in a neighbouring image from the deepest point of `parent` that is bright there,
/// on a window around the parent (half its size again on every side, at least 8 px), or the
/// whole image when the region reaches the window's edge.
fn propagate(
    image: ArrayView2<f32>,
    parent: &Region,
    p: &GrowParams,
    level: BloodLevel,
) -> Result<Region, String> {
    let dims = image.dim();
    let span = Window::around(parent.mask.view(), 0);
    let margin = (span.rows.len().max(span.cols.len()) / 2).max(8);
    let mut win = Window::around(parent.mask.view(), margin);
    loop {
        let local = propagate_in(win.view(image), &win.crop(parent), p, level, image.len())?;
        // Slack 4: the wall ring that sets the threshold lies up to 3 px outside the region.
        if win.is_full(dims) || !win.clips(local.mask.view(), dims, 4) {
            return Ok(win.embed(local, dims));
        }
        win = Window::full(dims);
    }
}

fn propagate_in(
    image: ArrayView2<f32>,
    parent: &Region,
    p: &GrowParams,
    level: BloodLevel,
    image_len: usize,
) -> Result<Region, String> {
    let t = parent.threshold;
    let start = deepest_point(parent.mask.view(), |r, c| image[(r, c)] >= t)
        .ok_or_else(|| "no pixel of the neighbouring region is bright here".to_string())?;
    let blood = match level {
        BloodLevel::Own => None,
        BloodLevel::Neighbour => Some(parent.blood),
    };
    grow::grow_in_window(image, start, t, blood, p, image_len).map_err(|e| match e {
        GrowFailure::Dark { value, threshold } => {
            format!("signal {value:.3} below the threshold {threshold:.3}")
        }
        GrowFailure::Runaway { fraction } => {
            format!("region covers {:.0} % of the image", 100.0 * fraction)
        }
    })
}

/// Clears every slice outside the user's `[[slices]]` limits in the frames they cover, and
/// notes each limit applied.
///
/// # Errors
/// [`SegmentError::SliceRange`] naming the table whose slices or frames lie outside the stack.
pub fn limit_slices(seg: &mut Segmentation, ranges: &[SliceRange]) -> Result<(), SegmentError> {
    let (ns, nf, _, _) = seg.masks.dim();
    for (i, r) in ranges.iter().enumerate() {
        let bad = |message: String| SegmentError::SliceRange {
            index: i + 1,
            message,
        };
        if r.last_slice >= ns {
            return Err(bad(format!(
                "last_slice {} is outside the stack's {ns} slices (zero-based)",
                r.last_slice
            )));
        }
        if let Some([_, b]) = r.frames.filter(|[_, b]| *b >= nf) {
            return Err(bad(format!(
                "frame {b} is outside the stack's {nf} frames (zero-based)"
            )));
        }
        let mut cleared = 0usize;
        for f in (0..nf).filter(|&f| r.covers(f)) {
            for s in (0..ns).filter(|s| !(r.first_slice..=r.last_slice).contains(s)) {
                let mut m = seg.masks.slice_mut(ndarray::s![s, f, .., ..]);
                if m.iter().any(|&b| b) {
                    cleared += 1;
                    m.fill(false);
                }
            }
        }
        let frames = r.frames.map_or("every frame".to_string(), |[a, b]| {
            format!("frames {a}–{b}")
        });
        seg.notes.push(format!(
            "seeds file: {frames} limited to slices {}–{} ({cleared} slice-frames cleared)",
            r.first_slice, r.last_slice
        ));
    }
    Ok(())
}

/// Settles which slices count: the basal rule and the apex stop (outside frames the user fixed),
/// then the user's `[[slices]]` limits; records per frame the slices counted and adds one note
/// per stop. `pixel_mm` is the `(row, col)` spacing.
///
/// # Errors
/// [`SegmentError::SliceRange`] naming the table that does not fit the stack.
pub fn settle_extent(
    seg: &mut Segmentation,
    stack: ArrayView4<f32>,
    seeds: &[Seed],
    ranges: &[SliceRange],
    pixel_mm: (f64, f64),
    params: &SegmentParams,
) -> Result<(), SegmentError> {
    let mut extents = extent::apply(
        stack,
        &mut seg.masks,
        seeds,
        ranges,
        pixel_mm,
        &params.extent,
    );
    limit_slices(seg, ranges)?;
    extent::record_counted(seg.masks.view(), &mut extents);
    let stops = |pick: fn(&extent::StopReason) -> bool| {
        extents
            .iter()
            .flat_map(|e| {
                e.stops
                    .iter()
                    .filter(|s| pick(&s.reason))
                    .map(|s| (e.frame, s.slice))
            })
            .collect::<Vec<_>>()
    };
    let basal = stops(|r| matches!(r, extent::StopReason::BasalCover { .. }));
    let apex = stops(|r| matches!(r, extent::StopReason::ApexVanished { .. }));
    if !basal.is_empty() {
        seg.notes.push(format!(
            "basal rule: {} slice-frames stopped where the blood pool was less than {:.0} % \
             surrounded by myocardium ({})",
            basal.len(),
            100.0 * params.extent.min_cover,
            slice_list(&basal)
        ));
    }
    if !apex.is_empty() {
        seg.notes.push(format!(
            "apex stop: {} slice-frames stopped where the cavity shrank below {} px ({})",
            apex.len(),
            params.extent.apex_min_px,
            slice_list(&apex)
        ));
    }
    seg.extent = extents;
    Ok(())
}

/// The distinct slices of `(frame, slice)` pairs, listed (`slice 2`, `slices 10, 11`).
fn slice_list(at: &[(usize, usize)]) -> String {
    let set: std::collections::BTreeSet<usize> = at.iter().map(|&(_, s)| s).collect();
    let list: Vec<String> = set.iter().map(usize::to_string).collect();
    let noun = if list.len() == 1 { "slice" } else { "slices" };
    format!("{noun} {}", list.join(", "))
}
