//! Weighted kappa of two raters on an ordinal scale (Cohen J. Psychol Bull 1968;70:213–220):
//! `κ_w = 1 − Σ w_ij o_ij / Σ w_ij e_ij`, with `o` the observed proportions of rating pairs,
//! `e` the products of the two raters' marginal proportions, and disagreement weights
//! `w_ij = |i − j| / (k − 1)` (linear) or `((i − j) / (k − 1))²` (quadratic).

use super::StatsError;

/// Disagreement weights.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Weights {
    /// `|i − j| / (k − 1)`.
    Linear,
    /// `((i − j) / (k − 1))²` (equals the ICC of consistency for large samples).
    Quadratic,
}

/// Weighted kappa of two raters' ratings on the scale `lo..=hi` (whole numbers).
///
/// # Errors
/// Columns of unequal length, fewer than 2 pairs, a rating outside the scale, or no
/// expected disagreement at all (both raters always give one and the same rating).
pub fn weighted_kappa(
    a: &[u32],
    b: &[u32],
    (lo, hi): (u32, u32),
    weights: Weights,
) -> Result<f64, StatsError> {
    const WHAT: &str = "weighted kappa";
    if a.len() != b.len() {
        return Err(StatsError::Unequal {
            what: WHAT,
            a: a.len(),
            b: b.len(),
        });
    }
    if a.len() < 2 {
        return Err(StatsError::TooFew {
            what: WHAT,
            n: a.len(),
            min: 2,
        });
    }
    if hi <= lo {
        return Err(StatsError::Parameter {
            what: WHAT,
            detail: format!("the scale {lo}..{hi} needs at least two levels"),
        });
    }
    let k = (hi - lo + 1) as usize;
    let mut table = vec![vec![0.0; k]; k];
    for (i, (&x, &y)) in a.iter().zip(b).enumerate() {
        for v in [x, y] {
            if !(lo..=hi).contains(&v) {
                return Err(StatsError::Parameter {
                    what: WHAT,
                    detail: format!("rating #{} is {v}, outside the scale {lo}..{hi}", i + 1),
                });
            }
        }
        table[(x - lo) as usize][(y - lo) as usize] += 1.0;
    }
    let n = a.len() as f64;
    let rows: Vec<f64> = table.iter().map(|r| r.iter().sum::<f64>() / n).collect();
    let cols: Vec<f64> = (0..k)
        .map(|j| table.iter().map(|r| r[j]).sum::<f64>() / n)
        .collect();
    let w = |i: usize, j: usize| {
        let d = i.abs_diff(j) as f64 / (k - 1) as f64;
        match weights {
            Weights::Linear => d,
            Weights::Quadratic => d * d,
        }
    };
    let (mut observed, mut expected) = (0.0, 0.0);
    for i in 0..k {
        for j in 0..k {
            observed += w(i, j) * table[i][j] / n;
            expected += w(i, j) * rows[i] * cols[j];
        }
    }
    if expected == 0.0 {
        return Err(StatsError::ZeroVariance {
            what: WHAT,
            detail: "the expected disagreement (both raters used one level only)",
        });
    }
    Ok(1.0 - observed / expected)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Perfect agreement gives 1; a rater against the same ratings reversed on a symmetric
    /// scale gives −1 with quadratic weights (analytic: observed disagreement twice the
    /// expected when the marginals are uniform and ratings mirror each other).
    #[test]
    fn limits() {
        let a = [1, 2, 3, 4, 5];
        assert_eq!(
            weighted_kappa(&a, &a, (1, 5), Weights::Quadratic).unwrap(),
            1.0
        );
        let b = [5, 4, 3, 2, 1];
        let k = weighted_kappa(&a, &b, (1, 5), Weights::Quadratic).unwrap();
        assert!((k + 1.0).abs() < 1e-12, "{k}");
        assert!(weighted_kappa(&a, &[1, 2, 3, 4, 6], (1, 5), Weights::Linear).is_err());
        assert!(weighted_kappa(&[3, 3], &[3, 3], (1, 5), Weights::Linear).is_err());
    }
}
