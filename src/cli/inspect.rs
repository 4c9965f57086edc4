//! `cinegauge inspect PATH`: what the readers find in a file or folder, before any work.

use std::path::{Path, PathBuf};

use anyhow::Context;
use clap::Args;
use serde_json::{json, Value};

use cinegauge::geometry::Geometry;
use cinegauge::io;

/// Arguments of `inspect`.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  cinegauge inspect sim/reference\n  cinegauge inspect study/cine.nii.gz --json\n\n\
Reads image series (DICOM folders, NIfTI-1, or .npy + geometry.json) and raw k-space (slice_NN.npy folders + \
geometry.json, ISMRMRD files) and prints dimensions, spacing, slice positions along the normal, frames, trigger \
times, heart rate and warnings. Nothing is written. Research use only; not for diagnostic use."
)]
pub struct InspectArgs {
    /// File or folder to inspect.
    pub path: PathBuf,
    /// DICOM folder with several series: the one to describe (SeriesInstanceUID or
    /// SeriesDescription); without it, the series are listed.
    #[arg(long, value_name = "UID-OR-DESCRIPTION")]
    pub series: Option<String>,
    /// Print the findings as JSON on stdout.
    #[arg(long)]
    pub json: bool,
}

/// The series of a DICOM folder when there are several and none was chosen.
fn several_dicom_series(
    path: &Path,
    chosen: Option<&str>,
) -> anyhow::Result<Option<Vec<io::dicom::SeriesSummary>>> {
    if chosen.is_some() || !path.is_dir() || io::dicom::dicom_files(path)?.is_empty() {
        return Ok(None);
    }
    let list = io::dicom::list_series(path).context("reading the DICOM folder")?;
    Ok((list.len() > 1).then_some(list))
}

fn geometry_json(g: &Geometry, slices: usize, positions: Option<&[f64]>) -> Value {
    let positions: Vec<f64> = match positions {
        Some(p) => p.to_vec(),
        None => (0..slices).map(|k| k as f64 * g.slice_spacing_mm).collect(),
    };
    json!({
        "pixel_spacing_mm": [g.row_spacing_mm, g.col_spacing_mm],
        "slice_thickness_mm": g.slice_thickness_mm,
        "slice_spacing_mm": g.slice_spacing_mm,
        "slice_positions_mm": positions,
        "frames": g.frames(),
        "trigger_times_ms": g.trigger_times_ms,
        "rr_interval_ms": g.rr_interval_ms,
        "heart_rate_bpm": g.rr_interval_ms.map(|rr| 60_000.0 / rr),
    })
}

pub fn run(a: InspectArgs) -> anyhow::Result<()> {
    let found = if io::kspace::is_raw_kspace(&a.path) {
        let k = io::kspace::open_kspace(&a.path).context("reading the raw k-space")?;
        let (s, c, f, ky, kx) = k.dims;
        let mut v = json!({
            "path": a.path.display().to_string(),
            "kind": k.kind,
            "dims": {"slices": s, "coils": c, "frames": f, "ky": ky, "kx": kx},
            "noise_covariance": k.noise_cov.is_some(),
            "warnings": k.warnings,
        });
        v["geometry"] = geometry_json(&k.geometry, s, k.positions_mm.as_deref());
        v
    } else if let Some(list) = several_dicom_series(&a.path, a.series.as_deref())? {
        json!({
            "path": a.path.display().to_string(),
            "kind": "DICOM folder with several series (choose one with --series)",
            "series": list.iter().map(|s| json!({"uid": s.uid, "description": s.description, "images": s.images})).collect::<Vec<_>>(),
        })
    } else {
        let series =
            io::read_images(&a.path, a.series.as_deref()).context("reading the image series")?;
        let (s, f, r, c) = series.images.dim();
        let kind = if io::nifti::is_nifti(&series.path) {
            "image series (NIfTI-1)"
        } else if series.path.is_dir() {
            "image series (DICOM)"
        } else {
            "image series (.npy + geometry.json)"
        };
        let mut warnings = series.warnings.clone();
        warnings.extend(
            series
                .unknown_keys
                .iter()
                .map(|u| format!("geometry.json: unknown key `{u}` ignored")),
        );
        let mut v = json!({
            "path": series.path.display().to_string(),
            "kind": kind,
            "dims": {"slices": s, "frames": f, "rows": r, "cols": c},
            "warnings": warnings,
        });
        v["geometry"] = geometry_json(&series.geometry, s, series.positions_mm.as_deref());
        v
    };
    if a.json {
        println!("{}", serde_json::to_string_pretty(&found)?);
        return Ok(());
    }
    print_text(&found);
    Ok(())
}

fn print_text(v: &Value) {
    if let Some(list) = v["series"].as_array() {
        println!(
            "{}\n  {}",
            v["path"].as_str().unwrap_or(""),
            v["kind"].as_str().unwrap_or("")
        );
        for s in list {
            println!(
                "  {}  \"{}\"  {} images",
                s["uid"].as_str().unwrap_or(""),
                s["description"].as_str().unwrap_or(""),
                s["images"]
            );
        }
        return;
    }
    let g = &v["geometry"];
    println!(
        "{}\n  {}",
        v["path"].as_str().unwrap_or(""),
        v["kind"].as_str().unwrap_or("")
    );
    let dims: Vec<String> = ["slices", "coils", "frames", "rows", "cols", "ky", "kx"]
        .iter()
        .filter_map(|k| v["dims"].get(k).map(|n| format!("{n} {k}")))
        .collect();
    println!("  dimensions: {}", dims.join(", "));
    let mm = |v: &Value| {
        let s = format!("{:.3}", v.as_f64().unwrap_or(f64::NAN));
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    };
    println!(
        "  pixel spacing: {} × {} mm (rows × cols); slice thickness {} mm; slice spacing {} mm",
        mm(&g["pixel_spacing_mm"][0]),
        mm(&g["pixel_spacing_mm"][1]),
        mm(&g["slice_thickness_mm"]),
        mm(&g["slice_spacing_mm"])
    );
    let list = |key: &str| -> String {
        g[key]
            .as_array()
            .map(|a| {
                a.iter()
                    .map(|x| format!("{:.1}", x.as_f64().unwrap_or(f64::NAN)))
                    .collect::<Vec<_>>()
                    .join(", ")
            })
            .unwrap_or_default()
    };
    println!(
        "  slice positions along the normal (mm): {}",
        list("slice_positions_mm")
    );
    println!(
        "  frames: {}; trigger times (ms): {}",
        g["frames"],
        list("trigger_times_ms")
    );
    match g["heart_rate_bpm"].as_f64() {
        Some(hr) => println!(
            "  heart rate: {hr:.0} bpm (R–R {:.0} ms)",
            g["rr_interval_ms"].as_f64().unwrap_or(f64::NAN)
        ),
        None => println!("  heart rate: not given"),
    }
    if let Some(k) = v.get("noise_covariance") {
        println!(
            "  noise covariance or noise scan: {}",
            if k == true { "yes" } else { "no" }
        );
    }
    for w in v["warnings"].as_array().into_iter().flatten() {
        println!("  warning: {}", w.as_str().unwrap_or(""));
    }
}
