//! The header facts of one image: from a classic single-frame file, or one per frame of an
//! enhanced multi-frame file (per-frame functional groups, falling back to the shared ones).

use std::path::{Path, PathBuf};

use ::dicom::core::Tag;
use ::dicom::dictionary_std::tags;
use ::dicom::object::{InMemDicomObject, OpenFileOptions};

use crate::io::IoError;

/// One image's header facts (one frame of an enhanced file counts as one image).
#[derive(Debug, Clone)]
pub(super) struct Header {
    pub path: PathBuf,
    /// Frame within the file (0 for single-frame files).
    pub frame: usize,
    /// Whether the file is enhanced multi-frame (rescale comes from the functional groups).
    pub enhanced: bool,
    /// RescaleSlope and RescaleIntercept of this frame (enhanced files only).
    pub rescale: (f64, f64),
    pub series_uid: String,
    pub description: String,
    pub orientation: [f64; 6],
    pub position: [f64; 3],
    pub spacing: Option<[f64; 2]>,
    pub thickness: Option<f64>,
    pub trigger_ms: Option<f64>,
    pub instance: Option<i64>,
    pub rows: usize,
    pub cols: usize,
    pub nominal_interval_ms: Option<f64>,
    pub heart_rate_bpm: Option<f64>,
}

fn text(obj: &InMemDicomObject, tag: Tag) -> String {
    obj.element_opt(tag)
        .ok()
        .flatten()
        .and_then(|e| e.to_str().ok())
        .map(|s| s.trim().to_string())
        .unwrap_or_default()
}

/// Where attributes are looked up: the data set itself, or (enhanced) one frame's
/// functional-group item and then the shared item.
struct Source<'a> {
    path: &'a Path,
    /// `frame N: ` for enhanced files, empty otherwise (prefix of messages).
    label: String,
    top: &'a InMemDicomObject,
    per_frame: Option<&'a InMemDicomObject>,
    shared: Option<&'a InMemDicomObject>,
}

impl Source<'_> {
    /// The values of `tag`, at the top level or inside functional group `group`.
    fn numbers(
        &self,
        group: Option<Tag>,
        tag: Tag,
        name: &str,
    ) -> Result<Option<Vec<f64>>, IoError> {
        fn in_group(
            item: Option<&InMemDicomObject>,
            group: Option<Tag>,
            tag: Tag,
        ) -> Option<&::dicom::object::mem::InMemElement> {
            let first = item?.element_opt(group?).ok().flatten()?.items()?.first()?;
            first.element_opt(tag).ok().flatten()
        }
        let elem = match group {
            Some(_) => {
                in_group(self.per_frame, group, tag).or_else(|| in_group(self.shared, group, tag))
            }
            None => self.top.element_opt(tag).ok().flatten(),
        };
        match elem {
            Some(e) => e.to_multi_float64().map(Some).map_err(|err| {
                IoError::content(
                    self.path,
                    format!("{}{name} {tag}: not a list of numbers: {err}", self.label),
                )
            }),
            None => Ok(None),
        }
    }

    fn fixed<const N: usize>(
        &self,
        group: Option<Tag>,
        tag: Tag,
        name: &str,
    ) -> Result<Option<[f64; N]>, IoError> {
        let Some(v) = self.numbers(group, tag, name)? else {
            return Ok(None);
        };
        let bad = |what: String| {
            IoError::content(self.path, format!("{}{name} {tag}: {what}", self.label))
        };
        let arr: [f64; N] = v
            .clone()
            .try_into()
            .map_err(|_| bad(format!("expected {N} values, found {}", v.len())))?;
        if arr.iter().all(|x| x.is_finite()) {
            Ok(Some(arr))
        } else {
            Err(bad(format!("non-finite value in {v:?}")))
        }
    }

    fn one(&self, group: Option<Tag>, tag: Tag, name: &str) -> Result<Option<f64>, IoError> {
        Ok(self
            .numbers(group, tag, name)?
            .and_then(|v| v.first().copied()))
    }

    fn count(&self, tag: Tag, name: &str) -> Result<usize, IoError> {
        self.one(None, tag, name)?
            .filter(|v| *v >= 1.0 && v.fract() == 0.0)
            .map(|v| v as usize)
            .ok_or_else(|| {
                IoError::content(
                    self.path,
                    format!("{name} {tag} is missing or not a positive count"),
                )
            })
    }

    fn required<const N: usize>(
        &self,
        group: Option<Tag>,
        tag: Tag,
        name: &str,
    ) -> Result<[f64; N], IoError> {
        self.fixed::<N>(group, tag, name)?.ok_or_else(|| {
            IoError::content(self.path, format!("{}{name} {tag} is missing", self.label))
        })
    }

    fn header(&self, frame: usize, enhanced: bool) -> Result<Header, IoError> {
        let g = |t: Tag| enhanced.then_some(t);
        let rescale = if enhanced {
            let s = self.one(
                g(tags::PIXEL_VALUE_TRANSFORMATION_SEQUENCE),
                tags::RESCALE_SLOPE,
                "RescaleSlope",
            )?;
            let i = self.one(
                g(tags::PIXEL_VALUE_TRANSFORMATION_SEQUENCE),
                tags::RESCALE_INTERCEPT,
                "RescaleIntercept",
            )?;
            (s.unwrap_or(1.0), i.unwrap_or(0.0))
        } else {
            (1.0, 0.0)
        };
        let trigger = if enhanced {
            self.one(
                g(tags::CARDIAC_SYNCHRONIZATION_SEQUENCE),
                tags::NOMINAL_CARDIAC_TRIGGER_DELAY_TIME,
                "NominalCardiacTriggerDelayTime",
            )?
        } else {
            self.one(None, tags::TRIGGER_TIME, "TriggerTime")?
        };
        Ok(Header {
            path: self.path.to_path_buf(),
            frame,
            enhanced,
            rescale,
            series_uid: text(self.top, tags::SERIES_INSTANCE_UID),
            description: text(self.top, tags::SERIES_DESCRIPTION),
            orientation: self.required::<6>(
                g(tags::PLANE_ORIENTATION_SEQUENCE),
                tags::IMAGE_ORIENTATION_PATIENT,
                "ImageOrientationPatient",
            )?,
            position: self.required::<3>(
                g(tags::PLANE_POSITION_SEQUENCE),
                tags::IMAGE_POSITION_PATIENT,
                "ImagePositionPatient",
            )?,
            spacing: self.fixed::<2>(
                g(tags::PIXEL_MEASURES_SEQUENCE),
                tags::PIXEL_SPACING,
                "PixelSpacing",
            )?,
            thickness: self.one(
                g(tags::PIXEL_MEASURES_SEQUENCE),
                tags::SLICE_THICKNESS,
                "SliceThickness",
            )?,
            trigger_ms: trigger,
            instance: if enhanced {
                Some(frame as i64)
            } else {
                self.one(None, tags::INSTANCE_NUMBER, "InstanceNumber")?
                    .map(|v| v as i64)
            },
            rows: self.count(tags::ROWS, "Rows")?,
            cols: self.count(tags::COLUMNS, "Columns")?,
            nominal_interval_ms: self.one(None, tags::NOMINAL_INTERVAL, "NominalInterval")?,
            heart_rate_bpm: self.one(None, tags::HEART_RATE, "HeartRate")?,
        })
    }
}

/// The headers of one file: one for a classic image, one per frame for an enhanced file.
pub(super) fn read_headers(path: &Path) -> Result<Vec<Header>, IoError> {
    let bytes = std::fs::read(path).map_err(|e| IoError::file(path, "cannot read", e))?;
    super::lengths::check(&bytes).map_err(|m| IoError::content(path, m))?;
    let obj = OpenFileOptions::new()
        .read_until(tags::PIXEL_DATA)
        .open_file(path)
        .map_err(|e| IoError::content(path, format!("not a readable DICOM file: {e}")))?;
    let top: &InMemDicomObject = &obj;
    let items = |tag| top.element_opt(tag).ok().flatten().and_then(|e| e.items());
    let Some(per_frame) = items(tags::PER_FRAME_FUNCTIONAL_GROUPS_SEQUENCE) else {
        let source = Source {
            path,
            label: String::new(),
            top,
            per_frame: None,
            shared: None,
        };
        return Ok(vec![source.header(0, false)?]);
    };
    let shared = items(tags::SHARED_FUNCTIONAL_GROUPS_SEQUENCE).and_then(|s| s.first());
    let source = Source {
        path,
        label: String::new(),
        top,
        per_frame: None,
        shared,
    };
    let frames = source.count(tags::NUMBER_OF_FRAMES, "NumberOfFrames")?;
    if per_frame.len() != frames {
        return Err(IoError::content(
            path,
            format!(
                "PerFrameFunctionalGroupsSequence (5200,9230) has {} items but NumberOfFrames (0028,0008) is {frames}",
                per_frame.len()
            ),
        ));
    }
    per_frame
        .iter()
        .enumerate()
        .map(|(i, item)| {
            Source {
                path,
                label: format!("frame {}: ", i + 1),
                top,
                per_frame: Some(item),
                shared,
            }
            .header(i, true)
        })
        .collect()
}
