//! Rectangular windows of an image: region growing and the leak guard work on a window
//! around the region they start from (a cavity is a small part of the field of view), and
//! fall back to the whole image when a region reaches the window's edge.

use std::ops::Range;

use ndarray::{s, Array2, ArrayView2};

use super::grow::Region;

/// Rows and columns of a window.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Window {
    /// Row range.
    pub rows: Range<usize>,
    /// Column range.
    pub cols: Range<usize>,
}

impl Window {
    /// The whole image of size `dims`.
    pub fn full(dims: (usize, usize)) -> Self {
        Window {
            rows: 0..dims.0,
            cols: 0..dims.1,
        }
    }

    /// The bounding box of `mask`'s pixels, widened by `margin` on every side (clipped to
    /// the image); the whole image when the mask is empty.
    pub fn around(mask: ArrayView2<bool>, margin: usize) -> Self {
        let dims = mask.dim();
        let mut bb: Option<(usize, usize, usize, usize)> = None;
        for ((r, c), &m) in mask.indexed_iter() {
            if m {
                bb = Some(match bb {
                    None => (r, r, c, c),
                    Some((r0, r1, c0, c1)) => (r0.min(r), r1.max(r), c0.min(c), c1.max(c)),
                });
            }
        }
        match bb {
            None => Window::full(dims),
            Some((r0, r1, c0, c1)) => Window {
                rows: r0.saturating_sub(margin)..(r1 + 1 + margin).min(dims.0),
                cols: c0.saturating_sub(margin)..(c1 + 1 + margin).min(dims.1),
            },
        }
    }

    /// The smallest window holding both.
    pub fn union(&self, other: &Window) -> Window {
        Window {
            rows: self.rows.start.min(other.rows.start)..self.rows.end.max(other.rows.end),
            cols: self.cols.start.min(other.cols.start)..self.cols.end.max(other.cols.end),
        }
    }

    /// Whether the window is the whole image.
    pub fn is_full(&self, dims: (usize, usize)) -> bool {
        *self == Window::full(dims)
    }

    /// The window's part of an array.
    pub fn view<'a, T>(&self, a: ArrayView2<'a, T>) -> ArrayView2<'a, T> {
        a.slice_move(s![self.rows.clone(), self.cols.clone()])
    }

    /// A local point from an image point inside the window.
    pub fn local(&self, p: (usize, usize)) -> (usize, usize) {
        (p.0 - self.rows.start, p.1 - self.cols.start)
    }

    /// The window's part of a region, as a region of its own.
    pub fn crop(&self, region: &Region) -> Region {
        Region {
            mask: self.view(region.mask.view()).to_owned(),
            ..region.clone()
        }
    }

    /// A local region put back into an image of size `dims`.
    pub fn embed(&self, local: Region, dims: (usize, usize)) -> Region {
        let mut mask = Array2::from_elem(dims, false);
        mask.slice_mut(s![self.rows.clone(), self.cols.clone()])
            .assign(&local.mask);
        Region { mask, ..local }
    }

    /// Whether a local mask comes within `slack` pixels of an edge of the window that is not
    /// an edge of the image (it might go on beyond the window, or its surroundings might).
    pub fn clips(&self, local: ArrayView2<bool>, dims: (usize, usize), slack: usize) -> bool {
        let (h, w) = local.dim();
        let edge = |r: usize, c: usize| {
            (r <= slack && self.rows.start > 0)
                || (r + 1 + slack >= h && self.rows.end < dims.0)
                || (c <= slack && self.cols.start > 0)
                || (c + 1 + slack >= w && self.cols.end < dims.1)
        };
        local.indexed_iter().any(|((r, c), &m)| m && edge(r, c))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crop_and_embed_round_trip_and_edges_are_seen() {
        let mut m = Array2::from_elem((20, 30), false);
        m[(5, 7)] = true;
        m[(9, 12)] = true;
        let w = Window::around(m.view(), 2);
        assert_eq!((w.rows.clone(), w.cols.clone()), (3..12, 5..15));
        let r = Region {
            mask: m.clone(),
            threshold: 0.5,
            blood: 1.0,
            wall: 0.0,
        };
        let local = w.crop(&r);
        assert!(!w.clips(local.mask.view(), (20, 30), 0));
        assert!(w.clips(local.mask.view(), (20, 30), 2));
        assert_eq!(w.embed(local, (20, 30)).mask, m);
        let tight = Window::around(m.view(), 0);
        assert!(tight.clips(tight.view(m.view()), (20, 30), 0));
        assert!(!Window::full((20, 30)).clips(m.view(), (20, 30), 5));
        assert_eq!(w.local((5, 7)), (2, 2));
    }
}
