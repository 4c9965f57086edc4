//! The study plan as written in TOML: every table refuses keys it does not know, and the
//! values checked after parsing keep their place in the file (for error messages).

use std::collections::BTreeMap;

use serde::Deserialize;
use toml::Spanned;

use crate::acceptance::Criterion;

/// The whole file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlanFile {
    pub study: Study,
    #[serde(default)]
    pub synthetic: Option<Synthetic>,
    #[serde(default)]
    pub subject: Vec<SubjectEntry>,
    #[serde(default)]
    pub sampling: Option<Sampling>,
    #[serde(default)]
    pub coils: Coils,
    #[serde(default = "no_methods")]
    pub methods: Spanned<MethodTables>,
    #[serde(default)]
    pub segmentation: Segmentation,
    #[serde(default)]
    pub criterion: Vec<Spanned<Criterion>>,
    #[serde(default)]
    pub outputs: Outputs,
}

/// `[methods]`: method identifier → parameter → value, in the order written (the order of
/// the report's lines and tables).
#[derive(Debug, Default)]
pub struct MethodTables(pub Vec<(Spanned<String>, MethodParams)>);

/// One method's parameters: name → value.
pub type MethodParams = BTreeMap<Spanned<String>, f64>;

impl<'de> Deserialize<'de> for MethodTables {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct Visit;
        impl<'de> serde::de::Visitor<'de> for Visit {
            type Value = MethodTables;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a table of method identifiers, each with its parameters")
            }
            fn visit_map<A: serde::de::MapAccess<'de>>(
                self,
                mut m: A,
            ) -> Result<MethodTables, A::Error> {
                let mut v = Vec::new();
                while let Some(entry) = m.next_entry()? {
                    v.push(entry);
                }
                Ok(MethodTables(v))
            }
        }
        d.deserialize_map(Visit)
    }
}

fn no_methods() -> Spanned<MethodTables> {
    Spanned::new(0..0, MethodTables::default())
}

/// `[study]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Study {
    pub code: Spanned<String>,
    #[serde(default)]
    pub description: String,
    #[serde(default = "one")]
    pub rng_seed: u64,
}

fn one() -> u64 {
    1
}

/// `[synthetic]`: the acquisition shared by every synthetic subject.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Synthetic {
    pub slices: usize,
    pub slice_thickness_mm: f64,
    pub slice_gap_mm: f64,
    pub pixel_mm: f64,
    pub rows: usize,
    pub cols: usize,
    pub frames: usize,
    pub coils: usize,
}

/// One `[[subject]]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SubjectEntry {
    pub code: Spanned<String>,
    #[serde(default)]
    pub description: String,
    #[serde(default)]
    pub phantom: Option<Spanned<PhantomEntry>>,
    #[serde(default)]
    pub kspace: Option<Spanned<String>>,
    #[serde(default)]
    pub series: Vec<Spanned<SeriesEntry>>,
    #[serde(default)]
    pub seeds: Option<Spanned<String>>,
    #[serde(default)]
    pub geometry: Option<Spanned<GeometryOverride>>,
}

/// A synthetic subject's heart.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PhantomEntry {
    pub edv_ml: f64,
    pub ef_pct: f64,
    pub heart_rate_bpm: f64,
    pub snr: f64,
}

/// An image series reconstructed elsewhere (or the reference as images).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SeriesEntry {
    pub method: String,
    pub path: String,
    #[serde(default)]
    pub pattern: Option<String>,
    #[serde(default)]
    pub accel: Option<f64>,
    #[serde(default)]
    pub accel_effective: Option<f64>,
    /// DICOM folder with several series: SeriesInstanceUID or SeriesDescription.
    #[serde(default)]
    pub select: Option<String>,
}

/// Geometry values that replace what the data says (e.g. a wrong slice spacing in an export).
#[derive(Debug, Clone, Default, PartialEq, Deserialize, serde::Serialize)]
#[serde(deny_unknown_fields)]
pub struct GeometryOverride {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    /// In-plane spacing `[row_mm, col_mm]`.
    pub pixel_spacing_mm: Option<[f64; 2]>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    /// Slice thickness, mm.
    pub slice_thickness_mm: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    /// Centre-to-centre slice spacing, mm.
    pub slice_spacing_mm: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    /// Frame interval, ms (replaces the trigger times).
    pub frame_interval_ms: Option<f64>,
}

/// `[sampling]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Sampling {
    pub patterns: Vec<Spanned<String>>,
    pub accelerations: Spanned<Vec<f64>>,
    #[serde(default = "acs_default")]
    pub acs_lines: usize,
    #[serde(default)]
    pub density: Option<crate::sampling::DensityLaw>,
    #[serde(default = "shear_default")]
    pub kt_shear: usize,
}

fn acs_default() -> usize {
    crate::sampling::DEFAULT_ACS_LINES
}

fn shear_default() -> usize {
    1
}

/// `[coils]`.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Coils {
    #[serde(default)]
    pub virtual_coils: usize,
    #[serde(default = "yes")]
    pub prewhiten: bool,
}

fn yes() -> bool {
    true
}

/// `[segmentation]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Segmentation {
    #[serde(default = "in_pool")]
    pub papillary_muscles: Spanned<String>,
    #[serde(default = "cover_default")]
    pub basal_min_wall_cover: Spanned<f64>,
    #[serde(default = "depth_default")]
    pub basal_wall_depth_mm: Spanned<f64>,
    #[serde(default = "apex_default")]
    pub apex_min_px: usize,
    #[serde(default)]
    pub seed_jitter_px: usize,
}

impl Default for Segmentation {
    fn default() -> Self {
        Segmentation {
            papillary_muscles: in_pool(),
            basal_min_wall_cover: cover_default(),
            basal_wall_depth_mm: depth_default(),
            apex_min_px: apex_default(),
            seed_jitter_px: 0,
        }
    }
}

fn in_pool() -> Spanned<String> {
    Spanned::new(0..0, "in-pool".into())
}

fn cover_default() -> Spanned<f64> {
    Spanned::new(0..0, crate::segment::ExtentRule::default().min_cover)
}

fn depth_default() -> Spanned<f64> {
    Spanned::new(0..0, crate::segment::ExtentRule::default().wall_depth_mm)
}

fn apex_default() -> usize {
    crate::segment::ExtentRule::default().apex_min_px
}

/// `[outputs]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Outputs {
    #[serde(default = "yes")]
    pub pdf: bool,
    #[serde(default = "yes")]
    pub panels: bool,
}

impl Default for Outputs {
    fn default() -> Self {
        Outputs {
            pdf: true,
            panels: true,
        }
    }
}
