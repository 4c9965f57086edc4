//! The PDF report: what was compared, the clinical numbers of every run, and the caution.

mod canvas;
mod decision;
mod figures;
mod fonts;
mod images;
mod plot;
mod provenance;

use std::path::Path;

use printpdf::{Mm, PdfDocument, PdfPage, PdfSaveOptions};

use crate::caution::CAUTION;
use crate::io::{write_atomic, IoError};
use crate::results::{ResultsFile, RunRow, RunStatus};
use canvas::{grey, rgb, Page, Weight, PAGE_H, PAGE_W};

const MARGIN: f32 = 16.0;
const ROW_H: f32 = 5.2;

/// Builds the report's PDF bytes from a results file, with the image panels from `panels`
/// when given. Deterministic: no clock is read.
pub fn render(results: &ResultsFile, panels: Option<&Path>) -> Vec<u8> {
    render_with(results, panels, None)
}

/// [`render`] with extra titled text pages (e.g. the reader study) before the provenance.
pub fn render_with(
    results: &ResultsFile,
    panels: Option<&Path>,
    extra: Option<(&str, &Sections)>,
) -> Vec<u8> {
    let mut doc = PdfDocument::new(&format!("cinegauge report {}", results.study));
    fonts::register(&mut doc);
    let mut pages = vec![];
    let mut page = Page::default();
    let mut y = MARGIN + 4.0;
    page.text(
        MARGIN,
        y,
        17.0,
        Weight::Bold,
        "Do the clinical numbers survive the acceleration?",
    );
    y += 7.0;
    page.text(
        MARGIN,
        y,
        10.0,
        Weight::Regular,
        &format!(
            "Study {}  ·  report of {}  ·  cinegauge {}",
            results.study,
            report_date(),
            results.version
        ),
    );
    y += 6.0;
    y = caution_box(&mut page, y);
    y += 7.0;
    if !results.missing_units.is_empty() {
        let text = format!(
            "Partial study: {} units were not available when these results were gathered and count as failed runs: {}.",
            results.missing_units.len(),
            results.missing_units.join("; ")
        );
        // Measured in the regular face, drawn in bold (a little wider): keep a margin.
        let lines = wrap(&text, 8.5, TEXT_W - 16.0);
        let h = 4.0 + 4.2 * lines.len() as f32;
        page.fill_rect(
            MARGIN,
            y - 4.0,
            PAGE_W - 2.0 * MARGIN,
            h,
            rgb(0.98, 0.86, 0.86),
        );
        for l in lines {
            page.text(MARGIN + 4.0, y, 8.5, Weight::Bold, &l);
            y += 4.2;
        }
        y += 5.0;
    }

    let subjects: std::collections::BTreeSet<&str> =
        results.runs.iter().map(|r| r.subject.as_str()).collect();
    let mut methods: Vec<String> = Vec::new();
    let mut accels: Vec<f64> = Vec::new();
    for r in results.runs.iter().filter(|r| r.method != "reference") {
        let m = format!("{} ({})", r.method, r.pattern);
        if !methods.contains(&m) {
            methods.push(m);
        }
        if !accels.contains(&r.accel_nominal) {
            accels.push(r.accel_nominal);
        }
    }
    accels.sort_by(f64::total_cmp);
    let accel_text: Vec<String> = accels.iter().map(|a| trim_num(*a)).collect();
    page.text(MARGIN, y, 11.0, Weight::Bold, "What was compared");
    y += 5.5;
    let compared = [
        format!("{} subject(s): {}", subjects.len(), subjects.iter().cloned().collect::<Vec<_>>().join(", ")),
        format!(
            "Fully sampled reference against: {} at R = {}.",
            if methods.is_empty() { "nothing".to_string() } else { methods.join(", ") },
            accel_text.join(", ")
        ),
        format!(
            "Volumes by the method of discs (area x centre-to-centre slice spacing); {}; {}.",
            results.runs.first().map(|r| r.blood_pool_convention.as_str()).unwrap_or("no runs"),
            results.runs.first().map(|r| r.slice_rule.as_str()).unwrap_or("")
        ),
        "ED = frame of largest LV volume, ES = frame of smallest. R nominal / effective (all lines / acquired lines).".into(),
    ];
    for line in compared.iter().flat_map(|l| wrap(l, 8.5, TEXT_W)) {
        page.text(MARGIN, y, 8.5, Weight::Regular, &line);
        y += 4.3;
    }
    y += 3.0;
    decision::decision_summary(&mut page, results, y);
    pages.push(page);
    pages.extend(figures::accel_page(results));
    for q in figures::BA_QUANTITIES {
        pages.extend(figures::bland_altman_pages(results, q));
    }
    pages.extend(figures::curve_pages(results));
    if let Some(dir) = panels {
        pages.extend(images::image_pages(results, dir, &mut doc));
    }
    pages.extend(figures::fidelity_page(results));
    page = Page::default();
    y = MARGIN + 2.0;
    y = ef_grid(&mut page, results, y);
    y += 7.0;
    page.text(MARGIN, y, 11.0, Weight::Bold, "Clinical numbers per run");
    y += 3.0;

    let cols: [(&str, f32, bool); 11] = [
        ("Subject", 14.0, false),
        ("Method", 26.0, false),
        ("Pattern", 25.0, false),
        ("R nom/eff", 17.0, true),
        ("EDV ml", 13.0, true),
        ("ESV ml", 13.0, true),
        ("SV ml", 12.0, true),
        ("EF %", 11.0, true),
        ("ED/ES", 11.0, true),
        ("Truth EF %", 18.0, true),
        ("ΔEF pp", 14.0, true),
    ];
    let header = |page: &mut Page, y: f32| {
        page.fill_rect(MARGIN, y, PAGE_W - 2.0 * MARGIN, ROW_H + 1.0, grey(0.88));
        let mut x = MARGIN + 1.0;
        for (name, w, right) in cols {
            if right {
                page.text_right(x + w - 1.0, y + 4.2, 7.5, Weight::Bold, name);
            } else {
                page.text(x, y + 4.2, 7.5, Weight::Bold, name);
            }
            x += w;
        }
        y + ROW_H + 1.0
    };
    y = header(&mut page, y);
    let mut failures = Vec::new();
    let notes = grouped_notes(&results.runs);
    for (i, r) in results.runs.iter().enumerate() {
        if y > PAGE_H - MARGIN - 20.0 {
            pages.push(page);
            page = Page::default();
            y = header(&mut page, MARGIN);
        }
        if i % 2 == 1 {
            page.fill_rect(MARGIN, y, PAGE_W - 2.0 * MARGIN, ROW_H, grey(0.96));
        }
        let n = r.numbers.as_ref();
        let t = r.truth.as_ref().map(|t| &t.numbers);
        let f1 = |v: Option<f64>| v.map(|v| format!("{v:.1}")).unwrap_or_else(|| "-".into());
        let cells = [
            r.subject.clone(),
            r.method.clone(),
            r.pattern.clone(),
            format!("{} / {:.2}", trim_num(r.accel_nominal), r.accel_effective),
            f1(n.map(|n| n.edv_ml)),
            f1(n.map(|n| n.esv_ml)),
            f1(n.map(|n| n.sv_ml)),
            f1(n.map(|n| n.ef_pct)),
            n.map(|n| format!("{}/{}", n.ed_frame, n.es_frame))
                .unwrap_or_else(|| "-".into()),
            f1(t.map(|t| t.ef_pct)),
            match (n, t) {
                (Some(n), Some(t)) => format!("{:+.1}", n.ef_pct - t.ef_pct),
                _ => "-".into(),
            },
        ];
        let mut x = MARGIN + 1.0;
        for ((_, w, right), cell) in cols.iter().zip(cells.iter()) {
            if *right {
                page.text_right(x + w - 1.0, y + 3.8, 7.5, Weight::Regular, cell);
            } else {
                page.text(x, y + 3.8, 7.5, Weight::Regular, cell);
            }
            x += w;
        }
        y += ROW_H;
        let label = format!(
            "{} {} {} R={}",
            r.subject,
            r.method,
            r.pattern,
            trim_num(r.accel_nominal)
        );
        match r.status {
            RunStatus::Failed => {
                failures.extend(r.messages.iter().map(|m| format!("{label}: {m}")))
            }
            RunStatus::Ok => {}
        }
    }
    y += 4.0;
    page.text(
        MARGIN,
        y,
        7.5,
        Weight::Regular,
        "Truth: method of discs on the analytic blood-pool areas of the synthetic phantom (shown only for synthetic subjects).",
    );
    y += 4.0;
    page.text(
        MARGIN,
        y,
        7.5,
        Weight::Regular,
        "ΔEF: EF of the run minus truth EF, in percentage points (pp).",
    );
    y += 6.0;
    for (title, list) in [
        ("Runs that failed", &failures),
        ("Where tracking stopped on purpose", &notes),
    ] {
        if list.is_empty() {
            continue;
        }
        if y > PAGE_H - MARGIN - 12.0 {
            pages.push(page);
            page = Page::default();
            y = MARGIN;
        }
        page.text(MARGIN, y, 10.0, Weight::Bold, title);
        y += 5.0;
        for m in list.iter() {
            for line in wrap(m, 7.5, TEXT_W) {
                if y > PAGE_H - MARGIN - 8.0 {
                    pages.push(page);
                    page = Page::default();
                    y = MARGIN;
                }
                page.text(MARGIN, y, 7.5, Weight::Regular, &line);
                y += 3.8;
            }
        }
        y += 3.0;
    }
    pages.push(page);
    if let Some((title, sections)) = extra {
        pages.extend(text_pages(title, sections));
    }
    pages.extend(provenance::provenance_pages(results));
    finish(doc, pages)
}

/// Headed sections of paragraphs, for [`text_document`] and extra report pages.
pub type Sections = [(String, Vec<String>)];

/// A plain text document (title, then headed sections of paragraphs) in the report's
/// fonts, page layout, footer and caution: for sheets handed to people, such as reader
/// instructions. Deterministic.
pub fn text_document(title: &str, sections: &Sections) -> Vec<u8> {
    let mut doc = PdfDocument::new(title);
    fonts::register(&mut doc);
    finish(doc, text_pages(title, sections))
}

/// The pages of a titled text with the caution box under the title.
fn text_pages(title: &str, sections: &Sections) -> Vec<Page> {
    let mut pages = vec![];
    let mut page = Page::default();
    let mut y = MARGIN + 4.0;
    page.text(MARGIN, y, 15.0, Weight::Bold, title);
    y += 8.0;
    y = caution_box(&mut page, y) + 6.0;
    for (heading, paragraphs) in sections {
        if y > PAGE_H - MARGIN - 25.0 {
            pages.push(std::mem::take(&mut page));
            y = MARGIN + 2.0;
        }
        page.text(MARGIN, y, 11.0, Weight::Bold, heading);
        y += 5.5;
        for para in paragraphs {
            for line in wrap(para, 9.5, TEXT_W) {
                if y > PAGE_H - MARGIN - 12.0 {
                    pages.push(std::mem::take(&mut page));
                    y = MARGIN + 2.0;
                }
                page.text(MARGIN, y, 9.5, Weight::Regular, &line);
                y += 4.6;
            }
            y += 2.0;
        }
        y += 3.0;
    }
    pages.push(page);
    pages
}

/// The PDF bytes of `pages`, each with the footer (caution and page number).
fn finish(mut doc: PdfDocument, pages: Vec<Page>) -> Vec<u8> {
    let total = pages.len();
    let pdf_pages: Vec<PdfPage> = pages
        .into_iter()
        .enumerate()
        .map(|(i, mut p)| {
            footer(&mut p, i + 1, total);
            PdfPage::new(Mm(PAGE_W), Mm(PAGE_H), p.ops)
        })
        .collect();
    let mut warnings = Vec::new();
    doc.with_pages(pdf_pages)
        .save(&PdfSaveOptions::default(), &mut warnings)
}

/// Writes the report atomically to `path`.
///
/// # Errors
/// [`IoError`] naming the file.
pub fn write(results: &ResultsFile, path: &Path, panels: Option<&Path>) -> Result<(), IoError> {
    write_atomic(path, &render(results, panels))
}

/// A compact grid of EF per subject and method (rows) and acceleration (columns), with the
/// fully sampled reference first; returns the new vertical position.
fn ef_grid(page: &mut Page, results: &ResultsFile, mut y: f32) -> f32 {
    let mut accels: Vec<f64> = results
        .runs
        .iter()
        .filter(|r| r.method != "reference")
        .map(|r| r.accel_nominal)
        .collect();
    accels.sort_by(f64::total_cmp);
    accels.dedup();
    let mut keys: Vec<(String, String)> = Vec::new();
    for r in results.runs.iter().filter(|r| r.method != "reference") {
        let k = (r.subject.clone(), format!("{} / {}", r.method, r.pattern));
        if !keys.contains(&k) {
            keys.push(k);
        }
    }
    if accels.is_empty() {
        return y;
    }
    page.text(
        MARGIN,
        y,
        11.0,
        Weight::Bold,
        "EF (%) by method and acceleration",
    );
    y += 3.0;
    let (w_subject, w_method, w_cell) = (16.0, 50.0, 18.0);
    page.fill_rect(MARGIN, y, PAGE_W - 2.0 * MARGIN, ROW_H + 1.0, grey(0.88));
    page.text(MARGIN + 1.0, y + 4.2, 8.0, Weight::Bold, "Subject");
    page.text(
        MARGIN + 1.0 + w_subject,
        y + 4.2,
        8.0,
        Weight::Bold,
        "Method / pattern",
    );
    let x0 = MARGIN + 1.0 + w_subject + w_method;
    page.text_right(x0 + w_cell - 1.0, y + 4.2, 8.0, Weight::Bold, "full");
    for (i, r) in accels.iter().enumerate() {
        page.text_right(
            x0 + (i as f32 + 2.0) * w_cell - 1.0,
            y + 4.2,
            8.0,
            Weight::Bold,
            &format!("R={}", trim_num(*r)),
        );
    }
    y += ROW_H + 1.0;
    for (n, (subject, label)) in keys.iter().enumerate() {
        if y > PAGE_H - MARGIN - 20.0 {
            break;
        }
        if n % 2 == 1 {
            page.fill_rect(MARGIN, y, PAGE_W - 2.0 * MARGIN, ROW_H, grey(0.96));
        }
        page.text(MARGIN + 1.0, y + 3.8, 8.0, Weight::Regular, subject);
        page.text(
            MARGIN + 1.0 + w_subject,
            y + 3.8,
            8.0,
            Weight::Regular,
            label,
        );
        let reference = results
            .runs
            .iter()
            .find(|r| &r.subject == subject && r.method == "reference");
        let ef = |r: Option<&crate::results::RunRow>| match r {
            Some(r) => r
                .numbers
                .as_ref()
                .map(|n| format!("{:.1}", n.ef_pct))
                .unwrap_or_else(|| "failed".into()),
            None => "-".into(),
        };
        page.text_right(
            x0 + w_cell - 1.0,
            y + 3.8,
            8.0,
            Weight::Regular,
            &ef(reference),
        );
        for (i, a) in accels.iter().enumerate() {
            let run = results.runs.iter().find(|r| {
                &r.subject == subject
                    && &format!("{} / {}", r.method, r.pattern) == label
                    && r.accel_nominal == *a
            });
            page.text_right(
                x0 + (i as f32 + 2.0) * w_cell - 1.0,
                y + 3.8,
                8.0,
                Weight::Regular,
                &ef(run),
            );
        }
        y += ROW_H;
    }
    y
}

/// The report's date (UTC): `SOURCE_DATE_EPOCH` when set, as reproducible builds do, so the
/// same results give the same bytes; otherwise today.
fn report_date() -> String {
    let secs = std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|v| v.trim().parse::<i64>().ok())
        .unwrap_or_else(|| {
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map_or(0, |d| d.as_secs() as i64)
        });
    date_of(secs)
}

/// `YYYY-MM-DD` (UTC) of a Unix time; the epoch itself when out of range.
pub fn date_of(secs: i64) -> String {
    let d = time::OffsetDateTime::from_unix_timestamp(secs)
        .unwrap_or(time::OffsetDateTime::UNIX_EPOCH)
        .date();
    format!("{:04}-{:02}-{:02}", d.year(), u8::from(d.month()), d.day())
}

fn caution_box(page: &mut Page, y: f32) -> f32 {
    let lines = wrap(CAUTION, 8.5, TEXT_W - 8.0);
    let h = 8.0 + 4.2 * lines.len() as f32;
    page.fill_rect(MARGIN, y, PAGE_W - 2.0 * MARGIN, h, rgb(1.0, 0.93, 0.80));
    page.fill_rect(MARGIN, y, 1.5, h, rgb(0.75, 0.35, 0.0));
    page.text(
        MARGIN + 4.0,
        y + 4.8,
        9.0,
        Weight::Bold,
        "Not for diagnostic use",
    );
    let mut yy = y + 9.0;
    for l in lines {
        page.text(MARGIN + 4.0, yy, 8.5, Weight::Regular, &l);
        yy += 4.2;
    }
    y + h
}

fn footer(page: &mut Page, n: usize, total: usize) {
    let y = PAGE_H - 8.0;
    page.line(
        (MARGIN, y - 4.0),
        (PAGE_W - MARGIN, y - 4.0),
        0.4,
        grey(0.6),
    );
    page.text(
        MARGIN,
        y,
        7.0,
        Weight::Regular,
        "Research use for protocol evaluation only; not for diagnostic use.",
    );
    let label = format!("page {n} of {total}");
    page.text(
        PAGE_W - MARGIN - fonts::width_mm(&label, 7.0, Weight::Regular),
        y,
        7.0,
        Weight::Regular,
        &label,
    );
}

/// Greedy word wrap at `width` characters.
/// Width of the text column between the margins, mm.
const TEXT_W: f32 = PAGE_W - 2.0 * MARGIN;

/// Breaks `text` into lines no wider than `max_mm` at `size_pt` in the regular face (measured
/// with the embedded font's advance widths, so no line runs past the margin).
fn wrap(text: &str, size_pt: f32, max_mm: f32) -> Vec<String> {
    let mut lines = vec![];
    let mut cur = String::new();
    for word in text.split_whitespace() {
        if !cur.is_empty()
            && fonts::width_mm(&format!("{cur} {word}"), size_pt, Weight::Regular) > max_mm
        {
            lines.push(std::mem::take(&mut cur));
        }
        if !cur.is_empty() {
            cur.push(' ');
        }
        cur.push_str(word);
    }
    if !cur.is_empty() {
        lines.push(cur);
    }
    lines
}

/// Notes of the measured runs, one line per subject and message, naming the runs that share
/// it (the same stop usually recurs in every reconstruction of a subject).
fn grouped_notes(runs: &[RunRow]) -> Vec<String> {
    let mut groups: Vec<(&str, &str, Vec<&RunRow>)> = Vec::new();
    for r in runs.iter().filter(|r| r.status == RunStatus::Ok) {
        for m in &r.messages {
            match groups
                .iter_mut()
                .find(|(s, msg, _)| *s == r.subject && *msg == m.as_str())
            {
                Some(g) => g.2.push(r),
                None => groups.push((&r.subject, m, vec![r])),
            }
        }
    }
    groups
        .into_iter()
        .map(|(subject, message, rs)| {
            let mut by_method: Vec<(String, Vec<String>)> = Vec::new();
            for r in rs {
                let key = format!("{} ({})", r.method, r.pattern);
                let accel = trim_num(r.accel_nominal);
                match by_method.iter_mut().find(|(k, _)| *k == key) {
                    Some((_, v)) => v.push(accel),
                    None => by_method.push((key, vec![accel])),
                }
            }
            let runs: Vec<String> = by_method
                .into_iter()
                .map(|(k, v)| format!("{k} R = {}", v.join(", ")))
                .collect();
            format!("{subject}, {message} — in {}", runs.join("; "))
        })
        .collect()
}

/// `2` for 2.0, `2.5` for 2.5.
fn trim_num(v: f64) -> String {
    if v.fract() == 0.0 {
        format!("{v:.0}")
    } else {
        format!("{v}")
    }
}

#[cfg(test)]
mod tests {
    /// Dates checked with Python's `datetime.fromtimestamp(s, timezone.utc)`: the epoch, a
    /// leap day, and the tests' SOURCE_DATE_EPOCH.
    #[test]
    fn unix_times_become_calendar_dates() {
        assert_eq!(super::date_of(0), "1970-01-01");
        assert_eq!(super::date_of(951_782_400), "2000-02-29");
        assert_eq!(super::date_of(1_764_633_600), "2025-12-02");
    }
}
