//! Lin's concordance correlation coefficient (Lin 1989, Biometrics 45:255) with its
//! confidence interval, and Pearson's r with the Fisher-z interval.

use serde::Serialize;

use super::bland_altman::Estimate;
use super::dist::z_quantile;
use super::{check_pairs, mean, StatsError};

/// Lin's CCC of `a` and `b` (moments with divisor n, as in Lin 1989) and its interval from
/// Lin's asymptotic variance of `atanh(ρc)` with n − 2 (Lin 1989, eq. for Ẑ; the n − 2 form
/// of the 2000 correction).
///
/// # Errors
/// Fewer than 3 pairs, unequal lengths, non-finite values, or both columns constant.
pub fn lin_ccc(a: &[f64], b: &[f64], confidence: f64) -> Result<Estimate, StatsError> {
    const WHAT: &str = "concordance correlation";
    check_pairs(WHAT, a, b, 3)?;
    let n = a.len() as f64;
    let (ma, mb) = (mean(a), mean(b));
    let sa = a.iter().map(|x| (x - ma).powi(2)).sum::<f64>() / n;
    let sb = b.iter().map(|x| (x - mb).powi(2)).sum::<f64>() / n;
    let sab = a
        .iter()
        .zip(b)
        .map(|(x, y)| (x - ma) * (y - mb))
        .sum::<f64>()
        / n;
    if sa == 0.0 || sb == 0.0 {
        return Err(StatsError::ZeroVariance {
            what: WHAT,
            detail: "a column",
        });
    }
    let rc = 2.0 * sab / (sa + sb + (ma - mb).powi(2));
    let r = sab / (sa * sb).sqrt();
    let z = z_quantile(0.5 + confidence / 2.0);
    if (1.0 - rc.abs()) < 1e-12 || r.abs() < 1e-12 {
        return Ok(Estimate {
            value: rc,
            ci_lower: rc,
            ci_upper: rc,
        });
    }
    let u2 = (ma - mb).powi(2) / (sa * sb).sqrt();
    let one = 1.0 - rc * rc;
    let var = ((1.0 - r * r) * rc * rc / (one * r * r)
        + 2.0 * rc.powi(3) * (1.0 - rc) * u2 / (r * one * one)
        - rc.powi(4) * u2 * u2 / (2.0 * r * r * one * one))
        / (n - 2.0);
    let zt = rc.atanh();
    let half = z * var.max(0.0).sqrt();
    Ok(Estimate {
        value: rc,
        ci_lower: (zt - half).tanh(),
        ci_upper: (zt + half).tanh(),
    })
}

/// Pearson's correlation with the Fisher-z interval (`atanh r ± z/√(n − 3)`).
///
/// # Errors
/// Fewer than 4 pairs, unequal lengths, non-finite values, or a constant column.
pub fn pearson(a: &[f64], b: &[f64], confidence: f64) -> Result<Estimate, StatsError> {
    const WHAT: &str = "Pearson correlation";
    check_pairs(WHAT, a, b, 4)?;
    let (ma, mb) = (mean(a), mean(b));
    let sa: f64 = a.iter().map(|x| (x - ma).powi(2)).sum();
    let sb: f64 = b.iter().map(|x| (x - mb).powi(2)).sum();
    if sa == 0.0 || sb == 0.0 {
        return Err(StatsError::ZeroVariance {
            what: WHAT,
            detail: "a column",
        });
    }
    let r = (a
        .iter()
        .zip(b)
        .map(|(x, y)| (x - ma) * (y - mb))
        .sum::<f64>()
        / (sa * sb).sqrt())
    .clamp(-1.0, 1.0);
    let z = z_quantile(0.5 + confidence / 2.0);
    let half = z / (a.len() as f64 - 3.0).sqrt();
    let zr = r.clamp(-1.0 + 1e-15, 1.0 - 1e-15).atanh();
    Ok(Estimate {
        value: r,
        ci_lower: (zr - half).tanh(),
        ci_upper: (zr + half).tanh(),
    })
}

/// Serialisable summary used by agreement rows.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Correlations {
    /// Lin's CCC.
    pub ccc: Estimate,
    /// Pearson's r.
    pub pearson_r: Option<Estimate>,
}
