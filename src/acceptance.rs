//! Acceptance criteria declared before a study, and how one method at one acceleration is
//! judged against them.
//!
//! Defaults (common practice in CMR protocol evaluation, to be replaced by the study's own
//! declared margins): EF bias within ±2 pp and both 95 % limits of agreement within ±5 pp
//! (of the order of the interstudy repeatability of CMR EF); EDV and ESV bias within ±5 % of
//! the pair's mean; ICC(A,1) of EF at least 0.9 (the level usually called excellent
//! reliability).

use serde::{Deserialize, Serialize};

/// What a criterion bounds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Measure {
    /// |bias| at most the limit.
    AbsBias,
    /// Both limits of agreement within ±limit.
    LimitsWithin,
    /// ICC(A,1) at least the limit.
    IccAtLeast,
    /// Lin's CCC at least the limit.
    CccAtLeast,
}

/// One acceptance criterion.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Criterion {
    /// Quantity: `ef_pct`, `edv_ml`, `esv_ml` or `sv_ml`.
    pub quantity: String,
    /// Unit of the differences: `pp` (EF), `ml`, or `pct` (percent of the pair's mean).
    pub unit: String,
    /// What is bounded.
    pub measure: Measure,
    /// The bound.
    pub limit: f64,
}

impl Criterion {
    fn new(quantity: &str, unit: &str, measure: Measure, limit: f64) -> Self {
        Criterion {
            quantity: quantity.into(),
            unit: unit.into(),
            measure,
            limit,
        }
    }

    /// The criterion in plain words, e.g. `EF bias within ±2 pp`.
    pub fn describe(&self) -> String {
        let q = label(&self.quantity);
        let u = unit_text(&self.unit);
        match self.measure {
            Measure::AbsBias => format!("{q} bias within ±{}{u}", plain_number(self.limit)),
            Measure::LimitsWithin => {
                format!("{q} 95 % limits within ±{}{u}", plain_number(self.limit))
            }
            Measure::IccAtLeast => format!("{q} ICC(A,1) at least {}", plain_number(self.limit)),
            Measure::CccAtLeast => format!("{q} CCC at least {}", plain_number(self.limit)),
        }
    }
}

/// Quantities agreement is computed for.
pub const QUANTITIES: [&str; 4] = ["ef_pct", "edv_ml", "esv_ml", "sv_ml"];

/// Display name of a quantity key.
pub fn label(quantity: &str) -> &str {
    match quantity {
        "ef_pct" => "EF",
        "edv_ml" => "EDV",
        "esv_ml" => "ESV",
        "sv_ml" => "SV",
        other => other,
    }
}

fn unit_text(unit: &str) -> &'static str {
    match unit {
        "pp" => " pp",
        "ml" => " ml",
        "pct" => " %",
        _ => "",
    }
}

/// A number without trailing zeros (`2`, `2.5`, `0.125`), at most three decimals.
pub fn plain_number(v: f64) -> String {
    let s = format!("{v:.3}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// The default criteria (see the module text for their rationale).
pub fn default_criteria() -> Vec<Criterion> {
    vec![
        Criterion::new("ef_pct", "pp", Measure::AbsBias, 2.0),
        Criterion::new("ef_pct", "pp", Measure::LimitsWithin, 5.0),
        Criterion::new("edv_ml", "pct", Measure::AbsBias, 5.0),
        Criterion::new("esv_ml", "pct", Measure::AbsBias, 5.0),
        Criterion::new("ef_pct", "pp", Measure::IccAtLeast, 0.9),
    ]
}

/// The outcome of one criterion for one method at one acceleration.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Check {
    /// The criterion in words.
    pub criterion: String,
    /// The value it was judged on (`None`: not computable, which fails).
    pub value: Option<f64>,
    /// Passed.
    pub pass: bool,
}

/// Overall outcome.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Outcome {
    /// Every criterion met on every subject's run.
    Pass,
    /// A criterion missed, or a run failed.
    Fail,
    /// Fewer than 3 paired subjects.
    TooFewSubjects,
}

impl Outcome {
    /// In plain words.
    pub fn describe(self) -> &'static str {
        match self {
            Outcome::Pass => "pass",
            Outcome::Fail => "fail",
            Outcome::TooFewSubjects => "too few subjects",
        }
    }
}
