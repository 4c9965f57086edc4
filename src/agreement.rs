//! The comparison stage: each method at each acceleration against the fully sampled
//! reference across subjects — agreement rows per quantity, and the verdict against the
//! declared acceptance criteria.

use serde::{Deserialize, Serialize};

use crate::acceptance::{Check, Criterion, Measure, Outcome, QUANTITIES};
use crate::fidelity::Fidelity;
use crate::measure::Numbers;
use crate::results::{RunRow, RunStatus};
use crate::stats::bland_altman::{bland_altman, Options};
use crate::stats::concordance::lin_ccc;
use crate::stats::icc::icc_all;
use crate::stats::paired::{paired_t, wilcoxon};
use crate::stats::sample_size::subjects_for_limits;
use crate::stats::temporal::{curve_error, rate_change};
use crate::stats::StatsError;

/// Method identifier of the fully sampled reference.
pub const REFERENCE: &str = "reference";

/// Agreement of one quantity for one method at one acceleration (differences are method
/// minus reference; `null` where a statistic cannot be computed, with `note` saying why).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AgreementRow {
    /// Method.
    pub method: String,
    /// Sampling pattern.
    pub pattern: String,
    /// Nominal acceleration.
    pub accel_nominal: f64,
    /// Effective acceleration.
    pub accel_effective: f64,
    /// Quantity key.
    pub quantity: String,
    /// Unit of the differences: `pp`, `ml` or `pct` (percent of the pair's mean).
    pub unit: String,
    /// Subjects paired.
    pub n: usize,
    /// Mean difference.
    pub bias: Option<f64>,
    /// Its 95 % interval.
    pub bias_ci_lower: Option<f64>,
    /// Its 95 % interval.
    pub bias_ci_upper: Option<f64>,
    /// SD of the differences.
    pub sd_diff: Option<f64>,
    /// Lower 95 % limit of agreement.
    pub loa_lower: Option<f64>,
    /// Its approximate 95 % interval.
    pub loa_lower_ci_lower: Option<f64>,
    /// Its approximate 95 % interval.
    pub loa_lower_ci_upper: Option<f64>,
    /// Upper 95 % limit of agreement.
    pub loa_upper: Option<f64>,
    /// Its approximate 95 % interval.
    pub loa_upper_ci_lower: Option<f64>,
    /// Its approximate 95 % interval.
    pub loa_upper_ci_upper: Option<f64>,
    /// p-value of the slope of difference on mean (proportional bias).
    pub proportional_bias_p: Option<f64>,
    /// ICC between method and reference.
    pub icc: Option<f64>,
    /// Its form in McGraw & Wong notation.
    pub icc_form: String,
    /// ICC 95 % interval.
    pub icc_ci_lower: Option<f64>,
    /// ICC 95 % interval.
    pub icc_ci_upper: Option<f64>,
    /// Lin's concordance correlation.
    pub ccc: Option<f64>,
    /// Paired t-test p-value.
    pub paired_t_p: Option<f64>,
    /// Wilcoxon signed-rank p-value.
    pub wilcoxon_p: Option<f64>,
    /// `pass` / `fail` against the criteria on this quantity and unit, `no criterion`, or
    /// `too few subjects`.
    pub verdict: String,
    /// Why statistics are missing, if they are.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

/// Temporal fidelity of a method at one acceleration, averaged over subjects.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Temporal {
    /// Mean RMS error of the volume–time curve (ml).
    pub curve_rms_ml: f64,
    /// Mean change of the peak ejection rate (% of the reference's).
    pub peak_ejection_rate_change_pct: Option<f64>,
    /// Mean change of the peak filling rate (% of the reference's).
    pub peak_filling_rate_change_pct: Option<f64>,
}

/// EF change against the measurement's own seed-sensitivity floor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SeedFloor {
    /// Mean over subjects of the largest EF change from moving the seeds (pp).
    pub floor_pp: f64,
    /// |EF bias| of the method (pp).
    pub abs_bias_pp: f64,
    /// The acceleration moves EF more than moving the seeds does.
    pub exceeds: bool,
}

/// The verdict for one method at one acceleration.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Verdict {
    /// Method.
    pub method: String,
    /// Pattern.
    pub pattern: String,
    /// Nominal acceleration.
    pub accel_nominal: f64,
    /// Effective acceleration.
    pub accel_effective: f64,
    /// Subjects with both runs measured.
    pub subjects: usize,
    /// Subjects whose run of this method failed (a failure fails the verdict).
    pub failed_subjects: Vec<String>,
    /// Each criterion.
    pub checks: Vec<Check>,
    /// Overall.
    pub outcome: Outcome,
    /// Temporal fidelity.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub temporal: Option<Temporal>,
    /// EF change against the seed-sensitivity floor, where the reference runs carry one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub seed_floor: Option<SeedFloor>,
    /// Image quality and mask overlap against the reference, each the mean over subjects.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fidelity: Option<Fidelity>,
    /// Subjects a confirmatory study would need for the EF limits of agreement to stay within
    /// the declared EF limits margin with 95 % confidence, at this bias and SD (Bland's
    /// approximate CI of the limits); `None` when no margin is declared, the statistics are
    /// missing, or no number of subjects would do.
    pub subjects_needed: Option<usize>,
}

/// The highest acceleration at which a method passes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HighestPassing {
    /// Method.
    pub method: String,
    /// Pattern.
    pub pattern: String,
    /// Highest nominal R that passes with every lower R tested also passing; `None` when the
    /// lowest R already fails.
    pub accel_nominal: Option<f64>,
}

/// Everything the comparison decides.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Acceptance {
    /// The criteria, as declared.
    pub criteria: Vec<Criterion>,
    /// The criteria in words.
    pub criteria_text: Vec<String>,
    /// One verdict per method and acceleration.
    pub verdicts: Vec<Verdict>,
    /// Per method and pattern.
    pub highest_passing: Vec<HighestPassing>,
}

/// A (method, pattern, R) group of runs, in the order first seen.
struct Group<'a> {
    method: &'a str,
    pattern: &'a str,
    accel_nominal: f64,
    accel_effective: f64,
    runs: Vec<&'a RunRow>,
}

fn groups(runs: &[RunRow]) -> Vec<Group<'_>> {
    let mut out: Vec<Group> = Vec::new();
    for r in runs.iter().filter(|r| r.method != REFERENCE) {
        match out.iter_mut().find(|g| {
            g.method == r.method && g.pattern == r.pattern && g.accel_nominal == r.accel_nominal
        }) {
            Some(g) => g.runs.push(r),
            None => out.push(Group {
                method: &r.method,
                pattern: &r.pattern,
                accel_nominal: r.accel_nominal,
                accel_effective: r.accel_effective,
                runs: vec![r],
            }),
        }
    }
    out
}

/// The value of a quantity key (`ef_pct`, `edv_ml`, `esv_ml`, `sv_ml`) in a run's numbers.
pub fn value(n: &Numbers, quantity: &str) -> f64 {
    match quantity {
        "ef_pct" => n.ef_pct,
        "edv_ml" => n.edv_ml,
        "esv_ml" => n.esv_ml,
        _ => n.sv_ml,
    }
}

/// Pairs of (method, reference) numbers by subject, for measured runs only.
fn pairs<'a>(g: &Group<'a>, runs: &'a [RunRow]) -> Vec<(&'a str, &'a Numbers, &'a Numbers)> {
    g.runs
        .iter()
        .filter_map(|r| {
            let m = r.numbers.as_ref()?;
            let reference = runs.iter().find(|x| {
                x.subject == r.subject && x.method == REFERENCE && x.status == RunStatus::Ok
            })?;
            Some((r.subject.as_str(), m, reference.numbers.as_ref()?))
        })
        .collect()
}

/// Agreement rows for every method and acceleration and quantity.
pub fn agreement_rows(runs: &[RunRow], criteria: &[Criterion]) -> Vec<AgreementRow> {
    let mut rows = Vec::new();
    for g in groups(runs) {
        let p = pairs(&g, runs);
        for q in QUANTITIES {
            let units: &[&str] = if q == "ef_pct" {
                &["pp"]
            } else {
                &["ml", "pct"]
            };
            for &unit in units {
                rows.push(row(&g, &p, q, unit, criteria));
            }
        }
    }
    rows
}

fn row(
    g: &Group,
    p: &[(&str, &Numbers, &Numbers)],
    quantity: &str,
    unit: &str,
    criteria: &[Criterion],
) -> AgreementRow {
    let a: Vec<f64> = p.iter().map(|(_, m, _)| value(m, quantity)).collect();
    let b: Vec<f64> = p.iter().map(|(_, _, r)| value(r, quantity)).collect();
    let opts = Options {
        percentage: unit == "pct",
        ..Options::default()
    };
    let ba = bland_altman(&a, &b, opts);
    let ratings: Vec<Vec<f64>> = a.iter().zip(&b).map(|(x, y)| vec![*x, *y]).collect();
    let icc = icc_all(&ratings, 0.95)
        .ok()
        .and_then(|all| all.into_iter().find(|i| i.form == "A,1"));
    let ccc = lin_ccc(&a, &b, 0.95).ok();
    let mut out = AgreementRow {
        method: g.method.into(),
        pattern: g.pattern.into(),
        accel_nominal: g.accel_nominal,
        accel_effective: g.accel_effective,
        quantity: quantity.into(),
        unit: unit.into(),
        n: p.len(),
        bias: None,
        bias_ci_lower: None,
        bias_ci_upper: None,
        sd_diff: None,
        loa_lower: None,
        loa_lower_ci_lower: None,
        loa_lower_ci_upper: None,
        loa_upper: None,
        loa_upper_ci_lower: None,
        loa_upper_ci_upper: None,
        proportional_bias_p: None,
        icc: icc.as_ref().map(|i| i.value),
        icc_form: "A,1".into(),
        icc_ci_lower: icc.as_ref().and_then(|i| i.ci_lower),
        icc_ci_upper: icc.as_ref().and_then(|i| i.ci_upper),
        ccc: ccc.map(|c| c.value),
        paired_t_p: paired_t(&a, &b, 0.95).ok().map(|t| t.p_value),
        wilcoxon_p: wilcoxon(&a, &b).ok().map(|w| w.p_value),
        verdict: String::new(),
        note: None,
    };
    match ba {
        Ok(ba) => {
            out.bias = Some(ba.bias.value);
            out.bias_ci_lower = Some(ba.bias.ci_lower);
            out.bias_ci_upper = Some(ba.bias.ci_upper);
            out.sd_diff = Some(ba.sd_diff);
            out.loa_lower = Some(ba.loa_lower.value);
            out.loa_lower_ci_lower = Some(ba.loa_lower.ci_lower);
            out.loa_lower_ci_upper = Some(ba.loa_lower.ci_upper);
            out.loa_upper = Some(ba.loa_upper.value);
            out.loa_upper_ci_lower = Some(ba.loa_upper.ci_lower);
            out.loa_upper_ci_upper = Some(ba.loa_upper.ci_upper);
            out.proportional_bias_p = ba.proportional.map(|r| r.p_value);
        }
        // Identical differences in every subject: the bias is exact and the limits collapse
        // onto it (perfect agreement is not a failure to compute).
        Err(StatsError::ZeroVariance { .. }) if p.len() >= 3 => {
            let d = a[0] - b[0];
            let d = if unit == "pct" {
                100.0 * d / (0.5 * (a[0] + b[0]))
            } else {
                d
            };
            for v in [
                &mut out.bias,
                &mut out.bias_ci_lower,
                &mut out.bias_ci_upper,
                &mut out.loa_lower,
                &mut out.loa_lower_ci_lower,
                &mut out.loa_lower_ci_upper,
                &mut out.loa_upper,
                &mut out.loa_upper_ci_lower,
                &mut out.loa_upper_ci_upper,
            ] {
                *v = Some(d);
            }
            out.sd_diff = Some(0.0);
            out.note = Some("the differences are the same in every subject".into());
        }
        Err(e) => out.note = Some(e.to_string()),
    }
    let mine: Vec<&Criterion> = criteria
        .iter()
        .filter(|c| c.quantity == quantity && c.unit == unit)
        .collect();
    out.verdict = if p.len() < 3 {
        Outcome::TooFewSubjects.describe().into()
    } else if mine.is_empty() {
        "no criterion".into()
    } else if mine.iter().all(|c| judge(c, &out).pass) {
        "pass".into()
    } else {
        "fail".into()
    };
    out
}

/// One criterion against one agreement row.
fn judge(c: &Criterion, row: &AgreementRow) -> Check {
    let value = match c.measure {
        Measure::AbsBias => row.bias.map(f64::abs),
        Measure::LimitsWithin => row
            .loa_lower
            .zip(row.loa_upper)
            .map(|(l, u)| l.abs().max(u.abs())),
        Measure::IccAtLeast => row.icc,
        Measure::CccAtLeast => row.ccc,
    };
    let pass = value.is_some_and(|v| match c.measure {
        Measure::AbsBias | Measure::LimitsWithin => v <= c.limit,
        Measure::IccAtLeast | Measure::CccAtLeast => v >= c.limit,
    });
    Check {
        criterion: c.describe(),
        value,
        pass,
    }
}

/// Verdicts for every method and acceleration, and the highest passing R per method.
pub fn acceptance(runs: &[RunRow], rows: &[AgreementRow], criteria: &[Criterion]) -> Acceptance {
    let floor = seed_floor_pp(runs);
    let mut verdicts = Vec::new();
    for g in groups(runs) {
        let p = pairs(&g, runs);
        let failed_subjects: Vec<String> = g
            .runs
            .iter()
            .filter(|r| r.status != RunStatus::Ok)
            .map(|r| r.subject.clone())
            .collect();
        let mine = |q: &str, u: &str| {
            rows.iter().find(|r| {
                r.method == g.method
                    && r.pattern == g.pattern
                    && r.accel_nominal == g.accel_nominal
                    && r.quantity == q
                    && r.unit == u
            })
        };
        let checks: Vec<Check> = criteria
            .iter()
            .map(|c| match mine(&c.quantity, &c.unit) {
                Some(r) => judge(c, r),
                None => Check {
                    criterion: c.describe(),
                    value: None,
                    pass: false,
                },
            })
            .collect();
        // A run that could not be measured fails the method outright.
        let outcome = if !failed_subjects.is_empty() {
            Outcome::Fail
        } else if p.len() < 3 {
            Outcome::TooFewSubjects
        } else if checks.iter().all(|c| c.pass) {
            Outcome::Pass
        } else {
            Outcome::Fail
        };
        let seed_floor =
            floor
                .zip(mine("ef_pct", "pp").and_then(|r| r.bias))
                .map(|(floor_pp, bias)| SeedFloor {
                    floor_pp,
                    abs_bias_pp: bias.abs(),
                    exceeds: bias.abs() > floor_pp,
                });
        verdicts.push(Verdict {
            method: g.method.into(),
            pattern: g.pattern.into(),
            accel_nominal: g.accel_nominal,
            accel_effective: g.accel_effective,
            subjects: p.len(),
            failed_subjects,
            checks,
            outcome,
            temporal: temporal(&p),
            seed_floor,
            fidelity: mean_fidelity(&g.runs),
            subjects_needed: subjects_needed(criteria, mine("ef_pct", "pp")),
        });
    }
    let mut highest: Vec<HighestPassing> = Vec::new();
    for v in &verdicts {
        if highest
            .iter()
            .any(|h| h.method == v.method && h.pattern == v.pattern)
        {
            continue;
        }
        let mut mine: Vec<&Verdict> = verdicts
            .iter()
            .filter(|x| x.method == v.method && x.pattern == v.pattern)
            .collect();
        mine.sort_by(|a, b| a.accel_nominal.total_cmp(&b.accel_nominal));
        let accel_nominal = mine
            .iter()
            .take_while(|x| x.outcome == Outcome::Pass)
            .last()
            .map(|x| x.accel_nominal);
        highest.push(HighestPassing {
            method: v.method.clone(),
            pattern: v.pattern.clone(),
            accel_nominal,
        });
    }
    Acceptance {
        criteria: criteria.to_vec(),
        criteria_text: criteria.iter().map(Criterion::describe).collect(),
        verdicts,
        highest_passing: highest,
    }
}

/// Subjects needed for the EF limits to stay within the EF limits criterion's margin.
fn subjects_needed(criteria: &[Criterion], ef: Option<&AgreementRow>) -> Option<usize> {
    let margin = criteria
        .iter()
        .find(|c| c.quantity == "ef_pct" && c.measure == Measure::LimitsWithin)?
        .limit;
    let row = ef?;
    subjects_for_limits(row.bias?, row.sd_diff?, margin, 0.95, 0.95)
}

/// Each fidelity figure averaged over the runs that carry it.
fn mean_fidelity(runs: &[&RunRow]) -> Option<Fidelity> {
    let all: Vec<&Fidelity> = runs.iter().filter_map(|r| r.fidelity.as_ref()).collect();
    if all.is_empty() {
        return None;
    }
    let mean = |pick: fn(&Fidelity) -> Option<f64>| {
        let v: Vec<f64> = all.iter().filter_map(|f| pick(f)).collect();
        (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
    };
    Some(Fidelity {
        nrmse: mean(|f| f.nrmse),
        psnr_db: mean(|f| f.psnr_db),
        ssim: mean(|f| Some(f.ssim)).unwrap_or_default(),
        ssim_lv: mean(|f| f.ssim_lv),
        dice_mean: mean(|f| f.dice_mean),
        dice_ed: mean(|f| f.dice_ed),
        dice_es: mean(|f| f.dice_es),
        hd95_ed_mm: mean(|f| f.hd95_ed_mm),
        hd95_es_mm: mean(|f| f.hd95_es_mm),
    })
}

/// Mean over subjects of the reference runs' largest EF change under seed jitter.
fn seed_floor_pp(runs: &[RunRow]) -> Option<f64> {
    let floors: Vec<f64> = runs
        .iter()
        .filter(|r| r.method == REFERENCE)
        .filter_map(|r| {
            r.seed_jitter
                .as_ref()?
                .ef_pct
                .as_ref()
                .map(|s| s.max_change)
        })
        .collect();
    (!floors.is_empty()).then(|| floors.iter().sum::<f64>() / floors.len() as f64)
}

fn temporal(p: &[(&str, &Numbers, &Numbers)]) -> Option<Temporal> {
    let curves: Vec<f64> = p
        .iter()
        .filter_map(|(_, m, r)| curve_error(&m.volume_curve_ml, &r.volume_curve_ml).ok())
        .map(|e| e.rms_ml)
        .collect();
    if curves.is_empty() {
        return None;
    }
    let mean_change = |pick: fn(&Numbers) -> Option<f64>| {
        let v: Vec<f64> = p
            .iter()
            .filter_map(|(_, m, r)| rate_change(pick(m)?, pick(r)?).1)
            .collect();
        (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
    };
    Some(Temporal {
        curve_rms_ml: curves.iter().sum::<f64>() / curves.len() as f64,
        peak_ejection_rate_change_pct: mean_change(|n| n.peak_ejection_rate_ml_s),
        peak_filling_rate_change_pct: mean_change(|n| n.peak_filling_rate_ml_s),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::acceptance::default_criteria;

    fn run(subject: &str, method: &str, r: f64, numbers: Option<(f64, f64)>) -> RunRow {
        RunRow {
            subject: subject.into(),
            method: method.into(),
            pattern: if method == REFERENCE {
                "full"
            } else {
                "kt-lattice"
            }
            .into(),
            accel_nominal: r,
            accel_effective: r,
            status: if numbers.is_some() {
                RunStatus::Ok
            } else {
                RunStatus::Failed
            },
            numbers: numbers.map(|(edv, ef)| Numbers {
                edv_ml: edv,
                esv_ml: edv * (1.0 - ef / 100.0),
                sv_ml: edv * ef / 100.0,
                ef_pct: ef,
                ed_frame: 0,
                es_frame: 1,
                heart_rate_bpm: None,
                peak_ejection_rate_ml_s: None,
                peak_filling_rate_ml_s: None,
                volume_curve_ml: vec![edv, edv * (1.0 - ef / 100.0)],
            }),
            blood_pool_convention: String::new(),
            slice_rule: String::new(),
            messages: Vec::new(),
            slice_areas_mm2: None,
            truth: None,
            seed_jitter: None,
            leak_guard: Vec::new(),
            slices_counted: Vec::new(),
            fidelity: None,
            parameters: Default::default(),
            seeds: Vec::new(),
            acquisition: None,
        }
    }

    /// Four subjects; at R = 4 EF moves by +1 pp ± 0.2 (passes every default criterion), at
    /// R = 8 by +3 pp (misses the ±2 pp EF bias and the ESV criterion), at R = 12 one run
    /// fails; EDV is unchanged throughout (differences without spread). The highest
    /// passing R is 4; the bias is the mean difference exactly (by definition).
    #[test]
    fn verdicts_follow_the_criteria_and_failed_runs_fail() {
        let subjects = [
            ("S1", 150.0, 60.0),
            ("S2", 140.0, 55.0),
            ("S3", 130.0, 50.0),
            ("S4", 120.0, 45.0),
        ];
        let mut runs = Vec::new();
        for (i, (s, edv, ef)) in subjects.iter().enumerate() {
            let jitter = [0.2, -0.2, 0.1, -0.1][i];
            runs.push(run(s, REFERENCE, 1.0, Some((*edv, *ef))));
            runs.push(run(s, "m", 4.0, Some((*edv, ef + 1.0 + jitter))));
            runs.push(run(s, "m", 8.0, Some((*edv, ef + 3.0 + jitter))));
            runs.push(run(
                s,
                "m",
                12.0,
                (i != 2).then_some((*edv, ef + 1.0 + jitter)),
            ));
        }
        let criteria = default_criteria();
        let rows = agreement_rows(&runs, &criteria);
        assert_eq!(rows.len(), 3 * 7);
        let ef4 = rows
            .iter()
            .find(|r| r.accel_nominal == 4.0 && r.quantity == "ef_pct")
            .unwrap();
        assert!((ef4.bias.unwrap() - 1.0).abs() < 1e-12);
        assert_eq!(ef4.verdict, "pass");
        let acc = acceptance(&runs, &rows, &criteria);
        let outcome = |r: f64| {
            acc.verdicts
                .iter()
                .find(|v| v.accel_nominal == r)
                .unwrap()
                .outcome
        };
        assert_eq!(outcome(4.0), Outcome::Pass);
        assert_eq!(outcome(8.0), Outcome::Fail);
        assert_eq!(outcome(12.0), Outcome::Fail);
        let v8 = acc
            .verdicts
            .iter()
            .find(|v| v.accel_nominal == 8.0)
            .unwrap();
        let missed: Vec<&str> = v8
            .checks
            .iter()
            .filter(|c| !c.pass)
            .map(|c| c.criterion.as_str())
            .collect();
        // EF up by 3 pp at the same EDV takes ESV down by 3 % of EDV, 5–7 % of ESV here.
        assert_eq!(missed, ["EF bias within ±2 pp", "ESV bias within ±5 %"]);
        assert_eq!(acc.highest_passing[0].accel_nominal, Some(4.0));
        let v12 = acc
            .verdicts
            .iter()
            .find(|v| v.accel_nominal == 12.0)
            .unwrap();
        assert_eq!(v12.failed_subjects, ["S3"]);
    }
}
