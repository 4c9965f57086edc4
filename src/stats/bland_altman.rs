//! Bland–Altman limits of agreement (Bland & Altman 1986, Lancet i:307; 1999, Stat Methods
//! Med Res 8:135): bias, SD of the differences, 95 % limits, their approximate confidence
//! intervals, and a check for proportional bias.

use serde::Serialize;

use super::dist::{t_quantile, t_two_sided_p, z_quantile};
use super::{check_pairs, mean, variance, StatsError};

/// Options of the analysis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Options {
    /// Differences as a percentage of the pair's mean (`100·(a − b)/((a + b)/2)`), for
    /// quantities whose spread grows with their size.
    pub percentage: bool,
    /// Coverage of the limits (0.95: mean ± 1.96 SD).
    pub coverage: f64,
    /// Confidence level of the intervals.
    pub confidence: f64,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            percentage: false,
            coverage: 0.95,
            confidence: 0.95,
        }
    }
}

/// A value with its confidence interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Estimate {
    /// Point estimate.
    pub value: f64,
    /// Lower confidence bound.
    pub ci_lower: f64,
    /// Upper confidence bound.
    pub ci_upper: f64,
}

/// Least-squares regression of the difference on the mean.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Proportional {
    /// Slope (change of the difference per unit of the mean).
    pub slope: f64,
    /// Intercept.
    pub intercept: f64,
    /// Standard error of the slope.
    pub slope_se: f64,
    /// Two-sided p-value of slope = 0 (t with n − 2 degrees of freedom).
    pub p_value: f64,
}

/// The Bland–Altman analysis of paired measurements.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Agreement {
    /// Pairs.
    pub n: usize,
    /// Mean difference `a − b`, with the t-interval of a mean.
    pub bias: Estimate,
    /// SD of the differences.
    pub sd_diff: f64,
    /// Lower limit of agreement, with its approximate interval.
    pub loa_lower: Estimate,
    /// Upper limit of agreement, with its approximate interval.
    pub loa_upper: Estimate,
    /// Regression of the difference on the mean (proportional bias); `None` when every
    /// pair has the same mean.
    pub proportional: Option<Proportional>,
    /// Differences were percentages of the pair's mean.
    pub percentage: bool,
}

/// Bland–Altman analysis of `a − b`.
///
/// The bias interval is the t-interval of a mean (`s/√n`, t with n − 1 df). Each limit
/// `d̄ ± z·s` has variance `s²·(1/n + z²/(2(n − 1)))` (Bland & Altman 1999, section 2.2; the
/// 1986 paper rounds it to `3s²/n`), and its interval uses the same t quantile.
///
/// # Errors
/// Fewer than 3 pairs, unequal lengths, non-finite values, a zero mean in percentage mode, or
/// differences without spread.
pub fn bland_altman(a: &[f64], b: &[f64], opts: Options) -> Result<Agreement, StatsError> {
    const WHAT: &str = "Bland–Altman";
    check_pairs(WHAT, a, b, 3)?;
    let means: Vec<f64> = a.iter().zip(b).map(|(x, y)| 0.5 * (x + y)).collect();
    let diffs: Vec<f64> = if opts.percentage {
        if means.contains(&0.0) {
            return Err(StatsError::ZeroVariance {
                what: WHAT,
                detail: "a pair's mean (percentage differences need a non-zero mean)",
            });
        }
        a.iter()
            .zip(b)
            .zip(&means)
            .map(|((x, y), m)| 100.0 * (x - y) / m)
            .collect()
    } else {
        a.iter().zip(b).map(|(x, y)| x - y).collect()
    };
    let n = diffs.len();
    let nf = n as f64;
    let d = mean(&diffs);
    let s = variance(&diffs).sqrt();
    // Zero spread, allowing for rounding in the differences themselves.
    let scale = diffs.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if s <= 1e-12 * scale || s == 0.0 {
        return Err(StatsError::ZeroVariance {
            what: WHAT,
            detail: "the differences",
        });
    }
    let z = z_quantile(0.5 + opts.coverage / 2.0);
    let t = t_quantile(0.5 + opts.confidence / 2.0, nf - 1.0);
    let se_bias = s / nf.sqrt();
    let se_limit = s * (1.0 / nf + z * z / (2.0 * (nf - 1.0))).sqrt();
    let around = |value: f64, se: f64| Estimate {
        value,
        ci_lower: value - t * se,
        ci_upper: value + t * se,
    };
    Ok(Agreement {
        n,
        bias: around(d, se_bias),
        sd_diff: s,
        loa_lower: around(d - z * s, se_limit),
        loa_upper: around(d + z * s, se_limit),
        proportional: regression(&means, &diffs),
        percentage: opts.percentage,
    })
}

/// Ordinary least squares of `y` on `x`; `None` without spread in `x` or with fewer than 3
/// points.
pub fn regression(x: &[f64], y: &[f64]) -> Option<Proportional> {
    let n = x.len();
    if n < 3 {
        return None;
    }
    let (mx, my) = (mean(x), mean(y));
    let sxx: f64 = x.iter().map(|v| (v - mx).powi(2)).sum();
    if sxx == 0.0 {
        return None;
    }
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let rss: f64 = x
        .iter()
        .zip(y)
        .map(|(a, b)| (b - intercept - slope * a).powi(2))
        .sum();
    let df = n as f64 - 2.0;
    let slope_se = (rss / df / sxx).sqrt();
    let p_value = if slope_se > 0.0 {
        t_two_sided_p(slope / slope_se, df)
    } else {
        0.0
    };
    Some(Proportional {
        slope,
        intercept,
        slope_se,
        p_value,
    })
}
