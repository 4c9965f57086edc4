//! Paired comparisons: the paired t-test, the Wilcoxon signed-rank test and equivalence by
//! two one-sided tests (Schuirmann 1987, J Pharmacokinet Biopharm 15:657).

use serde::Serialize;

use super::bland_altman::Estimate;
use super::dist::{t_quantile, t_sf, t_two_sided_p, z_sf};
use super::{check_pairs, mean, variance, StatsError};

/// Paired t-test of `a − b` against 0.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PairedT {
    /// t statistic.
    pub t: f64,
    /// Degrees of freedom (n − 1).
    pub df: f64,
    /// Two-sided p-value.
    pub p_value: f64,
    /// Mean difference and its confidence interval.
    pub mean_diff: Estimate,
}

fn diffs(what: &'static str, a: &[f64], b: &[f64], min: usize) -> Result<Vec<f64>, StatsError> {
    check_pairs(what, a, b, min)?;
    Ok(a.iter().zip(b).map(|(x, y)| x - y).collect())
}

fn mean_and_se(what: &'static str, d: &[f64]) -> Result<(f64, f64), StatsError> {
    let se = (variance(d) / d.len() as f64).sqrt();
    if se == 0.0 {
        return Err(StatsError::ZeroVariance {
            what,
            detail: "the differences",
        });
    }
    Ok((mean(d), se))
}

/// Paired t-test (Student 1908; any statistics text).
///
/// # Errors
/// Fewer than 3 pairs, unequal lengths, non-finite values, or constant differences.
pub fn paired_t(a: &[f64], b: &[f64], confidence: f64) -> Result<PairedT, StatsError> {
    const WHAT: &str = "paired t-test";
    let d = diffs(WHAT, a, b, 3)?;
    let (m, se) = mean_and_se(WHAT, &d)?;
    let df = d.len() as f64 - 1.0;
    let t = m / se;
    let q = t_quantile(0.5 + confidence / 2.0, df);
    Ok(PairedT {
        t,
        df,
        p_value: t_two_sided_p(t, df),
        mean_diff: Estimate {
            value: m,
            ci_lower: m - q * se,
            ci_upper: m + q * se,
        },
    })
}

/// Wilcoxon signed-rank test of `a − b` (two-sided).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SignedRank {
    /// The smaller of the positive and negative rank sums.
    pub statistic: f64,
    /// Non-zero differences ranked.
    pub n: usize,
    /// Two-sided p-value.
    pub p_value: f64,
    /// Whether the p-value is exact (no ties or zeros, n ≤ 50) or the normal approximation
    /// with the tie correction (no continuity correction), as SciPy's default does.
    pub exact: bool,
}

/// Wilcoxon signed-rank test (Wilcoxon 1945): zero differences dropped, tied magnitudes
/// given their mean rank.
///
/// # Errors
/// Fewer than 3 pairs, unequal lengths, non-finite values, or every difference zero.
pub fn wilcoxon(a: &[f64], b: &[f64]) -> Result<SignedRank, StatsError> {
    const WHAT: &str = "Wilcoxon signed-rank test";
    let all = diffs(WHAT, a, b, 3)?;
    let d: Vec<f64> = all.iter().copied().filter(|x| *x != 0.0).collect();
    let zeros = all.len() - d.len();
    let n = d.len();
    if n == 0 {
        return Err(StatsError::ZeroVariance {
            what: WHAT,
            detail: "the differences (all zero)",
        });
    }
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&i, &j| d[i].abs().total_cmp(&d[j].abs()));
    let mut ranks = vec![0.0; n];
    let mut ties = Vec::new();
    let mut i = 0;
    while i < n {
        let mut j = i;
        while j + 1 < n && d[order[j + 1]].abs() == d[order[i]].abs() {
            j += 1;
        }
        let r = 0.5 * ((i + 1) + (j + 1)) as f64;
        for &o in &order[i..=j] {
            ranks[o] = r;
        }
        if j > i {
            ties.push((j - i + 1) as f64);
        }
        i = j + 1;
    }
    let plus: f64 = (0..n).filter(|&k| d[k] > 0.0).map(|k| ranks[k]).sum();
    let minus: f64 = (0..n).filter(|&k| d[k] < 0.0).map(|k| ranks[k]).sum();
    let stat = plus.min(minus);
    let nf = n as f64;
    if n <= 50 && ties.is_empty() && zeros == 0 {
        // Exact null distribution of the rank sum: counts of subsets of {1..n} by sum.
        let max = n * (n + 1) / 2;
        let mut counts = vec![0f64; max + 1];
        counts[0] = 1.0;
        for r in 1..=n {
            for s in (r..=max).rev() {
                counts[s] += counts[s - r];
            }
        }
        let total = 2f64.powi(n as i32);
        let below: f64 = counts[..=(stat as usize)].iter().sum();
        return Ok(SignedRank {
            statistic: stat,
            n,
            p_value: (2.0 * below / total).min(1.0),
            exact: true,
        });
    }
    let mean = nf * (nf + 1.0) / 4.0;
    let var = nf * (nf + 1.0) * (2.0 * nf + 1.0) / 24.0
        - ties.iter().map(|t| t * t * t - t).sum::<f64>() / 48.0;
    let z = (stat - mean) / var.sqrt();
    Ok(SignedRank {
        statistic: stat,
        n,
        p_value: (2.0 * z_sf(z.abs())).min(1.0),
        exact: false,
    })
}

/// Equivalence of `a` and `b` within ±`margin` by two one-sided paired t-tests.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Equivalence {
    /// The margin.
    pub margin: f64,
    /// p-value: the larger of the two one-sided tests.
    pub p_value: f64,
    /// The (1 − 2α) interval of the mean difference (90 % for α = 0.05).
    pub interval: Estimate,
    /// Whether equivalence is shown at `alpha` (the interval lies inside ±margin).
    pub equivalent: bool,
}

/// Two one-sided tests (Schuirmann 1987) of H0: |mean(a − b)| ≥ margin at level `alpha`.
///
/// # Errors
/// Fewer than 3 pairs, unequal lengths, non-finite values, constant differences, or a
/// margin that is not positive.
pub fn tost(a: &[f64], b: &[f64], margin: f64, alpha: f64) -> Result<Equivalence, StatsError> {
    const WHAT: &str = "equivalence test";
    let d = diffs(WHAT, a, b, 3)?;
    if !(margin.is_finite() && margin > 0.0) {
        return Err(StatsError::Parameter {
            what: WHAT,
            detail: format!("the margin must be a positive number, found {margin}"),
        });
    }
    let (m, se) = mean_and_se(WHAT, &d)?;
    let df = d.len() as f64 - 1.0;
    let p_low = t_sf((m + margin) / se, df);
    let p_high = t_sf(-(m - margin) / se, df);
    let p = p_low.max(p_high);
    let q = t_quantile(1.0 - alpha, df);
    Ok(Equivalence {
        margin,
        p_value: p,
        interval: Estimate {
            value: m,
            ci_lower: m - q * se,
            ci_upper: m + q * se,
        },
        equivalent: p < alpha,
    })
}
