//! Agreement of columns of a user's table (for example readers' measurements from a
//! spreadsheet): with two columns, Bland–Altman, concordance, correlation and paired tests,
//! and against a margin, equivalence and the subjects a confirmatory study needs; with two or
//! more, the six ICC forms.

use serde::Serialize;

use crate::caution::CAUTION;
use crate::stats::bland_altman::{bland_altman, Agreement, Estimate, Options};
use crate::stats::concordance::{lin_ccc, pearson};
use crate::stats::icc::{icc_all, Icc};
use crate::stats::paired::{paired_t, tost, wilcoxon, Equivalence, PairedT, SignedRank};
use crate::stats::sample_size::subjects_for_limits;
use crate::stats::StatsError;

/// A declared margin for the difference of the first two columns.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Margin {
    /// What it is for (as the user named it, e.g. `ef_pct`).
    pub label: String,
    /// The margin, in the columns' unit.
    pub value: f64,
}

/// Pairwise results (first column minus second).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Pairwise {
    /// Bland–Altman.
    pub bland_altman: Agreement,
    /// Lin's CCC.
    pub ccc: Estimate,
    /// Pearson's r (`None` with fewer than 4 pairs).
    pub pearson_r: Option<Estimate>,
    /// Paired t-test.
    pub paired_t: PairedT,
    /// Wilcoxon signed-rank test.
    pub wilcoxon: SignedRank,
    /// Against the margin, when one is given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub equivalence: Option<Equivalence>,
    /// Both 95 % limits of agreement within ±margin.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub limits_within_margin: Option<bool>,
    /// Subjects a confirmatory study needs for the limits to stay within the margin with 95 %
    /// confidence, at this table's bias and SD (`None`: not reachable).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub subjects_needed: Option<Option<usize>>,
}

/// Everything `agreement` reports on a table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TableAgreement {
    /// The caution.
    pub caution: &'static str,
    /// Columns compared.
    pub columns: Vec<String>,
    /// Rows.
    pub n: usize,
    /// The margin, if given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub margin: Option<Margin>,
    /// With two columns.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pairwise: Option<Pairwise>,
    /// The six ICC forms.
    pub icc: Vec<Icc>,
}

/// Analyses `columns` (names and values, equal lengths).
///
/// # Errors
/// A [`StatsError`] naming what cannot be computed and why.
pub fn analyse(
    columns: &[(String, Vec<f64>)],
    margin: Option<Margin>,
    percentage: bool,
) -> Result<TableAgreement, StatsError> {
    let n = columns.first().map_or(0, |c| c.1.len());
    let pairwise = match columns {
        [(_, a), (_, b)] => {
            let ba = bland_altman(
                a,
                b,
                Options {
                    percentage,
                    ..Options::default()
                },
            )?;
            let equivalence = margin
                .as_ref()
                .map(|m| tost(a, b, m.value, 0.05))
                .transpose()?;
            Some(Pairwise {
                bland_altman: ba,
                ccc: lin_ccc(a, b, 0.95)?,
                pearson_r: pearson(a, b, 0.95).ok(),
                paired_t: paired_t(a, b, 0.95)?,
                wilcoxon: wilcoxon(a, b)?,
                equivalence,
                limits_within_margin: margin
                    .as_ref()
                    .map(|m| ba.loa_lower.value.abs().max(ba.loa_upper.value.abs()) <= m.value),
                subjects_needed: margin
                    .as_ref()
                    .map(|m| subjects_for_limits(ba.bias.value, ba.sd_diff, m.value, 0.95, 0.95)),
            })
        }
        _ => None,
    };
    let ratings: Vec<Vec<f64>> = (0..n)
        .map(|i| columns.iter().map(|(_, v)| v[i]).collect())
        .collect();
    Ok(TableAgreement {
        caution: CAUTION,
        columns: columns.iter().map(|(n, _)| n.clone()).collect(),
        n,
        margin,
        pairwise,
        icc: icc_all(&ratings, 0.95)?,
    })
}

/// A p-value for reading: four decimals, or `< 0.0001`.
fn p_text(p: f64) -> String {
    if p < 1e-4 {
        "< 0.0001".into()
    } else {
        format!("= {p:.4}")
    }
}

fn ci(e: &Estimate, digits: usize) -> String {
    format!(
        "{:.d$} (95 % CI {:.d$} to {:.d$})",
        e.value,
        e.ci_lower,
        e.ci_upper,
        d = digits
    )
}

impl TableAgreement {
    /// A readable text table.
    pub fn to_text(&self) -> String {
        let mut out = format!("{} rows; columns {}\n", self.n, self.columns.join(", "));
        if let Some(p) = &self.pairwise {
            let ba = &p.bland_altman;
            out += &format!(
                "\ndifference {} − {}{} (Bland–Altman)\n  bias          {}\n  SD of diff.   {:.3}\n  lower limit   {}\n  upper limit   {}\n",
                self.columns[0],
                self.columns[1],
                if ba.percentage { ", % of the pair's mean" } else { "" },
                ci(&ba.bias, 3),
                ba.sd_diff,
                ci(&ba.loa_lower, 3),
                ci(&ba.loa_upper, 3)
            );
            if let Some(r) = &ba.proportional {
                out += &format!(
                    "  difference on mean: slope {:.4} (p {}){}\n",
                    r.slope,
                    p_text(r.p_value),
                    if r.p_value < 0.05 {
                        ": the difference changes with the size of the measurement"
                    } else {
                        ""
                    }
                );
            }
            out += &format!("\nLin's CCC       {}\n", ci(&p.ccc, 3));
            if let Some(r) = &p.pearson_r {
                out += &format!("Pearson r       {}\n", ci(r, 3));
            }
            out += &format!(
                "paired t-test   t = {:.3}, df = {}, p {}\nWilcoxon        W = {}, p {} ({})\n",
                p.paired_t.t,
                p.paired_t.df,
                p_text(p.paired_t.p_value),
                p.wilcoxon.statistic,
                p_text(p.wilcoxon.p_value),
                if p.wilcoxon.exact {
                    "exact"
                } else {
                    "normal approximation"
                }
            );
            if let (Some(m), Some(e)) = (&self.margin, &p.equivalence) {
                out += &format!(
                    "\nmargin {} = ±{}\n  equivalence (two one-sided tests): p {}, 90 % CI of the bias {:.3} to {:.3}: {}\n",
                    m.label,
                    m.value,
                    p_text(e.p_value),
                    e.interval.ci_lower,
                    e.interval.ci_upper,
                    if e.equivalent { "equivalent within the margin" } else { "equivalence not shown" }
                );
                if let Some(w) = p.limits_within_margin {
                    out += &format!(
                        "  95 % limits of agreement {} the margin\n",
                        if w { "within" } else { "outside" }
                    );
                }
                if let Some(s) = p.subjects_needed {
                    out += &match s {
                        Some(n) => format!("  a confirmatory study needs about {n} subjects for the limits' 95 % CI to stay within the margin (Bland's approximate CI of the limits)\n"),
                        None => "  no number of subjects brings the limits within the margin at this bias and SD\n".into(),
                    };
                }
            }
        }
        out += "\nintraclass correlation (McGraw & Wong notation)\n";
        for i in &self.icc {
            let bound = |b: Option<f64>| b.map_or("not defined".to_string(), |v| format!("{v:.3}"));
            out += &format!(
                "  ICC({:3})  {:.3} (95 % CI {} to {})  {}\n",
                i.form,
                i.value,
                bound(i.ci_lower),
                bound(i.ci_upper),
                i.model
            );
        }
        out += &format!("\n{}\n", self.caution);
        out
    }
}
