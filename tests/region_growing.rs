//! Region growing against a plain breadth-first flood fill, hole filling against a plain
//! border flood, and the refusals that name the seed.

use crate::common;

use std::collections::VecDeque;

use cinegauge::segment::grow::{
    component, fill_holes, fill_holes_up_to, grow, otsu, GrowFailure, GrowParams,
};
use cinegauge::segment::seeds::parse_seeds;
use cinegauge::segment::{segment, Seed, SegmentError, SegmentParams};
use ndarray::{Array2, Array4};

/// Plain BFS flood fill, 4-connected, of pixels >= t from `start` (textbook algorithm).
fn bfs(img: &Array2<f32>, t: f32, start: (usize, usize)) -> Array2<bool> {
    let (rows, cols) = img.dim();
    let mut out = Array2::from_elem((rows, cols), false);
    if img[start] < t {
        return out;
    }
    let mut q = VecDeque::from([start]);
    out[start] = true;
    while let Some((r, c)) = q.pop_front() {
        let nbrs = [
            (r.wrapping_sub(1), c),
            (r + 1, c),
            (r, c.wrapping_sub(1)),
            (r, c + 1),
        ];
        for (nr, nc) in nbrs {
            if nr < rows && nc < cols && !out[(nr, nc)] && img[(nr, nc)] >= t {
                out[(nr, nc)] = true;
                q.push_back((nr, nc));
            }
        }
    }
    out
}

/// Holes by flooding the background from the border with 8-connectivity (textbook).
fn naive_fill(mask: &Array2<bool>) -> Array2<bool> {
    let (rows, cols) = mask.dim();
    let mut outside = Array2::from_elem((rows, cols), false);
    let mut q = VecDeque::new();
    for r in 0..rows {
        for c in 0..cols {
            if (r == 0 || c == 0 || r + 1 == rows || c + 1 == cols) && !mask[(r, c)] {
                outside[(r, c)] = true;
                q.push_back((r, c));
            }
        }
    }
    while let Some((r, c)) = q.pop_front() {
        for dr in -1i64..=1 {
            for dc in -1i64..=1 {
                let (nr, nc) = (r as i64 + dr, c as i64 + dc);
                if nr < 0 || nc < 0 || nr >= rows as i64 || nc >= cols as i64 {
                    continue;
                }
                let p = (nr as usize, nc as usize);
                if !mask[p] && !outside[p] {
                    outside[p] = true;
                    q.push_back(p);
                }
            }
        }
    }
    outside.mapv(|o| !o)
}

#[test]
fn component_matches_breadth_first_flood_fill() {
    // 300 random images of random sizes (1×1 up to 40×37) and densities, including
    // all-dark and all-bright images.
    let mut r = common::rng(7);
    for case in 0..300 {
        let rows = 1 + (common::uniform(&mut r, 0.0, 40.0) as usize);
        let cols = 1 + (common::uniform(&mut r, 0.0, 37.0) as usize);
        let density = match case % 10 {
            0 => 0.0,
            1 => 1.01,
            _ => common::uniform(&mut r, 0.2, 0.8),
        };
        let img = Array2::from_shape_fn((rows, cols), |_| {
            if common::uniform(&mut r, 0.0, 1.0) < density {
                1.0f32
            } else {
                0.0
            }
        });
        let start = (
            (common::uniform(&mut r, 0.0, rows as f64)) as usize,
            (common::uniform(&mut r, 0.0, cols as f64)) as usize,
        );
        assert_eq!(
            component(img.view(), 0.5, start),
            bfs(&img, 0.5, start),
            "case {case} {rows}x{cols}"
        );
        let m = img.mapv(|v| v > 0.5);
        assert_eq!(fill_holes(m.view()), naive_fill(&m), "holes, case {case}");
        for max in [0, 2, 5] {
            assert_eq!(
                fill_holes_up_to(m.view(), max),
                naive_fill_small(&m, max),
                "holes up to {max} px, case {case}"
            );
        }
    }
}

/// `mask` with only the holes (8-connected, found by [`naive_fill`]) of at most `max` pixels
/// filled, each hole measured by its own breadth-first flood.
fn naive_fill_small(mask: &Array2<bool>, max: usize) -> Array2<bool> {
    let holes = &naive_fill(mask) & &mask.mapv(|b| !b);
    let mut out = mask.clone();
    let mut seen = Array2::from_elem(mask.dim(), false);
    for (p, &h) in holes.indexed_iter() {
        if !h || seen[p] {
            continue;
        }
        let (mut members, mut q) = (vec![p], VecDeque::from([p]));
        seen[p] = true;
        while let Some((r, c)) = q.pop_front() {
            for (dr, dc) in (-1i64..=1).flat_map(|a| (-1i64..=1).map(move |b| (a, b))) {
                let (nr, nc) = (r as i64 + dr, c as i64 + dc);
                if nr < 0 || nc < 0 || nr >= mask.nrows() as i64 || nc >= mask.ncols() as i64 {
                    continue;
                }
                let n = (nr as usize, nc as usize);
                if holes[n] && !seen[n] {
                    seen[n] = true;
                    members.push(n);
                    q.push_back(n);
                }
            }
        }
        if members.len() <= max {
            members.into_iter().for_each(|m| out[m] = true);
        }
    }
    out
}

#[test]
fn otsu_splits_two_levels_between_them() {
    // Otsu (1979): for two well-separated classes the threshold lies between them.
    let mut v = vec![0.2f32; 500];
    v.extend(vec![0.9f32; 300]);
    let t = otsu(&v);
    assert!(t > 0.2 && t < 0.9, "{t}");
}

/// A disc of blood (1.0) with a papillary blob (0.3) inside a dark wall ring (0.3) on a
/// mid-grey background (0.4) with a bright outer ring (0.9); sizes in pixels.
fn disc_image(rows: usize, cols: usize, radius: f64) -> Array2<f32> {
    let (cy, cx) = (rows as f64 / 2.0, cols as f64 / 2.0);
    Array2::from_shape_fn((rows, cols), |(r, c)| {
        let d = ((r as f64 - cy).powi(2) + (c as f64 - cx).powi(2)).sqrt();
        let pap = ((r as f64 - cy - radius / 2.0).powi(2) + (c as f64 - cx).powi(2)).sqrt() < 2.0;
        if d < radius {
            if pap {
                0.3
            } else {
                1.0
            }
        } else if d < radius + 5.0 {
            0.3
        } else if d > (rows.min(cols) as f64) / 2.0 - 3.0 {
            0.9
        } else {
            0.4
        }
    })
}

#[test]
fn grows_a_disc_and_counts_the_papillary_muscle() {
    let img = disc_image(64, 70, 12.0);
    let region = grow(img.view(), (32, 35), None, &GrowParams::default()).unwrap();
    // Pixel centres within radius 12 of (32, 35): counted directly (papillary included).
    let want = img
        .indexed_iter()
        .filter(|((r, c), _)| {
            ((*r as f64 - 32.0).powi(2) + (*c as f64 - 35.0).powi(2)).sqrt() < 12.0
        })
        .count();
    assert_eq!(region.area_px(), want);
    assert!(region.threshold > 0.3 && region.threshold < 1.0);
}

#[test]
fn dark_and_runaway_seeds_are_refused() {
    let img = disc_image(64, 70, 12.0);
    let e = grow(img.view(), (32, 19), None, &GrowParams::default()).unwrap_err();
    assert!(
        matches!(e, GrowFailure::Dark { .. }),
        "seed in the wall: {e:?}"
    );
    let flat = Array2::from_elem((40, 40), 1.0f32);
    let bright_everywhere =
        Array2::from_shape_fn(
            (40, 40),
            |(r, c)| if r == 0 && c == 0 { 0.0 } else { flat[(r, c)] },
        );
    let e = grow(
        bright_everywhere.view(),
        (20, 20),
        None,
        &GrowParams::default(),
    )
    .unwrap_err();
    assert!(matches!(e, GrowFailure::Runaway { .. }), "{e:?}");
}

#[test]
fn segment_errors_name_the_seed() {
    let img = disc_image(64, 70, 12.0);
    let mut stack = Array4::<f32>::zeros((3, 2, 64, 70));
    for s in 0..3 {
        for f in 0..2 {
            stack.slice_mut(ndarray::s![s, f, .., ..]).assign(&img);
        }
    }
    let p = SegmentParams::default();
    let outside = Seed {
        slice: 1,
        frame: 0,
        row: 64,
        col: 10,
    };
    let e = segment(
        stack.view(),
        &[
            Seed {
                slice: 1,
                frame: 0,
                row: 32,
                col: 35,
            },
            outside,
        ],
        &p,
    )
    .unwrap_err();
    assert!(
        matches!(e, SegmentError::SeedOutside { index: 2, .. }),
        "{e:?}"
    );
    assert!(
        e.to_string()
            .contains("seed #2 (slice 1, frame 0, row 64, col 10)"),
        "{e}"
    );
    let background = Seed {
        slice: 1,
        frame: 1,
        row: 1,
        col: 35,
    };
    let e = segment(stack.view(), &[background], &p).unwrap_err();
    let text = e.to_string();
    assert!(
        text.contains("seed #1") && text.contains("row 1, col 35"),
        "{text}"
    );
    assert_eq!(
        segment(stack.view(), &[], &p).unwrap_err(),
        SegmentError::NoSeeds
    );
}

#[test]
fn one_seed_propagates_through_frames_and_slices() {
    let img = disc_image(64, 70, 12.0);
    // Radius 9 against 12: an area ratio of 0.56, within the frame-to-frame limit of 2×.
    let small = disc_image(64, 70, 9.0);
    let mut stack = Array4::<f32>::zeros((3, 4, 64, 70));
    for s in 0..3 {
        for f in 0..4 {
            let src = if s == 0 || f == 2 { &small } else { &img };
            stack.slice_mut(ndarray::s![s, f, .., ..]).assign(src);
        }
    }
    let seg = segment(
        stack.view(),
        &[Seed {
            slice: 1,
            frame: 0,
            row: 32,
            col: 35,
        }],
        &SegmentParams::default(),
    )
    .unwrap();
    let area = |s: usize, f: usize| {
        seg.masks
            .slice(ndarray::s![s, f, .., ..])
            .iter()
            .filter(|&&b| b)
            .count()
    };
    let big = grow(img.view(), (32, 35), None, &GrowParams::default())
        .unwrap()
        .area_px();
    let little = grow(small.view(), (32, 35), None, &GrowParams::default())
        .unwrap()
        .area_px();
    for f in 0..4 {
        assert_eq!(area(0, f), little, "slice 0 frame {f}");
        assert_eq!(
            area(1, f),
            if f == 2 { little } else { big },
            "slice 1 frame {f}"
        );
    }
}

#[test]
fn seeds_file_is_parsed_and_refused_clearly() {
    let ok = parse_seeds(
        "[[seed]]\nslice = 5\nframe = 0\nrow = 60\ncol = 58\n",
        "s.toml",
    )
    .unwrap();
    assert_eq!(
        ok,
        vec![Seed {
            slice: 5,
            frame: 0,
            row: 60,
            col: 58
        }]
    );
    let e = parse_seeds("[[seed]]\nslice = 5\nframe = 0\nrow = 60\n", "s.toml")
        .unwrap_err()
        .to_string();
    assert!(e.contains("s.toml") && e.contains("col"), "{e}");
    let e = parse_seeds(
        "[[seed]]\nslice = -1\nframe = 0\nrow = 60\ncol = 1\n",
        "s.toml",
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("s.toml") && e.contains("slice"), "{e}");
    let e = parse_seeds("", "s.toml").unwrap_err().to_string();
    assert!(e.contains("s.toml"), "{e}");
}

#[test]
fn one_pixel_images_do_not_panic() {
    // Regression: imageproc 0.27's connected_components panics on a 1×1 foreground image.
    let one = Array2::from_elem((1, 1), 1.0f32);
    assert_eq!(
        component(one.view(), 0.5, (0, 0)),
        Array2::from_elem((1, 1), true)
    );
    assert_eq!(
        fill_holes(Array2::from_elem((1, 1), true).view()),
        Array2::from_elem((1, 1), true)
    );
}

#[test]
fn a_collapsing_region_is_reported_not_measured() {
    // Regression: on a zero-filled R = 12 demo run the seed slice's region collapsed at
    // end-systole and gave ESV 0.8 ml, EF 99.5 %. A region shrinking to a small fraction of
    // the previous frame's area is now refused with the slice and frame named.
    let big = disc_image(64, 70, 12.0);
    let tiny = disc_image(64, 70, 4.0);
    let mut stack = Array4::<f32>::zeros((1, 3, 64, 70));
    for (f, img) in [&big, &tiny, &big].iter().enumerate() {
        stack.slice_mut(ndarray::s![0, f, .., ..]).assign(*img);
    }
    let e = segment(
        stack.view(),
        &[Seed {
            slice: 0,
            frame: 0,
            row: 32,
            col: 35,
        }],
        &SegmentParams::default(),
    )
    .unwrap_err();
    assert!(
        matches!(
            e,
            SegmentError::Lost {
                slice: 0,
                frame: 1,
                ..
            }
        ),
        "{e}"
    );
}
