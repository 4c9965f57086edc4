//! Reading the returned score sheets against the key, and the reader-study statistics:
//! score distributions per method × R, inter-reader agreement (quadratic-weighted kappa per
//! pair of readers, Cohen 1968; ICC(A,1) of the readers' EF, McGraw & Wong 1996), and the
//! readers' EF against the automated EF and against their own EF on the reference case.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::{ITEMS, MEASURES};
use crate::stats::bland_altman::{bland_altman, Options};
use crate::stats::icc::icc_all;
use crate::stats::kappa::{weighted_kappa, Weights};

/// Why a key or sheet was refused: the file, one-based row and column at fault.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{file}: row {row}, column `{column}`: {message}")]
pub struct SheetError {
    /// File.
    pub file: String,
    /// One-based row of the file (the header is row 1 after comment lines).
    pub row: usize,
    /// Column name.
    pub column: String,
    /// What is wrong.
    pub message: String,
}

/// One case of the key.
#[derive(Debug, Clone, PartialEq)]
pub struct KeyRow {
    /// Case code.
    pub case: String,
    /// Subject code.
    pub subject: String,
    /// Method.
    pub method: String,
    /// Pattern.
    pub pattern: String,
    /// Nominal R.
    pub accel_nominal: f64,
}

/// One reader's scores of one case.
#[derive(Debug, Clone, PartialEq)]
pub struct Score {
    /// Reader number (from the sheet's position on the command line, 1-based).
    pub reader: usize,
    /// Case code.
    pub case: String,
    /// Likert items in [`ITEMS`] order (`None`: left empty).
    pub items: [Option<u32>; 4],
    /// Reader's EDV, ESV, EF.
    pub measures: [Option<f64>; 3],
}

fn rows_of(text: &str) -> impl Iterator<Item = (usize, &str)> {
    text.lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim_end_matches('\r')))
        .filter(|(_, l)| !l.starts_with('#') && !l.trim().is_empty())
}

fn read(path: &Path) -> Result<String, SheetError> {
    std::fs::read_to_string(path).map_err(|e| SheetError {
        file: path.display().to_string(),
        row: 0,
        column: "(file)".into(),
        message: format!("cannot read: {e}"),
    })
}

/// A CSV file's header and data rows (comment lines starting with `#` skipped), with errors
/// naming the file, row and column.
struct Table<'a> {
    file: String,
    header_row: usize,
    cols: Vec<&'a str>,
    rows: Vec<(usize, &'a str)>,
}

impl<'a> Table<'a> {
    fn new(path: &Path, text: &'a str) -> Result<Self, SheetError> {
        let file = path.display().to_string();
        let mut rows: Vec<(usize, &str)> = rows_of(text).collect();
        if rows.is_empty() {
            return Err(SheetError {
                file,
                row: 1,
                column: "(header)".into(),
                message: "empty file".into(),
            });
        }
        let (header_row, header) = rows.remove(0);
        Ok(Table {
            file,
            header_row,
            cols: header.split(',').map(str::trim).collect(),
            rows,
        })
    }

    fn err(&self, row: usize, column: &str, message: String) -> SheetError {
        SheetError {
            file: self.file.clone(),
            row,
            column: column.into(),
            message,
        }
    }

    fn column(&self, name: &str) -> Result<usize, SheetError> {
        self.cols.iter().position(|c| *c == name).ok_or_else(|| {
            self.err(
                self.header_row,
                name,
                "column missing from the header".into(),
            )
        })
    }
}

/// Reads the key file.
///
/// # Errors
/// [`SheetError`] for a missing column or a malformed row.
pub fn read_key(path: &Path) -> Result<Vec<KeyRow>, SheetError> {
    let text = read(path)?;
    let t = Table::new(path, &text)?;
    let (err, idx, cols) = (
        |r, c: &str, m| t.err(r, c, m),
        |n: &str| t.column(n),
        &t.cols,
    );
    let rows = t.rows.clone();
    let (ic, is, im, ip, ir) = (
        idx("case")?,
        idx("subject")?,
        idx("method")?,
        idx("pattern")?,
        idx("accel_nominal")?,
    );
    let mut out: Vec<KeyRow> = Vec::new();
    for (n, line) in rows {
        let f: Vec<&str> = line.split(',').collect();
        if f.len() != cols.len() {
            return Err(err(
                n,
                "(row)",
                format!("{} fields, the header has {}", f.len(), cols.len()),
            ));
        }
        let accel = f[ir]
            .parse::<f64>()
            .map_err(|_| err(n, "accel_nominal", format!("`{}` is not a number", f[ir])))?;
        if out.iter().any(|k| k.case == f[ic]) {
            return Err(err(n, "case", format!("case {} listed twice", f[ic])));
        }
        out.push(KeyRow {
            case: f[ic].into(),
            subject: f[is].into(),
            method: f[im].into(),
            pattern: f[ip].into(),
            accel_nominal: accel,
        });
    }
    Ok(out)
}

/// Reads one returned score sheet of reader `reader` against the key.
///
/// # Errors
/// [`SheetError`] for an unknown case code, a case listed twice, a score outside 1–5 or not
/// a whole number, a measurement that is not a number, or a missing column.
pub fn read_sheet(path: &Path, reader: usize, key: &[KeyRow]) -> Result<Vec<Score>, SheetError> {
    let text = read(path)?;
    let t = Table::new(path, &text)?;
    let (err, idx, cols) = (
        |r, c: &str, m| t.err(r, c, m),
        |n: &str| t.column(n),
        &t.cols,
    );
    let rows = t.rows.clone();
    let case_col = idx("case")?;
    let item_cols = ITEMS
        .iter()
        .map(|(c, _)| idx(c))
        .collect::<Result<Vec<_>, _>>()?;
    let measure_cols = MEASURES
        .iter()
        .map(|c| idx(c))
        .collect::<Result<Vec<_>, _>>()?;
    let mut out: Vec<Score> = Vec::new();
    for (n, line) in rows {
        // The comment column is last and may itself hold commas.
        let f: Vec<&str> = line.splitn(cols.len(), ',').map(str::trim).collect();
        let cell = |i: usize| f.get(i).copied().unwrap_or("");
        let case = cell(case_col);
        if !key.iter().any(|k| k.case == case) {
            return Err(err(
                n,
                "case",
                format!("`{case}` is not a case of this study"),
            ));
        }
        if out.iter().any(|s| s.case == case) {
            return Err(err(
                n,
                "case",
                format!("case {case} scored twice in this sheet"),
            ));
        }
        let mut items = [None; 4];
        for (k, &i) in item_cols.iter().enumerate() {
            let v = cell(i);
            if v.is_empty() {
                continue;
            }
            match v.parse::<u32>() {
                Ok(x) if (1..=5).contains(&x) => items[k] = Some(x),
                _ => {
                    return Err(err(
                        n,
                        ITEMS[k].0,
                        format!("`{v}`: scores are whole numbers from 1 to 5"),
                    ))
                }
            }
        }
        let mut measures = [None; 3];
        for (k, &i) in measure_cols.iter().enumerate() {
            let v = cell(i);
            if v.is_empty() {
                continue;
            }
            match v.parse::<f64>() {
                Ok(x) if x.is_finite() && x >= 0.0 && (k < 2 || x <= 100.0) => {
                    measures[k] = Some(x)
                }
                _ => {
                    return Err(err(
                        n,
                        MEASURES[k],
                        format!("`{v}`: expected a number ≥ 0 (EF at most 100)"),
                    ))
                }
            }
        }
        out.push(Score {
            reader,
            case: case.into(),
            items,
            measures,
        });
    }
    Ok(out)
}

/// Distribution of one item for one method × R.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ItemSummary {
    /// Item column.
    pub item: String,
    /// Scores given.
    pub n: usize,
    /// How many 1s, 2s, … 5s.
    pub counts: [usize; 5],
    /// Median score.
    pub median: Option<f64>,
}

/// Weighted kappa of one item for one pair of readers over the cases both scored.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PairKappa {
    /// Item column.
    pub item: String,
    /// Reader numbers.
    pub readers: (usize, usize),
    /// Cases both scored.
    pub n: usize,
    /// Quadratic-weighted kappa (absent when undefined, with the reason).
    pub kappa: Option<f64>,
    /// Why it could not be computed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

/// Bias and limits of agreement of readers' EF against another EF, in percentage points.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EfAgreement {
    /// Pairs.
    pub n: usize,
    /// Mean difference, pp.
    pub bias_pp: Option<f64>,
    /// Lower 95 % limit, pp.
    pub loa_lower_pp: Option<f64>,
    /// Upper 95 % limit, pp.
    pub loa_upper_pp: Option<f64>,
    /// Why it could not be computed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

/// Everything about one method × R.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ConditionSummary {
    /// Method.
    pub method: String,
    /// Pattern.
    pub pattern: String,
    /// Nominal R.
    pub accel_nominal: f64,
    /// Cases.
    pub cases: usize,
    /// Score distributions.
    pub items: Vec<ItemSummary>,
    /// Readers' EF against the automated EF of the same series.
    pub ef_vs_automated: Option<EfAgreement>,
    /// Readers' EF on this case minus their EF on the same subject's reference case.
    pub ef_vs_reference: Option<EfAgreement>,
}

/// The reader study's results.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReaderStudy {
    /// The caution every output carries.
    pub caution: String,
    /// Readers (sheets).
    pub readers: usize,
    /// Per method × R, in key order of first appearance.
    pub conditions: Vec<ConditionSummary>,
    /// Inter-reader agreement of each item, every pair of readers.
    pub kappa: Vec<PairKappa>,
    /// ICC(A,1) of the readers' EF over cases every reader measured.
    pub ef_icc_a1: Option<f64>,
    /// Cases in that ICC.
    pub ef_icc_cases: usize,
    /// Why the ICC could not be computed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ef_icc_note: Option<String>,
}

fn ef_agreement(a: &[f64], b: &[f64]) -> EfAgreement {
    match bland_altman(a, b, Options::default()) {
        Ok(r) => EfAgreement {
            n: r.n,
            bias_pp: Some(r.bias.value),
            loa_lower_pp: Some(r.loa_lower.value),
            loa_upper_pp: Some(r.loa_upper.value),
            note: None,
        },
        Err(e) => EfAgreement {
            n: a.len(),
            bias_pp: None,
            loa_lower_pp: None,
            loa_upper_pp: None,
            note: Some(e.to_string()),
        },
    }
}

fn median(mut v: Vec<u32>) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_unstable();
    let n = v.len();
    Some(if n % 2 == 1 {
        f64::from(v[n / 2])
    } else {
        0.5 * f64::from(v[n / 2 - 1] + v[n / 2])
    })
}

/// The statistics of `scores` (every reader's sheet) against `key`; `automated` gives the
/// tool's EF of (subject, method, pattern, R) where known.
pub fn analyse(
    key: &[KeyRow],
    scores: &[Score],
    readers: &[usize],
    automated: &dyn Fn(&KeyRow) -> Option<f64>,
) -> ReaderStudy {
    let by_case: BTreeMap<&str, &KeyRow> = key.iter().map(|k| (k.case.as_str(), k)).collect();
    let mut conds: Vec<(String, String, f64)> = Vec::new();
    for k in key {
        let c = (k.method.clone(), k.pattern.clone(), k.accel_nominal);
        if !conds.contains(&c) {
            conds.push(c);
        }
    }
    let reader_ef = |reader: usize, case: &str| {
        scores
            .iter()
            .find(|s| s.reader == reader && s.case == case)
            .and_then(|s| s.measures[2])
    };
    let conditions = conds
        .iter()
        .map(|(m, p, r)| {
            let in_cond = |k: &KeyRow| k.method == *m && k.pattern == *p && k.accel_nominal == *r;
            let cases: Vec<&KeyRow> = key.iter().filter(|k| in_cond(k)).collect();
            let mine: Vec<&Score> = scores
                .iter()
                .filter(|s| by_case.get(s.case.as_str()).is_some_and(|k| in_cond(k)))
                .collect();
            let items = ITEMS
                .iter()
                .enumerate()
                .map(|(i, (item, _))| {
                    let vals: Vec<u32> = mine.iter().filter_map(|s| s.items[i]).collect();
                    let mut counts = [0; 5];
                    vals.iter().for_each(|&v| counts[(v - 1) as usize] += 1);
                    ItemSummary {
                        item: item.to_string(),
                        n: vals.len(),
                        counts,
                        median: median(vals),
                    }
                })
                .collect();
            let (mut ra, mut au) = (Vec::new(), Vec::new());
            for s in &mine {
                if let (Some(e), Some(a)) = (s.measures[2], automated(by_case[s.case.as_str()])) {
                    ra.push(e);
                    au.push(a);
                }
            }
            let (mut rm, mut rr) = (Vec::new(), Vec::new());
            if m != crate::agreement::REFERENCE {
                for k in &cases {
                    let reference = key.iter().find(|x| {
                        x.subject == k.subject && x.method == crate::agreement::REFERENCE
                    });
                    for &reader in readers {
                        if let (Some(a), Some(b)) = (
                            reader_ef(reader, &k.case),
                            reference.and_then(|x| reader_ef(reader, &x.case)),
                        ) {
                            rm.push(a);
                            rr.push(b);
                        }
                    }
                }
            }
            ConditionSummary {
                method: m.clone(),
                pattern: p.clone(),
                accel_nominal: *r,
                cases: cases.len(),
                items,
                ef_vs_automated: (!ra.is_empty()).then(|| ef_agreement(&ra, &au)),
                ef_vs_reference: (!rm.is_empty()).then(|| ef_agreement(&rm, &rr)),
            }
        })
        .collect();
    let mut kappa = Vec::new();
    for (i, (item, _)) in ITEMS.iter().enumerate() {
        for (ia, &a) in readers.iter().enumerate() {
            for &b in &readers[ia + 1..] {
                let (mut xa, mut xb) = (Vec::new(), Vec::new());
                for k in key {
                    let get = |r: usize| {
                        scores
                            .iter()
                            .find(|s| s.reader == r && s.case == k.case)
                            .and_then(|s| s.items[i])
                    };
                    if let (Some(x), Some(y)) = (get(a), get(b)) {
                        xa.push(x);
                        xb.push(y);
                    }
                }
                let r = weighted_kappa(&xa, &xb, (1, 5), Weights::Quadratic);
                kappa.push(PairKappa {
                    item: item.to_string(),
                    readers: (a, b),
                    n: xa.len(),
                    kappa: r.as_ref().ok().copied(),
                    note: r.err().map(|e| e.to_string()),
                });
            }
        }
    }
    let table: Vec<Vec<f64>> = key
        .iter()
        .filter_map(|k| readers.iter().map(|&r| reader_ef(r, &k.case)).collect())
        .collect();
    let icc =
        icc_all(&table, 0.95).map(|v| v.into_iter().find(|i| i.form == "A,1").map(|i| i.value));
    let (ef_icc_a1, ef_icc_note) = match icc {
        Ok(v) => (v, None),
        Err(e) => (None, Some(e.to_string())),
    };
    ReaderStudy {
        caution: crate::caution::CAUTION.into(),
        readers: readers.len(),
        conditions,
        kappa,
        ef_icc_a1,
        ef_icc_cases: table.len(),
        ef_icc_note,
    }
}

/// Reader number of a sheet: `NN` of `reader-NN-scores.csv`, else its position (1-based).
pub fn reader_number(path: &Path, position: usize) -> usize {
    path.file_name()
        .and_then(|n| n.to_str())
        .and_then(|n| n.strip_prefix("reader-"))
        .and_then(|n| n.split('-').next())
        .and_then(|n| n.parse().ok())
        .unwrap_or(position)
}

/// The sheets given, with their reader numbers (refusing two sheets of one reader).
///
/// # Errors
/// [`SheetError`] naming the second sheet of a reader.
pub fn numbered(sheets: &[PathBuf]) -> Result<Vec<(usize, PathBuf)>, SheetError> {
    let mut out: Vec<(usize, PathBuf)> = Vec::new();
    for (i, p) in sheets.iter().enumerate() {
        let n = reader_number(p, i + 1);
        if out.iter().any(|(m, _)| *m == n) {
            return Err(SheetError {
                file: p.display().to_string(),
                row: 0,
                column: "(file)".into(),
                message: format!("a second sheet of reader {n}"),
            });
        }
        out.push((n, p.clone()));
    }
    Ok(out)
}

fn fmt_opt(v: Option<f64>, digits: usize) -> String {
    v.map_or_else(|| "–".into(), |x| format!("{x:.digits$}"))
}

/// Title of the reader-study pages.
pub const TITLE: &str = "Reader study";

/// The reader study as a PDF of its own (the same pages `report --reader-study` adds).
pub fn pdf(study: &ReaderStudy) -> Vec<u8> {
    crate::report::text_document(TITLE, &sections(study))
}

/// The reader study as headed paragraphs.
pub fn sections(study: &ReaderStudy) -> Vec<(String, Vec<String>)> {
    let label = |c: &ConditionSummary| {
        format!(
            "{} ({}), R = {}",
            c.method,
            c.pattern,
            crate::acceptance::plain_number(c.accel_nominal)
        )
    };
    let scores: Vec<String> = study
        .conditions
        .iter()
        .map(|c| {
            let items: Vec<String> = c
                .items
                .iter()
                .map(|i| {
                    format!(
                        "{} median {} (n {}; 1–5: {})",
                        i.item,
                        fmt_opt(i.median, 1),
                        i.n,
                        i.counts.map(|k| k.to_string()).join("/")
                    )
                })
                .collect();
            format!("{}: {} cases. {}.", label(c), c.cases, items.join("; "))
        })
        .collect();
    let mut agreement: Vec<String> = ITEMS
        .iter()
        .map(|(item, _)| {
            let ks: Vec<&PairKappa> = study.kappa.iter().filter(|k| k.item == *item).collect();
            let vals: Vec<f64> = ks.iter().filter_map(|k| k.kappa).collect();
            if vals.is_empty() {
                format!("{item}: weighted kappa not computable ({} reader pairs).", ks.len())
            } else {
                let mean = vals.iter().sum::<f64>() / vals.len() as f64;
                let lo = vals.iter().copied().fold(f64::INFINITY, f64::min);
                let hi = vals.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                format!(
                    "{item}: quadratic-weighted kappa, mean over {} reader pairs {mean:.2} (range {lo:.2} to {hi:.2}).",
                    vals.len()
                )
            }
        })
        .collect();
    agreement.push(match study.ef_icc_a1 {
        Some(v) => format!(
            "Readers' EF: ICC(A,1) {v:.2} over {} cases every reader measured.",
            study.ef_icc_cases
        ),
        None => format!(
            "Readers' EF: ICC(A,1) not computable ({}).",
            study.ef_icc_note.as_deref().unwrap_or("no cases")
        ),
    });
    let ef = |a: &Option<EfAgreement>| match a {
        Some(a) if a.bias_pp.is_some() => format!(
            "bias {} pp, 95 % limits {} to {} pp (n {})",
            fmt_opt(a.bias_pp, 1),
            fmt_opt(a.loa_lower_pp, 1),
            fmt_opt(a.loa_upper_pp, 1),
            a.n
        ),
        Some(a) => format!("not computable ({})", a.note.as_deref().unwrap_or("")),
        None => "no pairs".into(),
    };
    let efs: Vec<String> = study
        .conditions
        .iter()
        .map(|c| {
            if c.method == crate::agreement::REFERENCE {
                format!("{}: against the automated EF {}.", label(c), ef(&c.ef_vs_automated))
            } else {
                format!(
                    "{}: against the automated EF {}; against the reader's own EF on the reference case {}.",
                    label(c),
                    ef(&c.ef_vs_automated),
                    ef(&c.ef_vs_reference)
                )
            }
        })
        .collect();
    vec![
            (
                "Scores per method and acceleration".into(),
                std::iter::once(format!(
                    "{} readers. Items scored 1 (worst) to 5 (best); counts of 1s/2s/3s/4s/5s in brackets.",
                    study.readers
                ))
                .chain(scores)
                .collect(),
            ),
            ("Agreement between readers".into(), agreement),
            ("Readers' EF".into(), efs),
            (
                "Methods".into(),
                vec!["Weighted kappa: Cohen J. Psychol Bull 1968;70:213–220 (quadratic weights). ICC(A,1): McGraw KO, Wong SP. Psychol Methods 1996;1:30–46. Limits of agreement: Bland JM, Altman DG. Lancet 1986;i:307–310. Reading order: Williams EJ. Aust J Sci Res A 1949;2:149–168.".into()],
            ),
    ]
}
