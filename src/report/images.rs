//! Image panels: per subject, the seed's slice at ED and ES for the reference and for each
//! method at each R, with the LV contour, read from the run's `panels/` folder (written by the
//! demo or a study run; one window/level per subject).

use std::path::Path;

use printpdf::{PdfDocument, RawImage, RawImageData, RawImageFormat};

use super::canvas::{Page, Weight, PAGE_H, PAGE_W};
use super::{trim_num, MARGIN};
use crate::agreement::REFERENCE;
use crate::panels;
use crate::results::{ResultsFile, RunStatus};

/// Adds one PNG to the document; `None` when it is missing or unreadable.
fn load(doc: &mut PdfDocument, path: &Path) -> Option<(printpdf::XObjectId, usize, usize)> {
    let img = image::open(path).ok()?.to_rgb8();
    let (w, h) = (img.width() as usize, img.height() as usize);
    let raw = RawImage {
        pixels: RawImageData::U8(img.into_raw()),
        width: w,
        height: h,
        data_format: RawImageFormat::RGB8,
        tag: Vec::new(),
    };
    Some((doc.add_image(&raw), w, h))
}

/// The image pages, two subjects to a page; empty when the folder holds no panels.
pub fn image_pages(results: &ResultsFile, dir: &Path, doc: &mut PdfDocument) -> Vec<Page> {
    let mut subjects: Vec<&str> = Vec::new();
    for r in &results.runs {
        if !subjects.contains(&r.subject.as_str()) {
            subjects.push(&r.subject);
        }
    }
    let mut methods: Vec<(&str, &str)> = Vec::new();
    let mut accels: Vec<f64> = Vec::new();
    for r in results.runs.iter().filter(|r| r.method != REFERENCE) {
        if !methods.contains(&(r.method.as_str(), r.pattern.as_str())) {
            methods.push((&r.method, &r.pattern));
        }
        if !accels.contains(&r.accel_nominal) {
            accels.push(r.accel_nominal);
        }
    }
    accels.sort_by(f64::total_cmp);
    let label_w = 16.0;
    let cols = methods.len().max(1);
    let cell_w = (PAGE_W - 2.0 * MARGIN - label_w) / cols as f32;
    let pair_w = cell_w - 3.0;
    let mut pages = Vec::new();
    let mut page = Page::default();
    let mut y = MARGIN + 2.0;
    let mut drew = false;
    let heading = |page: &mut Page, y: &mut f32| {
        page.text(
            MARGIN,
            *y,
            13.0,
            Weight::Bold,
            "The images behind the numbers",
        );
        *y += 5.0;
        for line in super::wrap("Each pair: the seed's slice at the reference's end-diastolic (left) and end-systolic (right) frame, with the LV contour found on that image; one window/level per subject.", 7.5, super::TEXT_W) {
            page.text(MARGIN, *y, 7.5, Weight::Regular, &line);
            *y += 3.6;
        }
        *y += 2.5;
    };
    heading(&mut page, &mut y);
    for subject in subjects {
        let panel = |m: &str, p: &str, r: f64| {
            let measured = results.runs.iter().any(|x| {
                x.subject == subject
                    && x.method == m
                    && x.pattern == p
                    && x.accel_nominal == r
                    && x.status == RunStatus::Ok
            });
            measured.then(|| panels::file(dir, subject, m, p, r))
        };
        let reference = results
            .runs
            .iter()
            .find(|x| x.subject == subject && x.method == REFERENCE)
            .and_then(|x| panel(&x.method, &x.pattern, x.accel_nominal));
        let Some(ref_path) = reference.filter(|p| p.is_file()) else {
            continue;
        };
        let Some((ref_id, pw, ph)) = load(doc, &ref_path) else {
            continue;
        };
        let cell_h = pair_w * ph as f32 / pw as f32 + 2.0;
        let block = 8.0 + (1 + accels.len()) as f32 * (cell_h + 2.0);
        if y + block > PAGE_H - MARGIN - 6.0 {
            pages.push(std::mem::take(&mut page));
            y = MARGIN + 2.0;
            heading(&mut page, &mut y);
        }
        drew = true;
        page.text(MARGIN, y, 9.5, Weight::Bold, subject);
        y += 2.0;
        page.text(
            MARGIN,
            y + cell_h / 2.0 + 1.0,
            7.0,
            Weight::Regular,
            "reference",
        );
        page.image(ref_id, MARGIN + label_w, y + 1.0, pair_w, pw, ph);
        y += cell_h + 5.0;
        for (k, (m, _)) in methods.iter().enumerate() {
            page.text(
                MARGIN + label_w + k as f32 * cell_w,
                y - 1.0,
                6.5,
                Weight::Bold,
                m,
            );
        }
        for r in &accels {
            page.text(
                MARGIN,
                y + cell_h / 2.0 + 1.0,
                7.0,
                Weight::Regular,
                &format!("R = {}", trim_num(*r)),
            );
            for (k, (m, p)) in methods.iter().enumerate() {
                let x = MARGIN + label_w + k as f32 * cell_w;
                match panel(m, p, *r)
                    .filter(|f| f.is_file())
                    .and_then(|f| load(doc, &f))
                {
                    Some((id, w, h)) => page.image(id, x, y, pair_w, w, h),
                    None => page.text(
                        x + 1.0,
                        y + cell_h / 2.0,
                        6.5,
                        Weight::Regular,
                        "not measured",
                    ),
                }
            }
            y += cell_h + 2.0;
        }
        y += 4.0;
    }
    if drew {
        pages.push(page);
    }
    pages
}
