//! Intraclass correlation in the six Shrout & Fleiss (1979, Psychol Bull 86:420) forms, named
//! in McGraw & Wong's (1996, Psychol Methods 1:30) notation, with F-based 95 % intervals.
//!
//! `1`: one-way random (each subject rated by different raters); `A`: two-way, absolute
//! agreement (raters random, or fixed — the estimate is the same); `C`: two-way mixed,
//! consistency (a fixed offset between raters is forgiven). `,1`: a single rating; `,k`: the
//! mean of the k ratings.

use serde::Serialize;

use super::dist::{f_quantile, f_sf};
use super::{check_values, StatsError};

/// One ICC form and its interval.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Icc {
    /// McGraw & Wong notation: `1,1`, `A,1`, `C,1`, `1,k`, `A,k`, `C,k`.
    pub form: String,
    /// Model and type in words.
    pub model: &'static str,
    /// Estimate.
    pub value: f64,
    /// Lower confidence bound; `None` where the interval is not defined (the
    /// Satterthwaite degrees of freedom of an absolute-agreement form are not positive when
    /// the estimate is far below zero, and the F quantile then does not exist).
    pub ci_lower: Option<f64>,
    /// Upper confidence bound; `None` where not defined (as the lower).
    pub ci_upper: Option<f64>,
    /// F statistic of ICC = 0.
    pub f: f64,
    /// Its degrees of freedom.
    pub df: (f64, f64),
    /// Its p-value.
    pub p_value: f64,
}

/// Mean squares of the two-way layout.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MeanSquares {
    /// Between subjects.
    pub bms: f64,
    /// Within subjects (one-way).
    pub wms: f64,
    /// Between raters.
    pub jms: f64,
    /// Residual.
    pub ems: f64,
}

/// Mean squares of `ratings` (`ratings[i][j]`: subject i, rater j; complete).
///
/// # Errors
/// Fewer than 3 subjects or 2 raters, ragged rows, or non-finite values.
pub fn mean_squares(ratings: &[Vec<f64>]) -> Result<MeanSquares, StatsError> {
    const WHAT: &str = "intraclass correlation";
    let n = ratings.len();
    if n < 3 {
        return Err(StatsError::TooFew {
            what: WHAT,
            n,
            min: 3,
        });
    }
    let k = ratings[0].len();
    for row in ratings {
        if row.len() != k {
            return Err(StatsError::Unequal {
                what: WHAT,
                a: k,
                b: row.len(),
            });
        }
        check_values(WHAT, row, 2)?;
    }
    let (nf, kf) = (n as f64, k as f64);
    let grand = ratings.iter().flatten().sum::<f64>() / (nf * kf);
    let row_means: Vec<f64> = ratings.iter().map(|r| r.iter().sum::<f64>() / kf).collect();
    let col_means: Vec<f64> = (0..k)
        .map(|j| ratings.iter().map(|r| r[j]).sum::<f64>() / nf)
        .collect();
    let sst: f64 = ratings.iter().flatten().map(|x| (x - grand).powi(2)).sum();
    let ssr = kf * row_means.iter().map(|m| (m - grand).powi(2)).sum::<f64>();
    let ssc = nf * col_means.iter().map(|m| (m - grand).powi(2)).sum::<f64>();
    let sse = sst - ssr - ssc;
    Ok(MeanSquares {
        bms: ssr / (nf - 1.0),
        wms: (sst - ssr) / (nf * (kf - 1.0)),
        jms: ssc / (kf - 1.0),
        ems: sse / ((nf - 1.0) * (kf - 1.0)),
    })
}

/// Lower and upper bounds of an F ratio `f` with `(d1, d2)` degrees of freedom at quantile
/// `q`: `f / F(q; d1, d2)` and `f · F(q; d2, d1)` (Shrout & Fleiss 1979, Table 5).
fn f_bounds(f: f64, d1: f64, d2: f64, q: f64) -> (f64, f64) {
    (f / f_quantile(q, d1, d2), f * f_quantile(q, d2, d1))
}

/// A bound that exists (finite), or `None`.
fn defined(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// The six forms for `ratings` (`ratings[i][j]`: subject i, rater j) at `confidence`.
///
/// Intervals: one-way and consistency forms from the F ratio's quantiles (Shrout & Fleiss
/// 1979, Table 5 / McGraw & Wong 1996, Table 7); absolute-agreement forms with
/// Satterthwaite's degrees of freedom (McGraw & Wong 1996, Table 8, case 2A).
///
/// # Errors
/// As [`mean_squares`], and subjects whose ratings all agree exactly (no residual
/// variance).
pub fn icc_all(ratings: &[Vec<f64>], confidence: f64) -> Result<Vec<Icc>, StatsError> {
    let ms = mean_squares(ratings)?;
    if ms.ems <= 0.0 || ms.wms <= 0.0 || ms.bms <= 0.0 {
        return Err(StatsError::ZeroVariance {
            what: "intraclass correlation",
            detail: "the ratings' residual or between-subject spread",
        });
    }
    let (n, k) = (ratings.len() as f64, ratings[0].len() as f64);
    let q = 0.5 + confidence / 2.0;
    let MeanSquares { bms, wms, jms, ems } = ms;
    let mut out = Vec::with_capacity(6);

    // One-way.
    let (df1, df2) = (n - 1.0, n * (k - 1.0));
    let f1 = bms / wms;
    let (fl1, fu1) = f_bounds(f1, df1, df2, q);
    let p1 = f_sf(f1, df1, df2);
    let (d1_one, d2_one) = (df1, df2);
    out.push(Icc {
        form: "1,1".into(),
        model: "one-way random, single rating",
        value: (bms - wms) / (bms + (k - 1.0) * wms),
        ci_lower: defined((fl1 - 1.0) / (fl1 + k - 1.0)),
        ci_upper: defined((fu1 - 1.0) / (fu1 + k - 1.0)),
        f: f1,
        df: (df1, df2),
        p_value: p1,
    });

    // Two-way, absolute agreement.
    let (df1, df2) = (n - 1.0, (n - 1.0) * (k - 1.0));
    let f3 = bms / ems;
    let p3 = f_sf(f3, df1, df2);
    let a1 = (bms - ems) / (bms + (k - 1.0) * ems + k * (jms - ems) / n);
    let a = k * a1 / (n * (1.0 - a1));
    let b = 1.0 + k * a1 * (n - 1.0) / (n * (1.0 - a1));
    let v = (a * jms + b * ems).powi(2)
        / ((a * jms).powi(2) / (k - 1.0) + (b * ems).powi(2) / ((n - 1.0) * (k - 1.0)));
    let fl_a = f_quantile(q, n - 1.0, v);
    let fu_a = f_quantile(q, v, n - 1.0);
    let lo_a = n * (bms - fl_a * ems) / (fl_a * (k * jms + (k * n - k - n) * ems) + n * bms);
    let hi_a = n * (fu_a * bms - ems) / (k * jms + (k * n - k - n) * ems + n * fu_a * bms);
    out.push(Icc {
        form: "A,1".into(),
        model: "two-way, absolute agreement, single rating",
        value: a1,
        ci_lower: defined(lo_a),
        ci_upper: defined(hi_a),
        f: f3,
        df: (df1, df2),
        p_value: p3,
    });

    // Two-way mixed, consistency.
    let (fl3, fu3) = f_bounds(f3, df1, df2, q);
    out.push(Icc {
        form: "C,1".into(),
        model: "two-way mixed, consistency, single rating",
        value: (bms - ems) / (bms + (k - 1.0) * ems),
        ci_lower: defined((fl3 - 1.0) / (fl3 + k - 1.0)),
        ci_upper: defined((fu3 - 1.0) / (fu3 + k - 1.0)),
        f: f3,
        df: (df1, df2),
        p_value: p3,
    });

    // Average of k ratings (Spearman–Brown of the single-rating bounds).
    let avg = |x: f64| k * x / (1.0 + (k - 1.0) * x);
    out.push(Icc {
        form: "1,k".into(),
        model: "one-way random, mean of k ratings",
        value: (bms - wms) / bms,
        ci_lower: defined(1.0 - 1.0 / fl1),
        ci_upper: defined(1.0 - 1.0 / fu1),
        f: f1,
        df: (d1_one, d2_one),
        p_value: p1,
    });
    out.push(Icc {
        form: "A,k".into(),
        model: "two-way, absolute agreement, mean of k ratings",
        value: (bms - ems) / (bms + (jms - ems) / n),
        ci_lower: defined(avg(lo_a)),
        ci_upper: defined(avg(hi_a)),
        f: f3,
        df: (df1, df2),
        p_value: p3,
    });
    out.push(Icc {
        form: "C,k".into(),
        model: "two-way mixed, consistency, mean of k ratings",
        value: (bms - ems) / bms,
        ci_lower: defined(1.0 - 1.0 / fl3),
        ci_upper: defined(1.0 - 1.0 / fu3),
        f: f3,
        df: (df1, df2),
        p_value: p3,
    });
    Ok(out)
}
