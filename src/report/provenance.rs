//! The last page: how these numbers were made — tool version, input hashes, segmentation
//! conventions, seeds, every method's parameters, and the published source of each formula
//! and test.

use super::canvas::{Page, Weight, PAGE_H};
use super::{trim_num, wrap, MARGIN, TEXT_W};
use crate::agreement::REFERENCE;
use crate::recon::REGISTRY;
use crate::results::{AcquisitionRecord, ResultsFile};

/// Published sources of the formulas and tests the report's numbers rest on.
const SOURCES: [&str; 12] = [
    "Volumes: method of discs, Σ area × centre-to-centre slice spacing (common practice in CMR volumetry).",
    "Limits of agreement: Bland JM, Altman DG. Lancet 1986;i:307–310; and Stat Methods Med Res 1999;8:135–160 (confidence intervals of the limits).",
    "Intraclass correlation: Shrout PE, Fleiss JL. Psychol Bull 1979;86:420–428; McGraw KO, Wong SP. Psychol Methods 1996;1:30–46 (notation, intervals).",
    "Concordance correlation: Lin LI-K. Biometrics 1989;45:255–268.",
    "Paired t-test (Student 1908); Wilcoxon signed-rank test (Wilcoxon 1945); equivalence by two one-sided tests: Schuirmann DJ. J Pharmacokinet Biopharm 1987;15:657–680.",
    "Sample size: Bland's approximate confidence interval of the limits of agreement (Bland & Altman 1986; 1999).",
    "SSIM: Wang Z, Bovik AC, Sheikh HR, Simoncelli EP. IEEE Trans Image Process 2004;13:600–612 (Gaussian window σ = 1.5, K1 = 0.01, K2 = 0.03).",
    "Dice LR. Ecology 1945;26:297–302 (overlap); Hausdorff distance, 95th percentile (common practice in segmentation studies).",
    "Region growing threshold: Otsu N. IEEE Trans Syst Man Cybern 1979;9:62–66 (initial level), then halfway between blood and wall (partial volume, common practice).",
    "Reconstruction methods: the sources listed with each method above. Coil compression: Buehrer M et al. Magn Reson Med 2007;57:1131–1139; Huang F et al. Magn Reson Imaging 2008;26:133–141. Coil sensitivities where a method uses them: Walsh DO et al. Magn Reson Med 2000;43:682–690, from the time-averaged calibration block.",
    "Distribution functions: the statrs crate (t, F, normal), checked against published tables and SciPy.",
    "Plot colours: Okabe M, Ito K. Color Universal Design (2008), colour-blind-safe palette.",
];

/// Sampling and coil processing of a run in words (a leading space, a closing full stop).
fn describe_acquisition(a: &AcquisitionRecord) -> String {
    let mut parts = Vec::new();
    if a.acs_lines > 0 {
        parts.push(format!("fully sampled centre {} lines", a.acs_lines));
    }
    if let Some(law) = a.density_law {
        parts.push(format!(
            "line density {} (d: distance from the centre, 0 to 1)",
            law.describe()
        ));
    }
    if let Some(shear) = a.kt_shear {
        parts.push(format!("lattice shear {shear} line(s) per frame"));
    }
    if let Some(seed) = a.rng_seed {
        parts.push(format!("--rng-seed {seed}"));
    }
    parts.push(match a.virtual_coils {
        Some(k) => format!(
            "{} coils compressed to {k} virtual coils (PCA of the calibration block)",
            a.coils
        ),
        None => format!("{} coils, not compressed", a.coils),
    });
    if a.prewhitened {
        parts.push("noise pre-whitened".into());
    }
    format!(" Sampling and coils: {}.", parts.join("; "))
}

/// Writes lines, breaking pages as needed.
fn lines(pages: &mut Vec<Page>, page: &mut Page, y: &mut f32, text: &str, size: f32, indent: f32) {
    for l in wrap(text, size, TEXT_W - indent) {
        if *y > PAGE_H - MARGIN - 10.0 {
            pages.push(std::mem::take(page));
            *y = MARGIN + 2.0;
        }
        page.text(MARGIN + indent, *y, size, Weight::Regular, &l);
        *y += size * 0.48;
    }
}

fn section(pages: &mut Vec<Page>, page: &mut Page, y: &mut f32, title: &str) {
    if *y > PAGE_H - MARGIN - 20.0 {
        pages.push(std::mem::take(page));
        *y = MARGIN + 2.0;
    }
    *y += 2.5;
    page.text(MARGIN, *y, 10.0, Weight::Bold, title);
    *y += 5.0;
}

/// The provenance pages.
pub fn provenance_pages(results: &ResultsFile) -> Vec<Page> {
    let mut pages = Vec::new();
    let mut page = Page::default();
    let mut y = MARGIN + 2.0;
    page.text(MARGIN, y, 13.0, Weight::Bold, "How these numbers were made");
    y += 6.0;
    let p = &mut pages;
    lines(
        p,
        &mut page,
        &mut y,
        &format!(
            "Tool: {} {}. Study: {}.",
            results.tool, results.version, results.study
        ),
        8.0,
        0.0,
    );
    section(p, &mut page, &mut y, "Inputs (SHA-256)");
    for i in &results.inputs {
        lines(
            p,
            &mut page,
            &mut y,
            &format!("{}: {}", i.label, i.sha256),
            7.5,
            3.0,
        );
    }
    section(
        p,
        &mut page,
        &mut y,
        "Segmentation, the same for every method",
    );
    if let Some(r) = results.runs.first() {
        lines(
            p,
            &mut page,
            &mut y,
            &format!("Blood pool: {}.", r.blood_pool_convention),
            7.5,
            3.0,
        );
        if !r.slice_rule.is_empty() {
            lines(
                p,
                &mut page,
                &mut y,
                &format!("Slices counted: {}.", r.slice_rule),
                7.5,
                3.0,
            );
        }
    }
    let mut seen: Vec<&str> = Vec::new();
    for r in results.runs.iter().filter(|r| r.method == REFERENCE) {
        if seen.contains(&r.subject.as_str()) || r.seeds.is_empty() {
            continue;
        }
        seen.push(&r.subject);
        let s: Vec<String> = r
            .seeds
            .iter()
            .map(|s| {
                format!(
                    "slice {} frame {} row {} col {}",
                    s.slice, s.frame, s.row, s.col
                )
            })
            .collect();
        lines(
            p,
            &mut page,
            &mut y,
            &format!("Seeds, {}: {}", r.subject, s.join("; ")),
            7.5,
            3.0,
        );
    }
    section(p, &mut page, &mut y, "Methods and their parameters");
    let mut done: Vec<(String, String)> = Vec::new();
    for r in &results.runs {
        let key = (r.method.clone(), r.pattern.clone());
        if done.contains(&key) {
            continue;
        }
        done.push(key);
        let rs: Vec<String> = results
            .runs
            .iter()
            .filter(|x| x.method == r.method && x.pattern == r.pattern)
            .map(|x| trim_num(x.accel_nominal))
            .fold(Vec::new(), |mut v, a| {
                if !v.contains(&a) {
                    v.push(a);
                }
                v
            });
        let params: Vec<String> = r
            .parameters
            .iter()
            .map(|(k, v)| format!("{k} = {}", trim_num(*v)))
            .collect();
        let acquisition = r
            .acquisition
            .as_ref()
            .map_or(String::new(), describe_acquisition);
        let description = REGISTRY
            .iter()
            .find(|m| m.id() == r.method)
            .map_or("reconstructed elsewhere", |m| m.description())
            .trim_end_matches('.');
        lines(
            p,
            &mut page,
            &mut y,
            &format!(
                "{} ({}, R = {}): {}.{}{}",
                r.method,
                r.pattern,
                rs.join(", "),
                description,
                acquisition,
                if params.is_empty() {
                    String::new()
                } else {
                    format!(" Parameters: {}.", params.join(", "))
                }
            ),
            7.5,
            3.0,
        );
    }
    if let Some(acc) = &results.acceptance {
        section(p, &mut page, &mut y, "Acceptance criteria");
        for c in &acc.criteria_text {
            lines(p, &mut page, &mut y, c, 7.5, 3.0);
        }
    }
    section(
        p,
        &mut page,
        &mut y,
        "Formulas and tests, with their sources",
    );
    for s in SOURCES {
        lines(p, &mut page, &mut y, s, 7.5, 3.0);
    }
    y += 3.0;
    lines(p, &mut page, &mut y, &results.caution, 8.0, 0.0);
    pages.push(page);
    pages
}
