//! A small drawing surface over printpdf operations, measured in millimetres from the
//! top-left corner of an A4 page (PDF itself counts from the bottom-left).

use printpdf::{
    Color, Greyscale, Line, LineDashPattern, LinePoint, Mm, Op, PaintMode, Point, Polygon,
    PolygonRing, Pt, Rect, Rgb, TextItem, WindingOrder,
};

/// A4 width in mm.
pub const PAGE_W: f32 = 210.0;
/// A4 height in mm.
pub const PAGE_H: f32 = 297.0;

/// Font weight.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Weight {
    /// Regular.
    Regular,
    /// Bold.
    Bold,
}

/// Operations of one page.
#[derive(Default)]
pub struct Page {
    /// The PDF operations drawn so far.
    pub ops: Vec<Op>,
}

fn pt(mm: f32) -> Pt {
    Mm(mm).into_pt()
}

fn point(x_mm: f32, y_top_mm: f32) -> Point {
    Point::new(Mm(x_mm), Mm(PAGE_H - y_top_mm))
}

/// Straight-segment path points from page positions (mm from the top-left).
fn line_points(points: &[(f32, f32)]) -> Vec<LinePoint> {
    points
        .iter()
        .map(|&(x, y)| LinePoint {
            p: point(x, y),
            bezier: false,
        })
        .collect()
}

/// An RGB colour from 0–1 components.
pub fn rgb(r: f32, g: f32, b: f32) -> Color {
    Color::Rgb(Rgb {
        r,
        g,
        b,
        icc_profile: None,
    })
}

/// A grey level from 0 (black) to 1 (white).
pub fn grey(v: f32) -> Color {
    Color::Greyscale(Greyscale {
        percent: v,
        icc_profile: None,
    })
}

impl Page {
    /// Text with its baseline at `y_mm` from the top.
    pub fn text(&mut self, x_mm: f32, y_mm: f32, size_pt: f32, weight: Weight, text: &str) {
        self.ops.extend([
            Op::StartTextSection,
            Op::SetFillColor { col: grey(0.0) },
            Op::SetTextCursor {
                pos: point(x_mm, y_mm),
            },
            Op::SetFont {
                font: super::fonts::handle(weight),
                size: Pt(size_pt),
            },
            Op::ShowText {
                items: vec![TextItem::Text(text.to_string())],
            },
            Op::EndTextSection,
        ]);
    }

    /// Text right-aligned at `x_right_mm` (width from the font's advance widths).
    pub fn text_right(
        &mut self,
        x_right_mm: f32,
        y_mm: f32,
        size_pt: f32,
        weight: Weight,
        text: &str,
    ) {
        let w = super::fonts::width_mm(text, size_pt, weight);
        self.text(x_right_mm - w, y_mm, size_pt, weight, text);
    }

    /// A filled rectangle, top-left corner at `(x, y)`.
    pub fn fill_rect(&mut self, x_mm: f32, y_mm: f32, w_mm: f32, h_mm: f32, col: Color) {
        self.ops.push(Op::SetFillColor { col });
        self.ops.push(Op::DrawRectangle {
            rectangle: Rect {
                x: pt(x_mm),
                y: pt(PAGE_H - y_mm - h_mm),
                width: pt(w_mm),
                height: pt(h_mm),
                mode: Some(PaintMode::Fill),
                winding_order: None,
            },
        });
    }

    /// A straight line.
    pub fn line(&mut self, from: (f32, f32), to: (f32, f32), width_pt: f32, col: Color) {
        self.ops.push(Op::SetOutlineColor { col });
        self.ops.push(Op::SetOutlineThickness { pt: Pt(width_pt) });
        self.ops.push(Op::DrawLine {
            line: Line {
                points: vec![
                    LinePoint {
                        p: point(from.0, from.1),
                        bezier: false,
                    },
                    LinePoint {
                        p: point(to.0, to.1),
                        bezier: false,
                    },
                ],
                is_closed: false,
            },
        });
    }

    /// An open polyline, solid or dashed (`dash`: on/off lengths in pt).
    pub fn polyline(&mut self, points: &[(f32, f32)], width_pt: f32, col: Color, dash: &[f32]) {
        if points.len() < 2 {
            return;
        }
        self.ops.push(Op::SetOutlineColor { col });
        self.ops.push(Op::SetOutlineThickness { pt: Pt(width_pt) });
        self.ops.push(Op::SetLineDashPattern {
            dash: if dash.is_empty() {
                LineDashPattern::solid()
            } else {
                LineDashPattern::new(0.0, dash)
            },
        });
        self.ops.push(Op::DrawLine {
            line: Line {
                points: line_points(points),
                is_closed: false,
            },
        });
        self.ops.push(Op::SetLineDashPattern {
            dash: LineDashPattern::solid(),
        });
    }

    /// A filled polygon.
    pub fn fill_polygon(&mut self, points: &[(f32, f32)], col: Color) {
        if points.len() < 3 {
            return;
        }
        self.ops.push(Op::SetFillColor { col });
        self.ops.push(Op::DrawPolygon {
            polygon: Polygon {
                rings: vec![PolygonRing {
                    points: line_points(points),
                }],
                mode: PaintMode::Fill,
                winding_order: WindingOrder::NonZero,
            },
        });
    }

    /// A rectangle outline.
    pub fn stroke_rect(&mut self, x_mm: f32, y_mm: f32, w_mm: f32, h_mm: f32, width_pt: f32) {
        let (x1, y1) = (x_mm + w_mm, y_mm + h_mm);
        self.polyline(
            &[(x_mm, y_mm), (x1, y_mm), (x1, y1), (x_mm, y1), (x_mm, y_mm)],
            width_pt,
            grey(0.0),
            &[],
        );
    }

    /// A raster image (already added to the document as `id`), `px_w` pixels wide, drawn
    /// `w_mm` wide with its top-left corner at `(x, y)`.
    pub fn image(
        &mut self,
        id: printpdf::XObjectId,
        x_mm: f32,
        y_mm: f32,
        w_mm: f32,
        px_w: usize,
        px_h: usize,
    ) {
        let dpi = px_w as f32 / (w_mm / 25.4);
        let h_mm = w_mm * px_h as f32 / px_w as f32;
        self.ops.push(Op::UseXobject {
            id,
            transform: printpdf::XObjectTransform {
                translate_x: Some(pt(x_mm)),
                translate_y: Some(pt(PAGE_H - y_mm - h_mm)),
                dpi: Some(dpi),
                ..Default::default()
            },
        });
    }
}
