//! Machine-readable results: one row per subject × method × pattern × R, as JSON and CSV
//! with the same columns (DESIGN.md vocabulary). Arrays in CSV cells are JSON text.

use std::collections::BTreeMap;
use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::acceptance::Criterion;
use crate::agreement::{self, Acceptance, AgreementRow};
use crate::caution::CAUTION;
use crate::fidelity::Fidelity;
use crate::io::{write_atomic, IoError};
pub use crate::measure::Numbers;
use crate::sampling::DensityLaw;
use crate::seed_jitter::SeedJitter;
use crate::segment::{FrameExtent, GuardEvent, Seed};

/// Whether a run produced numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RunStatus {
    /// Reconstructed, segmented and measured.
    Ok,
    /// Something failed; `message` says what.
    Failed,
}

/// Truth of a synthetic subject: disc-sum numbers of the exact areas, plus the exact
/// continuous volumes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Truth {
    /// Method of discs applied to the true slab-averaged areas.
    #[serde(flatten)]
    pub numbers: Numbers,
    /// True slab-averaged blood-pool area `[slice][frame]`, mm².
    pub slice_areas_mm2: Vec<Vec<f64>>,
    /// Exact continuous cavity volume per frame, ml.
    pub continuous_volume_curve_ml: Vec<f64>,
}

/// One result row.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunRow {
    /// Subject code (never a patient name).
    pub subject: String,
    /// Method identifier.
    pub method: String,
    /// Pattern identifier.
    pub pattern: String,
    /// Nominal acceleration.
    pub accel_nominal: f64,
    /// Effective acceleration (all lines ÷ acquired lines).
    pub accel_effective: f64,
    /// `ok` or `failed`.
    pub status: RunStatus,
    /// Clinical numbers (absent when failed).
    #[serde(flatten)]
    pub numbers: Option<Numbers>,
    /// Blood-pool convention in words.
    pub blood_pool_convention: String,
    /// Which slices count (basal rule and apex stop), in words.
    #[serde(default)]
    pub slice_rule: String,
    /// What went wrong, or where the tracker stopped propagation on purpose.
    pub messages: Vec<String>,
    /// Blood-pool area per slice and frame, mm² (absent when failed).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub slice_areas_mm2: Option<Vec<Vec<f64>>>,
    /// Analytic truth, for synthetic subjects.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub truth: Option<Truth>,
    /// Spread of the numbers when the seeds are moved (the measurement's repeatability
    /// floor), when asked for.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seed_jitter: Option<SeedJitter>,
    /// Every slice and frame where the leak guard cut a region (empty: it never acted).
    #[serde(default)]
    pub leak_guard: Vec<GuardEvent>,
    /// Per frame, the first and last slice counted and where the basal rule or the apex stop
    /// acted (empty when failed).
    #[serde(default)]
    pub slices_counted: Vec<FrameExtent>,
    /// Image quality and mask overlap against the reference reconstruction of the same
    /// subject (methods other than the reference, where both were measured).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fidelity: Option<Fidelity>,
    /// Method parameters used (name → value).
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub parameters: BTreeMap<String, f64>,
    /// The LV seeds the series was segmented from.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub seeds: Vec<Seed>,
    /// How the k-space was sampled and the coils processed (runs reconstructed here).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub acquisition: Option<AcquisitionRecord>,
}

/// Sampling and coil processing of one run, for provenance.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AcquisitionRecord {
    /// Width of the fully sampled centre, in lines (0 for `full`).
    pub acs_lines: usize,
    /// Density law of `variable-density`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub density_law: Option<DensityLaw>,
    /// Lines the `kt-lattice` moves per frame.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kt_shear: Option<usize>,
    /// Seed of the pseudo-random line choice (`variable-density`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rng_seed: Option<u64>,
    /// Receiver coils in the data.
    pub coils: usize,
    /// Virtual coils after compression, when compressed.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub virtual_coils: Option<usize>,
    /// Whether noise pre-whitening was applied.
    pub prewhitened: bool,
}

/// Provenance of one input.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputHash {
    /// What it is (subject code, file role).
    pub label: String,
    /// SHA-256 of its bytes, or of its defining parameters for generated data.
    pub sha256: String,
}

/// The whole results file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResultsFile {
    /// Always `cinegauge`.
    pub tool: String,
    /// Tool version.
    pub version: String,
    /// The caution.
    pub caution: String,
    /// Study code.
    pub study: String,
    /// Inputs and their hashes.
    pub inputs: Vec<InputHash>,
    /// One row per run.
    pub runs: Vec<RunRow>,
    /// Published normal ranges quoted for context, where an output carries them.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub normal_ranges: Option<crate::normals::NormalRanges>,
    /// Agreement of each method at each acceleration with the reference, per quantity.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub agreement: Vec<AgreementRow>,
    /// Verdicts against the declared acceptance criteria.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub acceptance: Option<Acceptance>,
    /// Units of the plan left out of a partial gathering (empty: the study is complete).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub missing_units: Vec<String>,
}

impl ResultsFile {
    /// Compares every method at every acceleration with the reference across subjects and
    /// judges it against `criteria` (nothing to compare: left empty).
    pub fn compare(&mut self, criteria: &[Criterion]) {
        self.agreement = agreement::agreement_rows(&self.runs, criteria);
        if !self.agreement.is_empty() {
            self.acceptance = Some(agreement::acceptance(&self.runs, &self.agreement, criteria));
        }
    }

    /// A results file stamped with this tool's name, version and the caution.
    pub fn new(study: &str, inputs: Vec<InputHash>, runs: Vec<RunRow>) -> Self {
        ResultsFile {
            tool: "cinegauge".into(),
            version: env!("CARGO_PKG_VERSION").into(),
            caution: CAUTION.into(),
            study: study.into(),
            inputs,
            runs,
            normal_ranges: None,
            agreement: Vec::new(),
            acceptance: None,
            missing_units: Vec::new(),
        }
    }

    /// Writes `<stem>.json` and `<stem>.csv` into `dir`.
    ///
    /// # Errors
    /// [`IoError`] naming the file.
    pub fn write(&self, dir: &Path, stem: &str) -> Result<(), IoError> {
        let json = serde_json::to_string_pretty(self).expect("results serialise");
        write_atomic(
            &dir.join(format!("{stem}.json")),
            format!("{json}\n").as_bytes(),
        )?;
        write_atomic(&dir.join(format!("{stem}.csv")), &self.to_csv())
    }

    /// Reads a results file.
    ///
    /// # Errors
    /// [`IoError`] naming the file and the JSON problem.
    pub fn read(path: &Path) -> Result<Self, IoError> {
        let text =
            std::fs::read_to_string(path).map_err(|e| IoError::file(path, "cannot read", e))?;
        crate::json::parse(&text)
            .map_err(|e| IoError::content(path, format!("not a cinegauge results file: {e}")))
    }

    /// CSV text: a leading `#` line with the caution, a header, one line per run.
    pub fn to_csv(&self) -> Vec<u8> {
        let mut w = csv::WriterBuilder::new().from_writer(Vec::new());
        let header = [
            "subject",
            "method",
            "pattern",
            "accel_nominal",
            "accel_effective",
            "status",
            "edv_ml",
            "esv_ml",
            "sv_ml",
            "ef_pct",
            "ed_frame",
            "es_frame",
            "heart_rate_bpm",
            "peak_ejection_rate_ml_s",
            "peak_filling_rate_ml_s",
            "volume_curve_ml",
            "blood_pool_convention",
            "slice_rule",
            "slice_areas_mm2",
            "truth_edv_ml",
            "truth_esv_ml",
            "truth_sv_ml",
            "truth_ef_pct",
            "edv_jitter_max_change_ml",
            "esv_jitter_max_change_ml",
            "ef_jitter_max_change_pp",
            "leak_guard_slice_frame",
            "counted_slices_per_frame",
            "messages",
        ];
        w.write_record(header).expect("in-memory write");
        let opt = |v: Option<f64>| v.map(|x| x.to_string()).unwrap_or_default();
        for r in &self.runs {
            let n = r.numbers.as_ref();
            let t = r.truth.as_ref().map(|t| &t.numbers);
            let j = r.seed_jitter.as_ref();
            let rec = vec![
                r.subject.clone(),
                r.method.clone(),
                r.pattern.clone(),
                r.accel_nominal.to_string(),
                r.accel_effective.to_string(),
                match r.status {
                    RunStatus::Ok => "ok".into(),
                    RunStatus::Failed => "failed".into(),
                },
                opt(n.map(|n| n.edv_ml)),
                opt(n.map(|n| n.esv_ml)),
                opt(n.map(|n| n.sv_ml)),
                opt(n.map(|n| n.ef_pct)),
                n.map(|n| n.ed_frame.to_string()).unwrap_or_default(),
                n.map(|n| n.es_frame.to_string()).unwrap_or_default(),
                opt(n.and_then(|n| n.heart_rate_bpm)),
                opt(n.and_then(|n| n.peak_ejection_rate_ml_s)),
                opt(n.and_then(|n| n.peak_filling_rate_ml_s)),
                n.map(|n| serde_json::to_string(&n.volume_curve_ml).expect("numbers"))
                    .unwrap_or_default(),
                r.blood_pool_convention.clone(),
                r.slice_rule.clone(),
                r.slice_areas_mm2
                    .as_ref()
                    .map(|a| serde_json::to_string(a).expect("numbers"))
                    .unwrap_or_default(),
                opt(t.map(|t| t.edv_ml)),
                opt(t.map(|t| t.esv_ml)),
                opt(t.map(|t| t.sv_ml)),
                opt(t.map(|t| t.ef_pct)),
                opt(j.and_then(|j| j.edv_ml.as_ref()).map(|s| s.max_change)),
                opt(j.and_then(|j| j.esv_ml.as_ref()).map(|s| s.max_change)),
                opt(j.and_then(|j| j.ef_pct.as_ref()).map(|s| s.max_change)),
                serde_json::to_string(
                    &r.leak_guard
                        .iter()
                        .map(|e| [e.slice, e.frame])
                        .collect::<Vec<_>>(),
                )
                .expect("numbers"),
                serde_json::to_string(
                    &r.slices_counted
                        .iter()
                        .map(|e| e.slices)
                        .collect::<Vec<_>>(),
                )
                .expect("numbers"),
                r.messages.join(" | "),
            ];
            w.write_record(rec).expect("in-memory write");
        }
        let mut out = format!("# {CAUTION}\n").into_bytes();
        out.extend(w.into_inner().expect("in-memory writer"));
        out
    }
}
