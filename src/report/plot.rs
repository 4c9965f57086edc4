//! Vector plots on a report page: axes with rounded ticks, lines, bands and markers. Methods
//! are told apart by colour (the Okabe & Ito 2008 colour-blind-safe palette), by line dash and
//! by marker shape, so that greyscale prints stay readable.

use printpdf::Color;

use super::canvas::{grey, rgb, Page, Weight};
use super::fonts;

/// How one series is drawn.
#[derive(Debug, Clone, Copy)]
pub struct Style {
    /// Line and marker colour.
    pub colour: (f32, f32, f32),
    /// Dash pattern (pt on/off; empty: solid).
    pub dash: &'static [f32],
    /// Marker shape.
    pub marker: Marker,
}

/// Marker shapes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    /// Filled circle.
    Circle,
    /// Filled square.
    Square,
    /// Filled triangle.
    Triangle,
    /// Filled diamond.
    Diamond,
    /// Open cross.
    Cross,
}

/// The style of series `i` (the reference is drawn black and solid separately).
pub fn style(i: usize) -> Style {
    const PALETTE: [(f32, f32, f32); 6] = [
        (0.0, 0.447, 0.698),   // blue
        (0.835, 0.369, 0.0),   // vermillion
        (0.0, 0.620, 0.451),   // bluish green
        (0.800, 0.475, 0.655), // reddish purple
        (0.902, 0.624, 0.0),   // orange
        (0.337, 0.706, 0.914), // sky blue
    ];
    const DASHES: [&[f32]; 4] = [&[], &[4.0, 2.0], &[1.2, 1.6], &[5.0, 1.5, 1.2, 1.5]];
    const MARKERS: [Marker; 5] = [
        Marker::Circle,
        Marker::Square,
        Marker::Triangle,
        Marker::Diamond,
        Marker::Cross,
    ];
    Style {
        colour: PALETTE[i % PALETTE.len()],
        dash: DASHES[i % DASHES.len()],
        marker: MARKERS[i % MARKERS.len()],
    }
}

/// The colour of a style.
pub fn colour(s: &Style) -> Color {
    rgb(s.colour.0, s.colour.1, s.colour.2)
}

/// A lighter tint of a style's colour, for bands.
pub fn tint(s: &Style) -> Color {
    let t = |v: f32| v + (1.0 - v) * 0.78;
    rgb(t(s.colour.0), t(s.colour.1), t(s.colour.2))
}

/// Rounded tick positions covering `[lo, hi]` with about `n` steps (1, 2, 2.5, 5 × 10^k).
pub fn ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    if !(lo.is_finite() && hi.is_finite()) || hi <= lo {
        return vec![lo];
    }
    let raw = (hi - lo) / n.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let start = (lo / step).ceil() as i64;
    let end = (hi / step).floor() as i64;
    (start..=end).map(|k| k as f64 * step).collect()
}

/// A plotting frame on the page: a rectangle (mm) and the data ranges it shows.
#[derive(Debug, Clone, Copy)]
pub struct Axes {
    /// Left edge (mm).
    pub x: f32,
    /// Top edge (mm).
    pub y: f32,
    /// Width (mm).
    pub w: f32,
    /// Height (mm).
    pub h: f32,
    /// Data range on x.
    pub xr: (f64, f64),
    /// Data range on y.
    pub yr: (f64, f64),
}

impl Axes {
    /// Page position of a data point.
    pub fn at(&self, x: f64, y: f64) -> (f32, f32) {
        let fx = ((x - self.xr.0) / (self.xr.1 - self.xr.0)) as f32;
        let fy = ((y - self.yr.0) / (self.yr.1 - self.yr.0)) as f32;
        (self.x + fx * self.w, self.y + self.h - fy * self.h)
    }

    /// Frame, grid lines, tick labels and axis titles. `x_ticks` overrides the x ticks (for
    /// categorical positions such as accelerations).
    pub fn draw(
        &self,
        page: &mut Page,
        x_ticks: Option<&[(f64, String)]>,
        x_title: &str,
        y_title: &str,
        size: f32,
    ) {
        let auto: Vec<(f64, String)>;
        let xt = match x_ticks {
            Some(t) => t,
            None => {
                auto = ticks(self.xr.0, self.xr.1, 5)
                    .into_iter()
                    .map(|v| (v, label(v)))
                    .collect();
                &auto
            }
        };
        for (v, text) in xt {
            let (px, _) = self.at(*v, self.yr.0);
            page.line((px, self.y), (px, self.y + self.h), 0.3, grey(0.88));
            let w = fonts::width_mm(text, size, Weight::Regular);
            page.text(
                px - w / 2.0,
                self.y + self.h + size * 0.45,
                size,
                Weight::Regular,
                text,
            );
        }
        for v in ticks(self.yr.0, self.yr.1, 4) {
            let (_, py) = self.at(self.xr.0, v);
            page.line((self.x, py), (self.x + self.w, py), 0.3, grey(0.88));
            page.text_right(
                self.x - 1.0,
                py + size * 0.12,
                size,
                Weight::Regular,
                &label(v),
            );
        }
        page.stroke_rect(self.x, self.y, self.w, self.h, 0.5);
        let w = fonts::width_mm(x_title, size, Weight::Regular);
        page.text(
            self.x + self.w / 2.0 - w / 2.0,
            self.y + self.h + size * 0.85,
            size,
            Weight::Regular,
            x_title,
        );
        page.text(self.x, self.y - 1.5, size, Weight::Bold, y_title);
    }

    /// A horizontal reference line across the frame.
    pub fn hline(&self, page: &mut Page, y: f64, col: Color, dash: &'static [f32], width: f32) {
        if y < self.yr.0 || y > self.yr.1 {
            return;
        }
        let (x0, py) = self.at(self.xr.0, y);
        let (x1, _) = self.at(self.xr.1, y);
        page.polyline(&[(x0, py), (x1, py)], width, col, dash);
    }
}

/// A tick label: integers without decimals, others with as few as needed.
pub fn label(v: f64) -> String {
    if (v - v.round()).abs() < 1e-9 {
        format!("{}", v.round() as i64)
    } else {
        let s = format!("{v:.2}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

/// A marker of `size` mm at a page position.
pub fn marker(page: &mut Page, (x, y): (f32, f32), m: Marker, size: f32, col: Color) {
    let r = size / 2.0;
    match m {
        Marker::Circle => {
            let pts: Vec<(f32, f32)> = (0..12)
                .map(|k| {
                    let a = k as f32 * std::f32::consts::TAU / 12.0;
                    (x + r * a.cos(), y + r * a.sin())
                })
                .collect();
            page.fill_polygon(&pts, col);
        }
        Marker::Square => page.fill_polygon(
            &[
                (x - r, y - r),
                (x + r, y - r),
                (x + r, y + r),
                (x - r, y + r),
            ],
            col,
        ),
        Marker::Triangle => page.fill_polygon(
            &[
                (x, y - r * 1.15),
                (x + r * 1.1, y + r * 0.8),
                (x - r * 1.1, y + r * 0.8),
            ],
            col,
        ),
        Marker::Diamond => page.fill_polygon(
            &[(x, y - r * 1.2), (x + r, y), (x, y + r * 1.2), (x - r, y)],
            col,
        ),
        Marker::Cross => {
            page.polyline(&[(x - r, y - r), (x + r, y + r)], 0.9, col.clone(), &[]);
            page.polyline(&[(x - r, y + r), (x + r, y - r)], 0.9, col, &[]);
        }
    }
}
