//! The report's figure pages: how the agreement moves with acceleration, Bland–Altman plots,
//! volume–time curves, and the image-quality and temporal-fidelity table.

use super::canvas::{grey, Page, Weight, PAGE_H, PAGE_W};
use super::plot::{self, marker, Axes};
use super::{trim_num, MARGIN, ROW_H};
use crate::acceptance::Measure;
use crate::agreement::{self, AgreementRow, REFERENCE};
use crate::results::{ResultsFile, RunRow};

/// A figure page's title and its explanation; returns the vertical position below them.
fn heading(page: &mut Page, title: &str, blurb: &str) -> f32 {
    let mut y = MARGIN + 2.0;
    page.text(MARGIN, y, 13.0, Weight::Bold, title);
    y += 5.5;
    for line in super::wrap(blurb, 7.5, super::TEXT_W) {
        page.text(MARGIN, y, 7.5, Weight::Regular, &line);
        y += 3.6;
    }
    y
}

/// Methods (method, pattern) in order of first appearance, the reference left out.
fn methods(results: &ResultsFile) -> Vec<(String, String)> {
    let mut out: Vec<(String, String)> = Vec::new();
    for r in results.runs.iter().filter(|r| r.method != REFERENCE) {
        let key = (r.method.clone(), r.pattern.clone());
        if !out.contains(&key) {
            out.push(key);
        }
    }
    out
}

/// Nominal accelerations tested, ascending.
fn accels(results: &ResultsFile) -> Vec<f64> {
    let mut v: Vec<f64> = results
        .runs
        .iter()
        .filter(|r| r.method != REFERENCE)
        .map(|r| r.accel_nominal)
        .collect();
    v.sort_by(f64::total_cmp);
    v.dedup();
    v
}

/// A legend row: a line sample, a marker and the name per method.
fn legend(page: &mut Page, mut y: f32, names: &[(String, String)]) -> f32 {
    let mut x = MARGIN;
    for (i, (m, p)) in names.iter().enumerate() {
        let s = plot::style(i);
        let text = format!("{m} ({p})");
        let w = super::fonts::width_mm(&text, 7.5, Weight::Regular) + 16.0;
        if x + w > PAGE_W - MARGIN {
            x = MARGIN;
            y += 4.5;
        }
        page.polyline(
            &[(x, y - 1.2), (x + 8.0, y - 1.2)],
            1.2,
            plot::colour(&s),
            s.dash,
        );
        marker(page, (x + 4.0, y - 1.2), s.marker, 1.8, plot::colour(&s));
        page.text(x + 10.0, y, 7.5, Weight::Regular, &text);
        x += w;
    }
    y + 5.0
}

/// Margin of a criterion on (quantity, unit, measure), if declared.
fn margin(results: &ResultsFile, quantity: &str, unit: &str, m: Measure) -> Option<f64> {
    results.acceptance.as_ref()?.criteria.iter().find_map(|c| {
        (c.quantity == quantity && c.unit == unit && c.measure == m).then_some(c.limit)
    })
}

/// Page: bias and 95 % limits of EF, EDV and ESV against acceleration, per method.
pub fn accel_page(results: &ResultsFile) -> Option<Page> {
    let names = methods(results);
    let rs = accels(results);
    // Nothing to draw without a single measured agreement (the decision page says why).
    if !results.agreement.iter().any(|r| r.bias.is_some()) {
        return None;
    }
    if names.is_empty() || rs.is_empty() {
        return None;
    }
    let mut page = Page::default();
    let mut y = heading(
        &mut page,
        "How the numbers move with acceleration",
        "Each method's mean change from the reference across subjects (line and markers) with its 95 % limits of agreement (shaded band, thin edges); grey dashed lines: the declared margin for the limits, grey dotted: the margin for the bias. Missing points: fewer than 3 subjects measured.",
    );
    y += 1.5;
    y = legend(&mut page, y + 2.0, &names);
    let xt: Vec<(f64, String)> = rs
        .iter()
        .enumerate()
        .map(|(i, r)| (i as f64, format!("R = {}", trim_num(*r))))
        .collect();
    let panels = [
        ("ef_pct", "pp", "EF change (pp)"),
        ("edv_ml", "pct", "EDV change (% of the pair's mean)"),
        ("esv_ml", "pct", "ESV change (% of the pair's mean)"),
    ];
    let h = (PAGE_H - y - MARGIN - 3.0 * 14.0) / 3.0;
    for (q, unit, title) in panels {
        let rows: Vec<&AgreementRow> = results
            .agreement
            .iter()
            .filter(|r| r.quantity == q && r.unit == unit)
            .collect();
        let lim = margin(results, q, unit, Measure::LimitsWithin);
        let bias_lim = margin(results, q, unit, Measure::AbsBias);
        let mut span = rows
            .iter()
            .flat_map(|r| [r.loa_lower, r.loa_upper, r.bias])
            .flatten()
            .chain(lim.into_iter().flat_map(|l| [l, -l]))
            .chain(bias_lim.into_iter().flat_map(|l| [l, -l]))
            .fold(1.0f64, |m, v| m.max(v.abs()));
        span *= 1.1;
        let ax = Axes {
            x: MARGIN + 12.0,
            y: y + 4.0,
            w: PAGE_W - 2.0 * MARGIN - 14.0,
            h,
            xr: (-0.5, rs.len() as f64 - 0.5),
            yr: (-span, span),
        };
        ax.draw(&mut page, Some(&xt), "acceleration (nominal)", title, 7.0);
        ax.hline(&mut page, 0.0, grey(0.0), &[], 0.6);
        for l in lim.into_iter().flat_map(|l| [l, -l]) {
            ax.hline(&mut page, l, grey(0.45), &[3.0, 2.0], 0.8);
        }
        for l in bias_lim.into_iter().flat_map(|l| [l, -l]) {
            ax.hline(&mut page, l, grey(0.45), &[0.8, 1.5], 0.8);
        }
        let n = names.len() as f64;
        let dodge = |i: usize| (i as f64 - (n - 1.0) / 2.0) * 0.06;
        let series = |i: usize, (m, p): &(String, String)| -> Vec<(f64, &AgreementRow)> {
            rs.iter()
                .enumerate()
                .filter_map(|(k, r)| {
                    rows.iter()
                        .find(|x| &x.method == m && &x.pattern == p && x.accel_nominal == *r)
                        .filter(|x| x.bias.is_some())
                        .map(|x| (k as f64 + dodge(i), *x))
                })
                .collect()
        };
        // Bands first, so that every line stays visible over them.
        for (i, name) in names.iter().enumerate() {
            let s = plot::style(i);
            let pts = series(i, name);
            if pts.len() >= 2 {
                let mut poly: Vec<(f32, f32)> = pts
                    .iter()
                    .map(|(x, r)| ax.at(*x, r.loa_upper.unwrap_or(0.0)))
                    .collect();
                poly.extend(
                    pts.iter()
                        .rev()
                        .map(|(x, r)| ax.at(*x, r.loa_lower.unwrap_or(0.0))),
                );
                page.fill_polygon(&poly, plot::tint(&s));
            }
        }
        for (i, name) in names.iter().enumerate() {
            let s = plot::style(i);
            let pts = series(i, name);
            for edge in [
                |r: &AgreementRow| r.loa_upper,
                |r: &AgreementRow| r.loa_lower,
            ] {
                let line: Vec<(f32, f32)> = pts
                    .iter()
                    .filter_map(|(x, r)| edge(r).map(|v| ax.at(*x, v)))
                    .collect();
                page.polyline(&line, 0.4, plot::colour(&s), s.dash);
            }
            let line: Vec<(f32, f32)> = pts
                .iter()
                .map(|(x, r)| ax.at(*x, r.bias.unwrap_or(0.0)))
                .collect();
            page.polyline(&line, 1.3, plot::colour(&s), s.dash);
            for p in &line {
                marker(&mut page, *p, s.marker, 2.0, plot::colour(&s));
            }
            for (x, r) in &pts {
                // Whiskers show a single R's limits where no band can be drawn.
                if pts.len() == 1 {
                    let (a, b) = (r.loa_lower.unwrap_or(0.0), r.loa_upper.unwrap_or(0.0));
                    page.polyline(&[ax.at(*x, a), ax.at(*x, b)], 0.6, plot::colour(&s), &[]);
                }
            }
        }
        y += h + 14.0;
    }
    Some(page)
}

/// Which quantity a Bland–Altman grid shows.
#[derive(Debug, Clone, Copy)]
pub struct BaQuantity {
    /// Quantity key.
    pub quantity: &'static str,
    /// Unit of the agreement rows used (`pp`, or `pct` for percentage differences).
    pub unit: &'static str,
    /// Display name.
    pub name: &'static str,
    /// Unit of the measurement itself (x axis).
    pub value_unit: &'static str,
}

/// EF in pp, EDV and ESV as percentages of the pair's mean.
pub const BA_QUANTITIES: [BaQuantity; 3] = [
    BaQuantity {
        quantity: "ef_pct",
        unit: "pp",
        name: "EF",
        value_unit: "%",
    },
    BaQuantity {
        quantity: "edv_ml",
        unit: "pct",
        name: "EDV",
        value_unit: "ml",
    },
    BaQuantity {
        quantity: "esv_ml",
        unit: "pct",
        name: "ESV",
        value_unit: "ml",
    },
];

/// Pairs (mean, difference) of one quantity for one method and R against the same subjects'
/// reference; differences in percent of the pair's mean for `pct`.
fn pairs(runs: &[RunRow], q: BaQuantity, method: &str, pattern: &str, r: f64) -> Vec<(f64, f64)> {
    runs.iter()
        .filter(|x| x.method == method && x.pattern == pattern && x.accel_nominal == r)
        .filter_map(|x| {
            let m = agreement::value(x.numbers.as_ref()?, q.quantity);
            let reference = runs
                .iter()
                .find(|y| y.subject == x.subject && y.method == REFERENCE)?
                .numbers
                .as_ref()
                .map(|n| agreement::value(n, q.quantity))?;
            let mean = 0.5 * (m + reference);
            let d = if q.unit == "pct" {
                100.0 * (m - reference) / mean
            } else {
                m - reference
            };
            (mean != 0.0 || q.unit != "pct").then_some((mean, d))
        })
        .collect()
}

/// Pages: Bland–Altman plots of one quantity, one small panel per method (rows) and R
/// (columns).
pub fn bland_altman_pages(results: &ResultsFile, q: BaQuantity) -> Vec<Page> {
    let names = methods(results);
    let rs = accels(results);
    if names.is_empty() || rs.is_empty() {
        return Vec::new();
    }
    let all: Vec<(f64, f64)> = names
        .iter()
        .flat_map(|(m, p)| {
            rs.iter()
                .flat_map(move |r| pairs(&results.runs, q, m, p, *r))
        })
        .collect();
    // The margin drawn: the limits' margin where declared, else the bias margin.
    let (lim, lim_dash): (Option<f64>, &'static [f32]) =
        match margin(results, q.quantity, q.unit, Measure::LimitsWithin) {
            Some(l) => (Some(l), &[3.0, 2.0]),
            None => (
                margin(results, q.quantity, q.unit, Measure::AbsBias),
                &[0.8, 1.5],
            ),
        };
    let (xlo, xhi) = all.iter().fold((f64::MAX, f64::MIN), |(l, h), (m, _)| {
        (l.min(*m), h.max(*m))
    });
    let (xlo, xhi) = if xlo < xhi {
        let pad = 0.08 * (xhi - xlo);
        (xlo - pad, xhi + pad)
    } else if xlo == xhi {
        (xlo - 5.0, xlo + 5.0)
    } else {
        (0.0, 100.0)
    };
    let mut span = all.iter().fold(1.0f64, |s, (_, d)| s.max(d.abs()));
    if let Some(l) = lim {
        span = span.max(l);
    }
    span *= 1.15;
    let cols = rs.len().min(3);
    let pw = (PAGE_W - 2.0 * MARGIN - 14.0 * cols as f32) / cols as f32;
    let ph = 38.0;
    let diff_unit = if q.unit == "pct" {
        "% of the pair's mean"
    } else {
        "pp"
    };
    let mut pages = Vec::new();
    let mut page = Page::default();
    let title = |page: &mut Page| {
        heading(
            page,
            &format!("{} agreement per method and acceleration (Bland–Altman)", q.name),
            &format!(
                "Each point is one subject: x = mean of the method's and the reference's {n} ({vu}), y = method minus reference ({diff_unit}). Solid line: bias; dashed: 95 % limits of agreement (bias ± 1.96 SD); grey: the declared margin (dashed for the limits, dotted for the bias).",
                n = q.name,
                vu = q.value_unit
            ),
        ) + 4.0
    };
    let mut y = title(&mut page);
    for (i, (m, p)) in names.iter().enumerate() {
        for (k, r) in rs.iter().enumerate() {
            let col = k % cols;
            if col == 0 && k > 0 {
                y += ph + 16.0;
            }
            if col == 0 && y + ph + 14.0 > PAGE_H - MARGIN {
                pages.push(std::mem::take(&mut page));
                y = title(&mut page);
            }
            let ax = Axes {
                x: MARGIN + 12.0 + col as f32 * (pw + 14.0),
                y: y + 4.0,
                w: pw,
                h: ph,
                xr: (xlo, xhi),
                yr: (-span, span),
            };
            let s = plot::style(i);
            ax.draw(
                &mut page,
                None,
                &format!("mean {} ({})", q.name, q.value_unit),
                &format!("{m}, R = {}", trim_num(*r)),
                6.5,
            );
            ax.hline(&mut page, 0.0, grey(0.6), &[], 0.4);
            if let Some(l) = lim {
                ax.hline(&mut page, l, grey(0.45), lim_dash, 0.7);
                ax.hline(&mut page, -l, grey(0.45), lim_dash, 0.7);
            }
            let row = results.agreement.iter().find(|x| {
                &x.method == m
                    && &x.pattern == p
                    && x.accel_nominal == *r
                    && x.quantity == q.quantity
                    && x.unit == q.unit
            });
            match row.and_then(|x| x.bias.map(|b| (b, x.loa_lower, x.loa_upper))) {
                Some((b, lo, hi)) => {
                    ax.hline(&mut page, b, plot::colour(&s), &[], 1.0);
                    for v in [lo, hi].into_iter().flatten() {
                        ax.hline(&mut page, v, plot::colour(&s), &[2.0, 1.5], 0.7);
                    }
                }
                None => page.text(
                    ax.x + 2.0,
                    ax.y + 5.0,
                    6.5,
                    Weight::Regular,
                    "fewer than 3 subjects measured",
                ),
            }
            for pt in pairs(&results.runs, q, m, p, *r) {
                marker(
                    &mut page,
                    ax.at(pt.0, pt.1.clamp(-span, span)),
                    s.marker,
                    1.8,
                    plot::colour(&s),
                );
            }
        }
        y += ph + 16.0;
    }
    pages.push(page);
    pages
}

/// Page: image quality, mask overlap and temporal fidelity per method and R.
pub fn fidelity_page(results: &ResultsFile) -> Option<Page> {
    let acc = results.acceptance.as_ref()?;
    let mut page = Page::default();
    let mut y = heading(
        &mut page,
        "Image quality and temporal fidelity against the reference",
        "Means over subjects. NRMSE = ‖method − reference‖ / ‖reference‖ over the whole stack; PSNR in dB with the reference's range; SSIM (Wang et al. 2004, 11 × 11 Gaussian window, σ = 1.5) over every image and within 5 px of the reference's LV; Dice of the LV masks, mean over frames; HD95: 95th-percentile Hausdorff distance of the LV outlines at ED / ES (mm); curve: RMS error of the volume–time curve (ml); PER, PFR: change of peak ejection and filling rate (% of the reference's).",
    );
    y += 3.0;
    let cols: [(&str, f32); 12] = [
        ("Method", 25.0),
        ("R", 8.0),
        ("NRMSE", 13.0),
        ("PSNR", 12.0),
        ("SSIM", 11.0),
        ("SSIM LV", 14.0),
        ("Dice", 11.0),
        ("HD95 ED", 16.0),
        ("HD95 ES", 16.0),
        ("curve ml", 14.0),
        ("ΔPER %", 14.0),
        ("ΔPFR %", 14.0),
    ];
    page.fill_rect(MARGIN, y, PAGE_W - 2.0 * MARGIN, ROW_H + 1.0, grey(0.88));
    let mut x = MARGIN + 1.0;
    for (i, (name, w)) in cols.iter().enumerate() {
        if i < 2 {
            page.text(x, y + 4.2, 7.5, Weight::Bold, name);
        } else {
            page.text_right(x + w - 1.0, y + 4.2, 7.5, Weight::Bold, name);
        }
        x += w;
    }
    y += ROW_H + 1.0;
    let f = |v: Option<f64>, d: usize| v.map_or("–".to_string(), |v| format!("{v:.d$}"));
    for (i, v) in acc.verdicts.iter().enumerate() {
        if i % 2 == 1 {
            page.fill_rect(MARGIN, y, PAGE_W - 2.0 * MARGIN, ROW_H, grey(0.96));
        }
        let fi = v.fidelity.as_ref();
        let t = v.temporal.as_ref();
        let cells = [
            v.method.clone(),
            trim_num(v.accel_nominal),
            f(fi.and_then(|x| x.nrmse), 3),
            f(fi.and_then(|x| x.psnr_db), 1),
            f(fi.map(|x| x.ssim), 3),
            f(fi.and_then(|x| x.ssim_lv), 3),
            f(fi.and_then(|x| x.dice_mean), 3),
            f(fi.and_then(|x| x.hd95_ed_mm), 1),
            f(fi.and_then(|x| x.hd95_es_mm), 1),
            f(t.map(|x| x.curve_rms_ml), 1),
            f(t.and_then(|x| x.peak_ejection_rate_change_pct), 1),
            f(t.and_then(|x| x.peak_filling_rate_change_pct), 1),
        ];
        let mut x = MARGIN + 1.0;
        for (k, ((_, w), c)) in cols.iter().zip(&cells).enumerate() {
            if k < 2 {
                page.text(x, y + 3.8, 7.5, Weight::Regular, c);
            } else {
                page.text_right(x + w - 1.0, y + 3.8, 7.5, Weight::Regular, c);
            }
            x += w;
        }
        y += ROW_H;
    }
    Some(page)
}

/// Pages: volume–time curves per subject, the reference and each method at the highest R
/// tested, with the reference's ED and ES frames marked.
pub fn curve_pages(results: &ResultsFile) -> Vec<Page> {
    let names = methods(results);
    let Some(top) = accels(results).last().copied() else {
        return Vec::new();
    };
    let mut subjects: Vec<&str> = Vec::new();
    for r in &results.runs {
        if !subjects.contains(&r.subject.as_str()) {
            subjects.push(&r.subject);
        }
    }
    let mut pages = Vec::new();
    let mut page = Page::default();
    let mut y = MARGIN + 2.0;
    let h = 62.0;
    let header = |page: &mut Page, y: &mut f32| {
        page.text(
            MARGIN,
            *y,
            13.0,
            Weight::Bold,
            &format!(
                "Volume through the cycle, each method at R = {}",
                trim_num(top)
            ),
        );
        *y += 5.5;
        page.text(MARGIN, *y, 7.5, Weight::Regular, "Black: the fully sampled reference, with its end-diastolic (ED) and end-systolic (ES) frames marked; methods as in the legend.");
        *y += 4.0;
        *y = legend(page, *y + 2.0, &names);
    };
    header(&mut page, &mut y);
    for subject in subjects {
        let of = |m: &str, p: Option<&str>, r: f64| {
            results.runs.iter().find(|x| {
                x.subject == subject
                    && x.method == m
                    && p.is_none_or(|p| x.pattern == p)
                    && x.accel_nominal == r
            })
        };
        let Some(reference) = of(REFERENCE, None, 1.0).and_then(|r| r.numbers.as_ref()) else {
            continue;
        };
        if y + h + 16.0 > PAGE_H - MARGIN {
            pages.push(std::mem::take(&mut page));
            y = MARGIN + 2.0;
            header(&mut page, &mut y);
        }
        let curves: Vec<(usize, Option<&Vec<f64>>)> = names
            .iter()
            .enumerate()
            .map(|(i, (m, p))| {
                (
                    i,
                    of(m, Some(p), top)
                        .and_then(|r| r.numbers.as_ref())
                        .map(|n| &n.volume_curve_ml),
                )
            })
            .collect();
        let all = curves
            .iter()
            .filter_map(|c| c.1)
            .chain(std::iter::once(&reference.volume_curve_ml))
            .flatten();
        let (lo, hi) = all.fold((f64::MAX, f64::MIN), |(l, h), v| (l.min(*v), h.max(*v)));
        let pad = ((hi - lo) * 0.08).max(1.0);
        let nf = reference.volume_curve_ml.len();
        let ax = Axes {
            x: MARGIN + 12.0,
            y: y + 4.0,
            w: PAGE_W - 2.0 * MARGIN - 14.0,
            h,
            xr: (0.0, (nf.max(2) - 1) as f64),
            yr: (lo - pad, hi + pad),
        };
        ax.draw(
            &mut page,
            None,
            "frame",
            &format!("{subject}: LV volume (ml)"),
            7.0,
        );
        for (f, label) in [(reference.ed_frame, "ED"), (reference.es_frame, "ES")] {
            let (px, _) = ax.at(f as f64, lo);
            page.polyline(
                &[(px, ax.y), (px, ax.y + ax.h)],
                0.6,
                grey(0.35),
                &[1.0, 1.5],
            );
            page.text(px + 0.8, ax.y + 3.0, 7.0, Weight::Bold, label);
        }
        let line = |v: &Vec<f64>| -> Vec<(f32, f32)> {
            v.iter()
                .enumerate()
                .map(|(f, x)| ax.at(f as f64, *x))
                .collect()
        };
        page.polyline(&line(&reference.volume_curve_ml), 1.6, grey(0.0), &[]);
        let mut missing = Vec::new();
        for (i, c) in curves {
            let s = plot::style(i);
            match c {
                Some(v) => {
                    let pts = line(v);
                    page.polyline(&pts, 1.0, plot::colour(&s), s.dash);
                    for p in pts.iter().step_by(3) {
                        marker(&mut page, *p, s.marker, 1.6, plot::colour(&s));
                    }
                }
                None => missing.push(names[i].0.clone()),
            }
        }
        y += h + 14.0;
        if !missing.is_empty() {
            page.text(
                MARGIN,
                y,
                7.0,
                Weight::Regular,
                &format!("not measured at this R: {}", missing.join(", ")),
            );
            y += 5.0;
        }
    }
    pages.push(page);
    pages
}
