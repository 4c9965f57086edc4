//! `cinegauge measure`: segment and measure one image series.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use super::progress::say;
use cinegauge::io;
use cinegauge::pipeline;
use cinegauge::recon::ReconPlan;
use cinegauge::results::{InputHash, ResultsFile};
use cinegauge::seed_jitter;
use cinegauge::segment::{seeds, BloodPoolConvention, SegmentParams};

/// Arguments of `measure`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  cinegauge measure --images sim/reference --seeds sim/seeds.toml --out sim/measured\n\n\
The images are a DICOM folder (searched recursively; --series picks one of several), a NIfTI-1 \
file (.nii, .nii.gz; axes col, row, slice, frame) or a folder holding one, or a folder with one \
.npy [slice, frame, row, col] and its geometry.json. Writes \
DIR/measurements.json, DIR/measurements.csv, DIR/lv_masks.nii.gz (the LV masks, 1 inside the \
blood pool) and DIR/ed_es.png (the seed's slice at ED and ES with the contour). Research use only; not for diagnostic use."
)]
pub struct MeasureArgs {
    /// DICOM folder, NIfTI-1 file, or image folder (one .nii/.nii.gz, or one .npy + geometry.json).
    #[arg(long, value_name = "PATH")]
    pub images: PathBuf,
    /// DICOM folder with several series: the one to measure (SeriesInstanceUID or
    /// SeriesDescription).
    #[arg(long, value_name = "UID-OR-DESCRIPTION")]
    pub series: Option<String>,
    /// Seeds file: [[seed]] tables with zero-based slice, frame, row, col.
    #[arg(long, value_name = "FILE")]
    pub seeds: PathBuf,
    /// Output folder (created if needed).
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Subject code written into the results.
    #[arg(long, default_value = "subject")]
    pub subject: String,
    /// Method label written into the results (e.g. `reference`, `external:my-net`).
    #[arg(long, default_value = "reference")]
    pub method: String,
    /// Sampling pattern label written into the results.
    #[arg(long, default_value = "full")]
    pub pattern: String,
    /// Nominal acceleration written into the results.
    #[arg(long, value_name = "R", default_value_t = 1.0)]
    pub accel: f64,
    /// Effective acceleration (all lines ÷ acquired lines), when known; defaults to --accel.
    #[arg(long, value_name = "R")]
    pub accel_effective: Option<f64>,
    /// Print the measurements as JSON on stdout.
    #[arg(long)]
    pub json: bool,
    /// Papillary muscles and trabeculae: counted in the blood pool (`in-pool`, the default)
    /// or left out (`excluded`); both are accepted practice and every output says which.
    #[arg(long, value_name = "RULE", default_value = "in-pool", value_parser = ["in-pool", "excluded"])]
    pub papillary_muscles: String,
    /// Also segment with every seed moved by N pixels in 8 directions and report the spread
    /// of EDV, ESV and EF (`seed_jitter` in measurements.json): the measurement's own
    /// repeatability floor. 0 skips it.
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub seed_jitter_px: usize,
    /// Also write DIR/overlays/slice_NN.png for every slice: ED and ES with the LV contour,
    /// one window/level for all of them.
    #[arg(long)]
    pub overlays: bool,
}

pub fn run(a: MeasureArgs, quiet: bool) -> anyhow::Result<()> {
    if let Some(label) = a.method.strip_prefix("external:") {
        anyhow::ensure!(
            !label.is_empty() && label.chars().all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c)),
            "--method external:<label>: the label may hold letters, digits, '-', '_' and '.', found `{label}`"
        );
    } else {
        cinegauge::recon::by_id(&a.method)
            .context("--method: a registered method or external:<label>")?;
    }
    cinegauge::sampling::Pattern::from_id(&a.pattern).context("--pattern")?;
    for (name, r) in [
        ("--accel", Some(a.accel)),
        ("--accel-effective", a.accel_effective),
    ] {
        if let Some(r) = r {
            anyhow::ensure!(
                r.is_finite() && r >= 1.0,
                "{name}: expected a number ≥ 1, found {r}"
            );
        }
    }
    let series =
        io::read_images(&a.images, a.series.as_deref()).context("reading the image series")?;
    for k in &series.unknown_keys {
        say(
            quiet,
            &format!("warning: geometry.json: unknown key `{k}` ignored"),
        );
    }
    for w in &series.warnings {
        say(quiet, &format!("warning: {}: {w}", series.path.display()));
    }
    let seed_file = seeds::read_seed_file(&a.seeds).context("reading seeds")?;
    let seed_list = seed_file.seed;
    let mut params = SegmentParams::default();
    if a.papillary_muscles == "excluded" {
        params.grow.convention = BloodPoolConvention::PapillaryExcluded;
    }
    let (seg, vol) = pipeline::measure_series_limited(
        series.images.view(),
        &series.geometry,
        &seed_list,
        &seed_file.slice_ranges,
        &params,
    )
    .with_context(|| format!("measuring {}", series.path.display()))?;
    let plan = ReconPlan {
        method: a.method.clone(),
        pattern: a.pattern.clone(),
        accel_nominal: a.accel,
        accel_effective: a.accel_effective.unwrap_or(a.accel),
    };
    io::ensure_dir(&a.out).context("preparing the output folder")?;
    write_pictures(&a.out, &series, &seg, &vol, seed_list[0].slice, a.overlays)?;
    let jitter = (a.seed_jitter_px > 0).then(|| {
        seed_jitter::seed_jitter(
            series.images.view(),
            &series.geometry,
            &seed_list,
            &seed_file.slice_ranges,
            &params,
            a.seed_jitter_px,
            &vol.numbers,
        )
    });
    let mut row = pipeline::result_row(&a.subject, &plan, Ok((seg, vol)), &params, None);
    row.seed_jitter = jitter;
    row.seeds = seed_list.clone();
    let inputs = vec![
        InputHash {
            label: "images".into(),
            sha256: io::sha256_files(&series.files)?,
        },
        InputHash {
            label: "seeds".into(),
            sha256: io::sha256_file(&a.seeds)?,
        },
    ];
    let mut file = ResultsFile::new(&a.subject, inputs, vec![row]);
    file.normal_ranges = Some(cinegauge::normals::adult_lv());
    file.write(&a.out, "measurements")
        .context("writing measurements")?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&file)?);
    }
    if let Some(j) = &file.runs[0].seed_jitter {
        let change = |s: &Option<seed_jitter::Spread>| {
            s.as_ref()
                .map(|s| format!("{:.2}", s.max_change))
                .unwrap_or_else(|| "–".into())
        };
        say(
            quiet,
            &format!(
                "seeds moved by {} px ({} of {} runs measured): largest change EDV {} ml, ESV {} ml, EF {} pp",
                j.jitter_px,
                j.runs_ok,
                j.offsets_px.len(),
                change(&j.edv_ml),
                change(&j.esv_ml),
                change(&j.ef_pct)
            ),
        );
        for f in &j.failed {
            say(quiet, &format!("warning: seed jitter: {f}"));
        }
    }
    if let Some(n) = &file.runs[0].numbers {
        say(
            quiet,
            &format!(
                "EDV {:.1} ml  ESV {:.1} ml  SV {:.1} ml  EF {:.1} %  (ED frame {}, ES frame {})\n\
             Research use only; not for diagnostic use.",
                n.edv_ml, n.esv_ml, n.sv_ml, n.ef_pct, n.ed_frame, n.es_frame
            ),
        );
        let row = &file.runs[0];
        say(
            quiet,
            &format!("{}; {}", row.blood_pool_convention, row.slice_rule),
        );
        if let Some(r) = &file.normal_ranges {
            let band = |q: &str, sex: &str| {
                r.ranges
                    .iter()
                    .find(|x| x.quantity == q && x.sex == sex)
                    .map(|x| format!("{:.0}–{:.0}", x.lower, x.upper))
                    .unwrap_or_default()
            };
            say(
                quiet,
                &format!(
                    "for context only, published adult normal ranges (mean ± 2 SD; {}): EDV men {} ml, women {} ml; EF {} %",
                    r.source_convention,
                    band("edv_ml", "male"),
                    band("edv_ml", "female"),
                    band("ef_pct", "male")
                ),
            );
        }
    }
    Ok(())
}

/// `lv_masks.nii.gz` (1 inside the blood pool) and `ed_es.png` (the seed's slice at ED and
/// ES with the contour; window 0 to the 99.5th percentile of that slice).
fn write_pictures(
    out: &std::path::Path,
    series: &io::npy::ImageSeries,
    seg: &cinegauge::segment::Segmentation,
    vol: &cinegauge::measure::Volumetry,
    seed_slice: usize,
    overlays: bool,
) -> anyhow::Result<()> {
    let masks = seg.masks.mapv(u8::from);
    io::nifti::write_nifti_series(&out.join(MASKS), masks.view(), &series.geometry)
        .context("writing the masks")?;
    let n = &vol.numbers;
    // One window for every picture of the series: 0 to the 99.5th percentile of the stack.
    let mut values: Vec<f32> = series.images.iter().copied().collect();
    values.sort_by(f32::total_cmp);
    let hi = values[((values.len() - 1) as f64 * 0.995) as usize];
    let ed_es = |slice: usize| {
        let im = series.images.index_axis(ndarray::Axis(0), slice);
        [n.ed_frame, n.es_frame].map(|f| {
            (
                im.index_axis_move(ndarray::Axis(0), f),
                seg.masks.slice(ndarray::s![slice, f, .., ..]),
            )
        })
    };
    io::png::write_panels(&out.join(PREVIEW), &ed_es(seed_slice), (0.0, hi))
        .context("writing the preview")?;
    if overlays {
        let dir = out.join("overlays");
        io::ensure_dir(&dir)?;
        for slice in 0..series.images.dim().0 {
            io::png::write_panels(
                &dir.join(format!("slice_{slice:02}.png")),
                &ed_es(slice),
                (0.0, hi),
            )
            .with_context(|| format!("writing the overlay of slice {slice}"))?;
        }
    }
    Ok(())
}

/// File name of the LV masks written by `measure`.
const MASKS: &str = "lv_masks.nii.gz";
/// File name of the ED/ES preview written by `measure`.
const PREVIEW: &str = "ed_es.png";
