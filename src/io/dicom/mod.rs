//! DICOM cine series: a folder (searched recursively) of classic single-frame MR images.
//!
//! Slices are ordered by ImagePositionPatient projected on the slice normal
//! `n = row direction × column direction` (ImageOrientationPatient), frames by TriggerTime
//! (InstanceNumber when there is none). Pixel spacing and the centre-to-centre slice spacing
//! come from the geometry (PixelSpacing; the distance between projected positions), never
//! from SpacingBetweenSlices. Pixel values have RescaleSlope/Intercept applied. Only the
//! attributes needed for geometry and timing are read; nothing identifying the patient is
//! kept.

use std::collections::BTreeMap;
use std::io::Read;
use std::path::{Path, PathBuf};

use ::dicom::dictionary_std::tags;
use ::dicom::object::{DefaultDicomObject, OpenFileOptions};
use ::dicom::pixeldata::PixelDecoder;
use ndarray::{s, Array4};

use super::npy::ImageSeries;
use super::IoError;
use crate::geometry::{Geometry, GeometrySidecar};

/// Tolerance on direction cosines when checking that all images share one orientation.
const ORIENTATION_TOL: f64 = 1e-4;
/// Positions along the normal closer than this (mm) belong to the same slice.
const SAME_SLICE_MM: f64 = 0.01;
/// Allowed relative deviation of one slice gap from the mean gap.
const GAP_TOL: f64 = 0.01;

/// One image's header facts.
#[derive(Debug, Clone)]
struct Header {
    path: PathBuf,
    series_uid: String,
    description: String,
    orientation: [f64; 6],
    position: [f64; 3],
    spacing: Option<[f64; 2]>,
    thickness: Option<f64>,
    trigger_ms: Option<f64>,
    instance: Option<i64>,
    rows: usize,
    cols: usize,
    nominal_interval_ms: Option<f64>,
    heart_rate_bpm: Option<f64>,
}

/// A series found in a folder.
#[derive(Debug, Clone)]
pub struct SeriesSummary {
    /// SeriesInstanceUID.
    pub uid: String,
    /// SeriesDescription (may be empty).
    pub description: String,
    /// Number of image files.
    pub images: usize,
}

/// Whether a file starts with the DICOM preamble and `DICM` magic (PS3.10 §7.1).
pub fn has_dicom_magic(path: &Path) -> bool {
    let mut head = [0u8; 132];
    std::fs::File::open(path)
        .and_then(|mut f| f.read_exact(&mut head))
        .is_ok_and(|()| &head[128..] == b"DICM")
}

/// Every file under `dir` (recursively), sorted by path.
fn walk(dir: &Path, out: &mut Vec<PathBuf>) -> Result<(), IoError> {
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| IoError::file(dir, "cannot list folder", e))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            walk(&p, out)?;
        } else {
            out.push(p);
        }
    }
    Ok(())
}

/// The DICOM files under `dir`.
///
/// # Errors
/// [`IoError`] when the folder cannot be listed.
pub fn dicom_files(dir: &Path) -> Result<Vec<PathBuf>, IoError> {
    let mut all = Vec::new();
    walk(dir, &mut all)?;
    Ok(all.into_iter().filter(|p| has_dicom_magic(p)).collect())
}

fn text(obj: &DefaultDicomObject, tag: ::dicom::core::Tag) -> String {
    obj.element_opt(tag)
        .ok()
        .flatten()
        .and_then(|e| e.to_str().ok())
        .map(|s| s.trim().to_string())
        .unwrap_or_default()
}

fn numbers(
    obj: &DefaultDicomObject,
    path: &Path,
    tag: ::dicom::core::Tag,
    name: &str,
) -> Result<Option<Vec<f64>>, IoError> {
    match obj.element_opt(tag) {
        Ok(Some(e)) => e.to_multi_float64().map(Some).map_err(|err| {
            IoError::content(path, format!("{name} {tag}: not a list of numbers: {err}"))
        }),
        _ => Ok(None),
    }
}

fn fixed<const N: usize>(
    v: Option<Vec<f64>>,
    path: &Path,
    tag: ::dicom::core::Tag,
    name: &str,
) -> Result<Option<[f64; N]>, IoError> {
    match v {
        None => Ok(None),
        Some(v) => {
            let arr: [f64; N] = v.clone().try_into().map_err(|_| {
                IoError::content(
                    path,
                    format!("{name} {tag}: expected {N} values, found {}", v.len()),
                )
            })?;
            if arr.iter().all(|x| x.is_finite()) {
                Ok(Some(arr))
            } else {
                Err(IoError::content(
                    path,
                    format!("{name} {tag}: non-finite value in {v:?}"),
                ))
            }
        }
    }
}

fn read_header(path: &Path) -> Result<Header, IoError> {
    let obj = OpenFileOptions::new()
        .read_until(tags::PIXEL_DATA)
        .open_file(path)
        .map_err(|e| IoError::content(path, format!("not a readable DICOM file: {e}")))?;
    let need = |v: Option<[f64; 6]>| {
        v.ok_or_else(|| {
            IoError::content(
                path,
                "ImageOrientationPatient (0020,0037) is missing".to_string(),
            )
        })
    };
    let orientation = need(fixed::<6>(
        numbers(
            &obj,
            path,
            tags::IMAGE_ORIENTATION_PATIENT,
            "ImageOrientationPatient",
        )?,
        path,
        tags::IMAGE_ORIENTATION_PATIENT,
        "ImageOrientationPatient",
    )?)?;
    let position = fixed::<3>(
        numbers(
            &obj,
            path,
            tags::IMAGE_POSITION_PATIENT,
            "ImagePositionPatient",
        )?,
        path,
        tags::IMAGE_POSITION_PATIENT,
        "ImagePositionPatient",
    )?
    .ok_or_else(|| IoError::content(path, "ImagePositionPatient (0020,0032) is missing"))?;
    let spacing = fixed::<2>(
        numbers(&obj, path, tags::PIXEL_SPACING, "PixelSpacing")?,
        path,
        tags::PIXEL_SPACING,
        "PixelSpacing",
    )?;
    let one = |tag, name: &str| -> Result<Option<f64>, IoError> {
        Ok(numbers(&obj, path, tag, name)?.and_then(|v| v.first().copied()))
    };
    let count = |tag, name: &str| -> Result<usize, IoError> {
        one(tag, name)?
            .filter(|v| *v >= 1.0 && v.fract() == 0.0)
            .map(|v| v as usize)
            .ok_or_else(|| {
                IoError::content(
                    path,
                    format!("{name} {tag} is missing or not a positive count"),
                )
            })
    };
    Ok(Header {
        path: path.to_path_buf(),
        series_uid: text(&obj, tags::SERIES_INSTANCE_UID),
        description: text(&obj, tags::SERIES_DESCRIPTION),
        orientation,
        position,
        spacing,
        thickness: one(tags::SLICE_THICKNESS, "SliceThickness")?,
        trigger_ms: one(tags::TRIGGER_TIME, "TriggerTime")?,
        instance: one(tags::INSTANCE_NUMBER, "InstanceNumber")?.map(|v| v as i64),
        rows: count(tags::ROWS, "Rows")?,
        cols: count(tags::COLUMNS, "Columns")?,
        nominal_interval_ms: one(tags::NOMINAL_INTERVAL, "NominalInterval")?,
        heart_rate_bpm: one(tags::HEART_RATE, "HeartRate")?,
    })
}

fn cross(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a.iter().zip(&b).map(|(x, y)| x * y).sum()
}

fn headers(dir: &Path) -> Result<Vec<Header>, IoError> {
    let files = dicom_files(dir)?;
    if files.is_empty() {
        return Err(IoError::content(
            dir,
            "no DICOM files (with the DICM preamble) in this folder",
        ));
    }
    files.iter().map(|p| read_header(p)).collect()
}

fn summarise(all: &[Header]) -> Vec<SeriesSummary> {
    let mut by: BTreeMap<&str, SeriesSummary> = BTreeMap::new();
    for h in all {
        by.entry(&h.series_uid)
            .or_insert_with(|| SeriesSummary {
                uid: h.series_uid.clone(),
                description: h.description.clone(),
                images: 0,
            })
            .images += 1;
    }
    by.into_values().collect()
}

/// The series in a folder, by SeriesInstanceUID.
///
/// # Errors
/// [`IoError`] naming a file that cannot be read.
pub fn list_series(dir: &Path) -> Result<Vec<SeriesSummary>, IoError> {
    Ok(summarise(&headers(dir)?))
}

/// Reads one cine series from a folder. `series` picks it by SeriesInstanceUID or
/// SeriesDescription when the folder holds several.
///
/// # Errors
/// [`IoError`] naming the file and the attribute at fault: several series and none chosen,
/// mixed orientations (non-parallel slices), unequal frame counts per slice, duplicate
/// positions, missing pixel spacing, uneven slice gaps, pixel data that cannot be decoded.
pub fn read_dicom_series(dir: &Path, series: Option<&str>) -> Result<ImageSeries, IoError> {
    let all = headers(dir)?;
    let found = summarise(&all);
    let chosen = match series {
        Some(want) => found
            .iter()
            .find(|s| s.uid == want || s.description == want)
            .ok_or_else(|| {
                IoError::content(
                    dir,
                    format!(
                        "no series with UID or description `{want}`; found {}",
                        describe(&found)
                    ),
                )
            })?,
        None if found.len() == 1 => &found[0],
        None => {
            return Err(IoError::content(
                dir,
                format!(
                    "{} series here; choose one with --series UID-or-description: {}",
                    found.len(),
                    describe(&found)
                ),
            ))
        }
    };
    let images: Vec<&Header> = all.iter().filter(|h| h.series_uid == chosen.uid).collect();
    let first = images[0];
    let mut warnings = Vec::new();
    for h in &images {
        let diff = h
            .orientation
            .iter()
            .zip(&first.orientation)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        if diff > ORIENTATION_TOL {
            return Err(IoError::content(
                &h.path,
                format!(
                    "ImageOrientationPatient (0020,0037) {:?} differs from {:?} in {}: mixed orientations or non-parallel slices",
                    h.orientation, first.orientation, first.path.display()
                ),
            ));
        }
        if (h.rows, h.cols) != (first.rows, first.cols) {
            return Err(IoError::content(
                &h.path,
                format!(
                    "Rows × Columns {} × {} differs from {} × {} in {}",
                    h.rows,
                    h.cols,
                    first.rows,
                    first.cols,
                    first.path.display()
                ),
            ));
        }
    }
    let spacing = first
        .spacing
        .ok_or_else(|| IoError::content(&first.path, "PixelSpacing (0028,0030) is missing"))?;
    if let Some(h) = images.iter().find(|h| h.spacing != Some(spacing)) {
        return Err(IoError::content(
            &h.path,
            match h.spacing {
                None => "PixelSpacing (0028,0030) is missing".to_string(),
                Some(s) => format!(
                    "PixelSpacing (0028,0030) {s:?} differs from {spacing:?} in {}",
                    first.path.display()
                ),
            },
        ));
    }
    let o = first.orientation;
    let normal = cross([o[0], o[1], o[2]], [o[3], o[4], o[5]]);
    // Sort by position along the normal, then by trigger time or instance number.
    let mut keyed: Vec<(f64, &Header)> = images
        .iter()
        .map(|h| (dot(normal, h.position), *h))
        .collect();
    let frame_key = |h: &Header| h.trigger_ms.unwrap_or(h.instance.unwrap_or(0) as f64);
    keyed.sort_by(|a, b| {
        a.0.total_cmp(&b.0)
            .then(frame_key(a.1).total_cmp(&frame_key(b.1)))
    });
    let mut slices: Vec<(f64, Vec<&Header>)> = Vec::new();
    for (d, h) in keyed {
        match slices.last_mut() {
            Some((d0, list)) if (d - *d0).abs() <= SAME_SLICE_MM => list.push(h),
            _ => slices.push((d, vec![h])),
        }
    }
    for (d, list) in &slices {
        for pair in list.windows(2) {
            if frame_key(pair[0]) == frame_key(pair[1]) {
                return Err(IoError::content(
                    &pair[1].path,
                    format!(
                        "same position ({d:.2} mm along the normal) and TriggerTime (0018,1060) as {}: duplicate image",
                        pair[0].path.display()
                    ),
                ));
            }
        }
    }
    let frames = slices[0].1.len();
    if let Some((d, list)) = slices.iter().find(|(_, l)| l.len() != frames) {
        return Err(IoError::content(
            dir,
            format!(
                "the slice at {:.2} mm along the normal has {} images and the slice at {:.2} mm has {frames}: unequal frame counts per slice",
                d,
                list.len(),
                slices[0].0
            ),
        ));
    }
    let gaps: Vec<f64> = slices.windows(2).map(|w| w[1].0 - w[0].0).collect();
    let slice_spacing = if gaps.is_empty() {
        first.thickness.unwrap_or(1.0)
    } else {
        gaps.iter().sum::<f64>() / gaps.len() as f64
    };
    if let Some((k, g)) = gaps
        .iter()
        .enumerate()
        .find(|(_, g)| (*g - slice_spacing).abs() > GAP_TOL * slice_spacing)
    {
        return Err(IoError::content(
            dir,
            format!("slice gap {g:.2} mm between slices {k} and {} differs from the mean {slice_spacing:.2} mm: a missing or extra slice?", k + 1),
        ));
    }
    let thickness = first.thickness.unwrap_or_else(|| {
        warnings.push(format!(
            "SliceThickness (0018,0050) missing; the slice spacing {slice_spacing:.2} mm is used"
        ));
        slice_spacing
    });
    let trigger: Option<Vec<f64>> = if images.iter().all(|h| h.trigger_ms.is_some()) {
        Some(
            (0..frames)
                .map(|f| {
                    slices
                        .iter()
                        .map(|(_, l)| l[f].trigger_ms.unwrap_or(0.0))
                        .sum::<f64>()
                        / slices.len() as f64
                })
                .collect(),
        )
    } else {
        warnings.push("TriggerTime (0018,1060) missing; frames ordered by InstanceNumber, 1 ms apart (rates are not meaningful)".into());
        None
    };
    let rr = first.nominal_interval_ms.filter(|v| *v > 0.0).or_else(|| {
        first
            .heart_rate_bpm
            .filter(|v| *v > 0.0)
            .map(|hr| 60_000.0 / hr)
    });
    let sidecar = GeometrySidecar {
        pixel_spacing_mm: spacing.to_vec(),
        slice_thickness_mm: thickness,
        slice_spacing_mm: slice_spacing,
        frame_interval_ms: if trigger.is_none() { Some(1.0) } else { None },
        trigger_times_ms: trigger,
        rr_interval_ms: rr,
        unknown: Default::default(),
    };
    let geometry = Geometry::from_sidecar(&sidecar, frames, &dir.display().to_string())
        .map_err(|e| IoError::content(dir, e.to_string()))?;
    let (nr, nc) = (first.rows, first.cols);
    let mut stack = Array4::<f32>::zeros((slices.len(), frames, nr, nc));
    let mut files = Vec::with_capacity(images.len());
    for (k, (_, list)) in slices.iter().enumerate() {
        for (f, h) in list.iter().enumerate() {
            let obj = ::dicom::object::open_file(&h.path).map_err(|e| {
                IoError::content(&h.path, format!("not a readable DICOM file: {e}"))
            })?;
            let px = obj
                .decode_pixel_data()
                .and_then(|d| d.to_ndarray::<f32>())
                .map_err(|e| {
                    IoError::content(
                        &h.path,
                        format!(
                            "pixel data (transfer syntax {}) cannot be decoded: {e}",
                            obj.meta().transfer_syntax()
                        ),
                    )
                })?;
            if px.dim() != (1, nr, nc, 1) {
                return Err(IoError::content(
                    &h.path,
                    format!(
                        "pixel data has shape {:?}; expected one frame of {nr} × {nc}, one sample",
                        px.dim()
                    ),
                ));
            }
            if let Some(v) = px.iter().find(|v| !v.is_finite()) {
                return Err(IoError::content(
                    &h.path,
                    format!("non-finite pixel value {v}"),
                ));
            }
            stack
                .slice_mut(s![k, f, .., ..])
                .assign(&px.slice(s![0, .., .., 0]));
            files.push(h.path.clone());
        }
    }
    Ok(ImageSeries {
        images: stack,
        geometry,
        path: dir.to_path_buf(),
        unknown_keys: Vec::new(),
        warnings,
        files,
        positions_mm: Some(slices.iter().map(|(d, _)| *d).collect()),
    })
}

fn describe(found: &[SeriesSummary]) -> String {
    found
        .iter()
        .map(|s| format!("{} (\"{}\", {} images)", s.uid, s.description, s.images))
        .collect::<Vec<_>>()
        .join("; ")
}

mod write;
pub use write::{derived_uid, write_dicom_series, SeriesLabel};
