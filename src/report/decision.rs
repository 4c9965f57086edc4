//! The first page's decision: the criteria declared before the study, the verdict of every
//! method at every acceleration against each of them, and the highest R that passes.

use super::canvas::{grey, rgb, Page, Weight, PAGE_W};
use super::{trim_num, wrap, MARGIN, ROW_H, TEXT_W};
use crate::acceptance::Outcome;
use crate::results::ResultsFile;

/// Draws the criteria, the verdict table and the highest passing R from `y`; returns the new
/// vertical position. Without verdicts (nothing compared), says so.
pub fn decision_summary(page: &mut Page, results: &ResultsFile, mut y: f32) -> f32 {
    page.text(MARGIN, y, 11.0, Weight::Bold, "Decision summary");
    y += 5.0;
    let Some(acc) = &results.acceptance else {
        page.text(
            MARGIN,
            y,
            8.5,
            Weight::Regular,
            "No accelerated method was compared with the reference, so there is no verdict.",
        );
        return y + 6.0;
    };
    page.text(
        MARGIN,
        y,
        8.5,
        Weight::Regular,
        "Acceptance criteria, declared before the study (differences are method minus reference):",
    );
    y += 4.3;
    for (i, c) in acc.criteria_text.iter().enumerate() {
        page.text(
            MARGIN + 3.0,
            y,
            8.5,
            Weight::Regular,
            &format!("C{}  {c}", i + 1),
        );
        y += 4.1;
    }
    y += 2.0;
    let k = acc.criteria.len();
    let fixed = [
        ("Method", 27.0),
        ("Pattern", 27.0),
        ("R nom/eff", 17.0),
        ("n", 7.0),
    ];
    let overall_w = 24.0;
    let used: f32 = fixed.iter().map(|c| c.1).sum::<f32>() + overall_w;
    let crit_w = ((PAGE_W - 2.0 * MARGIN - used) / k.max(1) as f32).clamp(11.0, 22.0);
    page.fill_rect(MARGIN, y, PAGE_W - 2.0 * MARGIN, ROW_H + 1.0, grey(0.88));
    let mut x = MARGIN + 1.0;
    for (name, w) in fixed {
        page.text(x, y + 4.2, 7.5, Weight::Bold, name);
        x += w;
    }
    for i in 0..k {
        page.text_right(
            x + crit_w - 1.5,
            y + 4.2,
            7.5,
            Weight::Bold,
            &format!("C{}", i + 1),
        );
        x += crit_w;
    }
    page.text(x + 1.0, y + 4.2, 7.5, Weight::Bold, "Overall");
    y += ROW_H + 1.0;
    for (i, v) in acc.verdicts.iter().enumerate() {
        if i % 2 == 1 {
            page.fill_rect(MARGIN, y, PAGE_W - 2.0 * MARGIN, ROW_H, grey(0.96));
        }
        let mut x = MARGIN + 1.0;
        let cells = [
            v.method.clone(),
            v.pattern.clone(),
            format!("{} / {:.2}", trim_num(v.accel_nominal), v.accel_effective),
            v.subjects.to_string(),
        ];
        for ((_, w), cell) in fixed.iter().zip(&cells) {
            page.text(x, y + 3.8, 7.5, Weight::Regular, cell);
            x += w;
        }
        for c in &v.checks {
            let value = c.value.map_or("–".to_string(), |v| format!("{v:.2}"));
            let (text, weight) = if c.pass {
                (value, Weight::Regular)
            } else {
                (format!("✗ {value}"), Weight::Bold)
            };
            page.text_right(x + crit_w - 1.5, y + 3.8, 7.5, weight, &text);
            x += crit_w;
        }
        let (label, fill) = match v.outcome {
            Outcome::Pass => ("pass", rgb(0.80, 0.90, 0.97)),
            Outcome::Fail => ("FAIL", rgb(0.99, 0.86, 0.70)),
            Outcome::TooFewSubjects => ("too few", grey(0.9)),
        };
        page.fill_rect(x, y + 0.4, overall_w - 2.0, ROW_H - 0.8, fill);
        page.text(x + 1.5, y + 3.8, 7.5, Weight::Bold, label);
        y += ROW_H;
    }
    y += 2.5;
    let notes = [
        "Cells give each criterion's value (|bias| or the larger |limit| in the criterion's unit; ICC as is); ✗ marks a miss.",
        "A method that could not be measured on a subject fails at that R. n: subjects with both runs measured.",
    ];
    for n in notes {
        for line in wrap(n, 7.0, TEXT_W) {
            page.text(MARGIN, y, 7.0, Weight::Regular, &line);
            y += 3.5;
        }
    }
    y += 2.5;
    page.text(
        MARGIN,
        y,
        9.5,
        Weight::Bold,
        "Highest acceleration that passes",
    );
    y += 4.6;
    for h in &acc.highest_passing {
        let text = match h.accel_nominal {
            Some(r) => format!(
                "{} ({}): R = {} (every lower R tested passes too)",
                h.method,
                h.pattern,
                trim_num(r)
            ),
            None => format!(
                "{} ({}): none — the lowest R tested does not pass",
                h.method, h.pattern
            ),
        };
        page.text(MARGIN + 3.0, y, 8.5, Weight::Regular, &text);
        y += 4.1;
    }
    for v in acc
        .verdicts
        .iter()
        .filter(|v| !v.failed_subjects.is_empty())
    {
        let line = format!(
            "{} ({}) at R = {} could not be measured on {}.",
            v.method,
            v.pattern,
            trim_num(v.accel_nominal),
            v.failed_subjects.join(", ")
        );
        for l in wrap(&line, 7.0, TEXT_W) {
            page.text(MARGIN, y, 7.0, Weight::Regular, &l);
            y += 3.5;
        }
    }
    y
}
