//! The report's typeface: DejaVu Sans (regular and bold, freely licensed, shipped in
//! `assets/fonts/` with its licence) embedded in every PDF, so that ±, ², µ, Δ, ≤ and − render
//! in any viewer. Text widths come from the font's own advance widths.

use std::sync::OnceLock;

use printpdf::{FontId, ParsedFont, PdfDocument, PdfFontHandle};

use super::canvas::Weight;

static REGULAR_TTF: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");
static BOLD_TTF: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans-Bold.ttf");

/// Fixed resource names, so that the same report gives the same bytes.
const REGULAR_ID: &str = "CGRegular";
const BOLD_ID: &str = "CGBold";

struct Faces {
    regular: ParsedFont,
    bold: ParsedFont,
}

fn faces() -> &'static Faces {
    static FACES: OnceLock<Faces> = OnceLock::new();
    FACES.get_or_init(|| {
        let parse = |bytes: &[u8]| {
            ParsedFont::from_bytes(bytes, 0, &mut Vec::new()).expect("the shipped font parses")
        };
        Faces {
            regular: parse(REGULAR_TTF),
            bold: parse(BOLD_TTF),
        }
    })
}

/// The font handle for text ops.
pub fn handle(weight: Weight) -> PdfFontHandle {
    PdfFontHandle::External(FontId(
        match weight {
            Weight::Regular => REGULAR_ID,
            Weight::Bold => BOLD_ID,
        }
        .to_string(),
    ))
}

/// Adds both faces to a document under their fixed names.
pub fn register(doc: &mut PdfDocument) {
    let f = faces();
    for (id, face) in [(REGULAR_ID, &f.regular), (BOLD_ID, &f.bold)] {
        doc.resources
            .fonts
            .map
            .insert(FontId(id.to_string()), printpdf::PdfFont::new(face.clone()));
    }
}

/// Width of `text` in mm at `size_pt`, from the glyphs' advance widths.
pub fn width_mm(text: &str, size_pt: f32, weight: Weight) -> f32 {
    let f = faces();
    let face = match weight {
        Weight::Regular => &f.regular,
        Weight::Bold => &f.bold,
    };
    let upem = f32::from(face.pdf_font_metrics.units_per_em.max(1));
    let units: f32 = text
        .chars()
        .map(|c| {
            face.lookup_glyph_index(c as u32)
                .and_then(|g| face.get_glyph_width(g))
                .map_or(0.6 * upem, f32::from)
        })
        .sum();
    units / upem * size_pt * 25.4 / 72.0
}
