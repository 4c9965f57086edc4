//! The study plan: one TOML file declaring subjects, sampling, methods, segmentation,
//! acceptance criteria and outputs. Everything a run needs is checked here, before any work
//! starts, and every refusal names the file, the line and the key.

mod schema;

use std::path::{Path, PathBuf};

use toml::Spanned;

pub use schema::GeometryOverride;
use schema::{PlanFile, SeriesEntry, SubjectEntry};

use crate::acceptance::{self, Criterion};
use crate::phantom::PhantomSpec;
use crate::recon::{self, Params, Reconstructor};
use crate::sampling::{Pattern, SamplingSpec};
use crate::segment::seeds::{self, SeedFile};
use crate::segment::{BloodPoolConvention, SegmentParams};

/// A plan that was refused, with where and why.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{origin}{}: {key}: {message}", line.map(|l| format!(":{l}")).unwrap_or_default())]
pub struct PlanError {
    /// The plan file.
    pub origin: String,
    /// One-based line of the offending value, where known.
    pub line: Option<usize>,
    /// The key at fault, as a path (e.g. `subject[2].code`).
    pub key: String,
    /// What is wrong.
    pub message: String,
}

/// Where the images of a subject come from.
#[derive(Debug, Clone)]
pub enum Source {
    /// A synthetic phantom, acquired by the tool.
    Phantom(PhantomSpec),
    /// Fully sampled multi-coil k-space: an ISMRMRD file or a folder of `slice_NN.npy`.
    Kspace(PathBuf),
    /// Image series reconstructed elsewhere, one per method.
    Series(Vec<GivenSeries>),
}

/// An image series given in the plan.
#[derive(Debug, Clone, PartialEq)]
pub struct GivenSeries {
    /// Method label (`reference` or `external:<label>`).
    pub method: String,
    /// Pattern identifier.
    pub pattern: String,
    /// Nominal acceleration.
    pub accel: f64,
    /// Effective acceleration.
    pub accel_effective: f64,
    /// DICOM folder, NIfTI file, or NumPy image folder.
    pub path: PathBuf,
    /// Series to pick from a DICOM folder holding several.
    pub select: Option<String>,
}

/// One subject of the study.
#[derive(Debug, Clone)]
pub struct Subject {
    /// Code (never a patient name).
    pub code: String,
    /// What the subject is, in words.
    pub description: String,
    /// Where the images come from.
    pub source: Source,
    /// LV seeds (absent for a phantom: its own mid-ventricular seed is used).
    pub seeds: Option<(PathBuf, SeedFile)>,
    /// Geometry values replacing the data's.
    pub geometry: GeometryOverride,
}

/// A method to run on every k-space subject at every pattern and R.
#[derive(Clone)]
pub struct MethodPlan {
    /// The method.
    pub method: &'static dyn Reconstructor,
    /// Its parameters (defaults filled in).
    pub params: Params,
}

/// Sampling of the k-space subjects.
#[derive(Debug, Clone, PartialEq)]
pub struct SamplingPlan {
    /// One request per pattern and R, in plan order (patterns outer).
    pub specs: Vec<SamplingSpec>,
}

/// A checked study plan.
#[derive(Clone)]
pub struct Plan {
    /// The plan file (or `demo` for the built-in study).
    pub origin: String,
    /// Study code.
    pub code: String,
    /// Study description.
    pub description: String,
    /// Seed of every random choice (phantom noise, pseudo-random lines).
    pub rng_seed: u64,
    /// Subjects in plan order.
    pub subjects: Vec<Subject>,
    /// Sampling requests.
    pub sampling: SamplingPlan,
    /// Virtual coils after compression (0: none).
    pub virtual_coils: usize,
    /// Whether k-space with noise data is pre-whitened.
    pub prewhiten: bool,
    /// Methods in plan order (the fully sampled `reference` is always run and not listed).
    pub methods: Vec<MethodPlan>,
    /// Segmentation settings shared by every series.
    pub segmentation: SegmentParams,
    /// Seed offset of the reference's repeatability floor (0: not measured).
    pub seed_jitter_px: usize,
    /// Acceptance criteria.
    pub criteria: Vec<Criterion>,
    /// Write the PDF report.
    pub pdf: bool,
    /// Write the image panels (and show them in the report).
    pub panels: bool,
}

/// Noise seed of the phantom of subject number `index` (each subject its own stream).
fn phantom_noise_seed(study_seed: u64, index: usize) -> u64 {
    study_seed.wrapping_mul(1000).wrapping_add(index as u64 + 1)
}

impl Plan {
    /// The same plan with another seed for every random choice (phantom noise and
    /// pseudo-random lines), as `--rng-seed` asks.
    pub fn with_rng_seed(mut self, seed: u64) -> Self {
        self.rng_seed = seed;
        for (i, s) in self.subjects.iter_mut().enumerate() {
            if let Source::Phantom(spec) = &mut s.source {
                spec.rng_seed = phantom_noise_seed(seed, i);
            }
        }
        for spec in &mut self.sampling.specs {
            spec.rng_seed = seed;
        }
        self
    }
}

/// One-based line of byte offset `at` in `text`.
fn line_of(text: &str, at: usize) -> usize {
    text[..at.min(text.len())].matches('\n').count() + 1
}

struct Ctx<'a> {
    origin: &'a str,
    text: &'a str,
    base: &'a Path,
}

impl Ctx<'_> {
    fn err(&self, span: Option<std::ops::Range<usize>>, key: &str, message: String) -> PlanError {
        PlanError {
            origin: self.origin.into(),
            line: span
                .filter(|s| !s.is_empty())
                .map(|s| line_of(self.text, s.start)),
            key: key.into(),
            message,
        }
    }

    /// A path of the plan, relative to the plan's folder, that must exist.
    fn existing(&self, p: &Spanned<String>, key: &str) -> Result<PathBuf, PlanError> {
        let path = self.base.join(p.get_ref());
        if path.exists() {
            Ok(path)
        } else {
            Err(self.err(
                Some(p.span()),
                key,
                format!("{} does not exist", path.display()),
            ))
        }
    }
}

/// Reads and checks a plan file; relative paths are taken from the plan's folder.
///
/// # Errors
/// [`PlanError`] naming the file, line and key of the first problem found.
pub fn load(path: &Path) -> Result<Plan, PlanError> {
    let origin = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| PlanError {
        origin: origin.clone(),
        line: None,
        key: "(file)".into(),
        message: format!("cannot read the plan: {e}"),
    })?;
    let base = path.parent().unwrap_or(Path::new("."));
    parse(&text, &origin, base)
}

/// Checks a plan given as text; `origin` names it in errors and `base` anchors its paths.
///
/// # Errors
/// [`PlanError`] naming the line and key of the first problem found.
pub fn parse(text: &str, origin: &str, base: &Path) -> Result<Plan, PlanError> {
    let cx = Ctx { origin, text, base };
    let file: PlanFile = toml::from_str(text).map_err(|e| {
        let message = e.message().to_string();
        let key = message
            .split('`')
            .nth(1)
            .map_or_else(|| "(syntax)".to_string(), |k| format!("`{k}`"));
        cx.err(e.span(), &key, message)
    })?;
    let code = file.study.code.get_ref().trim().to_string();
    if code.is_empty()
        || !code
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c))
    {
        return Err(cx.err(
            Some(file.study.code.span()),
            "study.code",
            "a study code of letters, digits, '-', '_' or '.' (a code, never a name)".into(),
        ));
    }
    let methods = methods(&cx, &file)?;
    let sampling = sampling(&cx, &file, !methods.is_empty())?;
    let segmentation = segmentation(&cx, &file.segmentation)?;
    let criteria = criteria(&cx, &file.criterion)?;
    if file.subject.is_empty() {
        return Err(cx.err(None, "subject", "no [[subject]] table".into()));
    }
    let mut subjects: Vec<Subject> = Vec::new();
    for (i, s) in file.subject.iter().enumerate() {
        let subject = subject(&cx, &file, i, s)?;
        if subjects.iter().any(|o| o.code == subject.code) {
            return Err(cx.err(
                Some(s.code.span()),
                &format!("subject[{}].code", i + 1),
                format!("duplicate subject code `{}`", subject.code),
            ));
        }
        if let Source::Phantom(spec) = &subject.source {
            for spec_s in &sampling.specs {
                spec_s.mask(spec.frames, spec.rows).map_err(|e| {
                    cx.err(None, "sampling", format!("subject {}: {e}", subject.code))
                })?;
            }
        }
        subjects.push(subject);
    }
    Ok(Plan {
        origin: origin.into(),
        code,
        description: file.study.description.clone(),
        rng_seed: file.study.rng_seed,
        subjects,
        sampling,
        virtual_coils: file.coils.virtual_coils,
        prewhiten: file.coils.prewhiten,
        methods,
        segmentation,
        seed_jitter_px: file.segmentation.seed_jitter_px,
        criteria,
        pdf: file.outputs.pdf,
        panels: file.outputs.panels,
    })
}

fn methods(cx: &Ctx, file: &PlanFile) -> Result<Vec<MethodPlan>, PlanError> {
    let mut out = Vec::new();
    for (name, params) in &file.methods.get_ref().0 {
        let key = format!("methods.{}", name.get_ref());
        let method = recon::by_id(name.get_ref())
            .map_err(|e| cx.err(Some(name.span()), &key, e.to_string()))?;
        if method.id() == crate::agreement::REFERENCE {
            return Err(cx.err(
                Some(name.span()),
                &key,
                "the fully sampled reference is always run; do not list it".into(),
            ));
        }
        let given: Vec<(String, String)> = params
            .iter()
            .map(|(k, v)| (k.get_ref().clone(), v.to_string()))
            .collect();
        let params = Params::resolve(method, &given).map_err(|e| {
            let at = params.keys().next().map(|k| k.span());
            cx.err(at, &key, e.to_string())
        })?;
        out.push(MethodPlan { method, params });
    }
    Ok(out)
}

fn sampling(cx: &Ctx, file: &PlanFile, needed: bool) -> Result<SamplingPlan, PlanError> {
    let Some(s) = &file.sampling else {
        if needed {
            return Err(cx.err(
                Some(file.methods.span()),
                "sampling",
                "methods are listed but there is no [sampling] table (patterns, accelerations)"
                    .into(),
            ));
        }
        return Ok(SamplingPlan { specs: Vec::new() });
    };
    let mut specs = Vec::new();
    for (i, p) in s.patterns.iter().enumerate() {
        let key = format!("sampling.patterns[{}]", i + 1);
        let pattern = Pattern::from_id(p.get_ref())
            .map_err(|e| cx.err(Some(p.span()), &key, e.to_string()))?;
        if pattern == Pattern::Full {
            return Err(cx.err(
                Some(p.span()),
                &key,
                "`full` is the reference's pattern, always run; list undersampled patterns".into(),
            ));
        }
        for &r in s.accelerations.get_ref() {
            let mut spec = SamplingSpec::new(pattern, r, s.acs_lines).map_err(|e| {
                cx.err(
                    Some(s.accelerations.span()),
                    "sampling.accelerations",
                    e.to_string(),
                )
            })?;
            spec.law = s.density.unwrap_or_default();
            spec.shear = s.kt_shear;
            spec.rng_seed = file.study.rng_seed;
            specs.push(spec);
        }
    }
    if specs.is_empty() {
        return Err(cx.err(
            Some(s.accelerations.span()),
            "sampling",
            "no pattern or no acceleration listed".into(),
        ));
    }
    Ok(SamplingPlan { specs })
}

fn segmentation(cx: &Ctx, s: &schema::Segmentation) -> Result<SegmentParams, PlanError> {
    let mut p = SegmentParams::default();
    p.grow.convention = match s.papillary_muscles.get_ref().as_str() {
        "in-pool" => BloodPoolConvention::PapillaryIncluded,
        "excluded" => BloodPoolConvention::PapillaryExcluded,
        other => {
            return Err(cx.err(
                Some(s.papillary_muscles.span()),
                "segmentation.papillary_muscles",
                format!("expected `in-pool` or `excluded`, found `{other}`"),
            ))
        }
    };
    let cover = *s.basal_min_wall_cover.get_ref();
    if !(0.0..=1.0).contains(&cover) {
        return Err(cx.err(
            Some(s.basal_min_wall_cover.span()),
            "segmentation.basal_min_wall_cover",
            format!("expected a fraction from 0 (rule off) to 1, found {cover}"),
        ));
    }
    let depth = *s.basal_wall_depth_mm.get_ref();
    if !(depth.is_finite() && depth > 0.0) {
        return Err(cx.err(
            Some(s.basal_wall_depth_mm.span()),
            "segmentation.basal_wall_depth_mm",
            format!("expected a positive depth in mm, found {depth}"),
        ));
    }
    p.extent.min_cover = cover;
    p.extent.wall_depth_mm = depth;
    p.extent.apex_min_px = s.apex_min_px;
    Ok(p)
}

fn criteria(cx: &Ctx, list: &[Spanned<Criterion>]) -> Result<Vec<Criterion>, PlanError> {
    if list.is_empty() {
        return Ok(acceptance::default_criteria());
    }
    let mut out = Vec::new();
    for (i, c) in list.iter().enumerate() {
        let key = format!("criterion[{}]", i + 1);
        let crit = c.get_ref();
        if !acceptance::QUANTITIES.contains(&crit.quantity.as_str()) {
            return Err(cx.err(
                Some(c.span()),
                &format!("{key}.quantity"),
                format!(
                    "`{}` is not a quantity this tool computes agreement for ({})",
                    crit.quantity,
                    acceptance::QUANTITIES.join(", ")
                ),
            ));
        }
        let differences = matches!(
            crit.measure,
            acceptance::Measure::AbsBias | acceptance::Measure::LimitsWithin
        );
        let unit_fits = match (differences, crit.quantity == "ef_pct") {
            (true, true) => crit.unit == "pp",
            (true, false) => ["ml", "pct"].contains(&crit.unit.as_str()),
            (false, _) => ["pp", "ml", "pct", ""].contains(&crit.unit.as_str()),
        };
        if !unit_fits {
            return Err(cx.err(
                Some(c.span()),
                &format!("{key}.unit"),
                format!(
                    "`{}` does not suit {}: EF differences are in `pp`, volumes in `ml` or `pct`",
                    crit.unit, crit.quantity
                ),
            ));
        }
        if !crit.limit.is_finite() || crit.limit < 0.0 {
            return Err(cx.err(
                Some(c.span()),
                &format!("{key}.limit"),
                format!("expected a finite limit ≥ 0, found {}", crit.limit),
            ));
        }
        out.push(crit.clone());
    }
    Ok(out)
}

fn subject(cx: &Ctx, file: &PlanFile, i: usize, s: &SubjectEntry) -> Result<Subject, PlanError> {
    let key = |k: &str| format!("subject[{}].{k}", i + 1);
    let code = s.code.get_ref().trim().to_string();
    if code.is_empty()
        || !code
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c))
    {
        return Err(cx.err(
            Some(s.code.span()),
            &key("code"),
            format!("`{code}`: a subject code of letters, digits, '-', '_' or '.' (a code, never a patient's name)"),
        ));
    }
    let kinds = [
        s.phantom.is_some(),
        s.kspace.is_some(),
        !s.series.is_empty(),
    ];
    if kinds.iter().filter(|&&k| k).count() != 1 {
        return Err(cx.err(
            Some(s.code.span()),
            &key("code"),
            format!(
                "subject `{code}` needs exactly one of `phantom`, `kspace` or [[subject.series]]"
            ),
        ));
    }
    let seeds = match &s.seeds {
        Some(p) => {
            let path = cx.existing(p, &key("seeds"))?;
            let f = seeds::read_seed_file(&path)
                .map_err(|e| cx.err(Some(p.span()), &key("seeds"), e.to_string()))?;
            Some((path, f))
        }
        None if s.phantom.is_none() => {
            return Err(cx.err(
                Some(s.code.span()),
                &key("seeds"),
                format!("subject `{code}` needs a seeds file (a phantom brings its own seed)"),
            ))
        }
        None => None,
    };
    let source = if let Some(ph) = &s.phantom {
        let Some(a) = &file.synthetic else {
            return Err(cx.err(
                Some(ph.span()),
                &key("phantom"),
                "a phantom subject needs the [synthetic] acquisition table".into(),
            ));
        };
        let p = ph.get_ref();
        let spec = PhantomSpec {
            edv_ml: p.edv_ml,
            ef_pct: p.ef_pct,
            heart_rate_bpm: p.heart_rate_bpm,
            slices: a.slices,
            slice_thickness_mm: a.slice_thickness_mm,
            slice_gap_mm: a.slice_gap_mm,
            pixel_mm: a.pixel_mm,
            rows: a.rows,
            cols: a.cols,
            frames: a.frames,
            coils: a.coils,
            snr: p.snr,
            rng_seed: phantom_noise_seed(file.study.rng_seed, i),
            thin_septum: None,
        };
        crate::phantom::Phantom::new(spec.clone())
            .map_err(|e| cx.err(Some(ph.span()), &key("phantom"), e.to_string()))?;
        Source::Phantom(spec)
    } else if let Some(k) = &s.kspace {
        Source::Kspace(cx.existing(k, &key("kspace"))?)
    } else {
        let mut given = Vec::new();
        for (j, e) in s.series.iter().enumerate() {
            let g = series(cx, &key(&format!("series[{}]", j + 1)), e)?;
            if given.iter().any(|o: &GivenSeries| {
                o.method == g.method && o.pattern == g.pattern && o.accel == g.accel
            }) {
                return Err(cx.err(
                    Some(e.span()),
                    &key(&format!("series[{}]", j + 1)),
                    format!(
                        "a second series for {} {} R = {}",
                        g.method, g.pattern, g.accel
                    ),
                ));
            }
            given.push(g);
        }
        if !given
            .iter()
            .any(|g| g.method == crate::agreement::REFERENCE)
        {
            return Err(cx.err(
                Some(s.code.span()),
                &key("series"),
                format!("subject `{code}` has no series with method = \"reference\""),
            ));
        }
        Source::Series(given)
    };
    Ok(Subject {
        code,
        description: s.description.clone(),
        source,
        seeds,
        geometry: s
            .geometry
            .as_ref()
            .map(|g| g.get_ref().clone())
            .unwrap_or_default(),
    })
}

fn series(cx: &Ctx, key: &str, e: &Spanned<SeriesEntry>) -> Result<GivenSeries, PlanError> {
    let s = e.get_ref();
    let bad = |k: &str, m: String| cx.err(Some(e.span()), &format!("{key}.{k}"), m);
    let is_reference = s.method == crate::agreement::REFERENCE;
    if !is_reference {
        match s.method.strip_prefix("external:") {
            Some(l)
                if !l.is_empty()
                    && l.chars()
                        .all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c)) => {}
            _ => {
                if recon::by_id(&s.method).is_err() {
                    return Err(bad(
                        "method",
                        format!(
                            "`{}`: `reference`, `external:<label>` or a method identifier",
                            s.method
                        ),
                    ));
                }
            }
        }
    }
    let pattern = s
        .pattern
        .clone()
        .unwrap_or_else(|| if is_reference { "full" } else { "" }.into());
    Pattern::from_id(&pattern).map_err(|e| bad("pattern", e.to_string()))?;
    let accel = s.accel.unwrap_or(if is_reference { 1.0 } else { f64::NAN });
    if !(accel.is_finite() && accel >= 1.0) {
        return Err(bad(
            "accel",
            "expected the nominal acceleration R ≥ 1".into(),
        ));
    }
    let accel_effective = s.accel_effective.unwrap_or(accel);
    if !(accel_effective.is_finite() && accel_effective >= 1.0) {
        return Err(bad("accel_effective", "expected R ≥ 1".into()));
    }
    let path = cx.base.join(&s.path);
    if !path.exists() {
        return Err(bad("path", format!("{} does not exist", path.display())));
    }
    Ok(GivenSeries {
        method: s.method.clone(),
        pattern,
        accel,
        accel_effective,
        path,
        select: s.select.clone(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_are_one_based() {
        assert_eq!(line_of("a\nb\nc", 0), 1);
        assert_eq!(line_of("a\nb\nc", 2), 2);
        assert_eq!(line_of("a\nb\nc", 4), 3);
    }
}
