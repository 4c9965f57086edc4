//! Columns of numbers from a CSV table (a spreadsheet export of paired measurements): a header
//! row naming the columns, `#` lines ignored, every cell of the chosen columns a number.

use std::path::Path;

use super::IoError;

/// Largest magnitude accepted in a cell: sums of squares of up to a million such values stay
/// finite in f64, so no statistic overflows to infinity or NaN.
const MAX_MAGNITUDE: f64 = 1e15;

/// The named columns of `path`, in the order asked for, as numbers.
///
/// # Errors
/// [`IoError`] naming the file, and the column, row (one-based data row and file line) and
/// cell at fault: a missing column, a row with too few cells, an empty or non-numeric cell, a
/// magnitude beyond 1e15.
pub fn read_columns(path: &Path, names: &[String]) -> Result<Vec<Vec<f64>>, IoError> {
    let bytes = std::fs::read(path).map_err(|e| IoError::file(path, "cannot read", e))?;
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .flexible(true)
        .trim(csv::Trim::All)
        .from_reader(bytes.as_slice());
    let header: Vec<String> = reader
        .headers()
        .map_err(|e| IoError::content(path, format!("cannot read the header row: {e}")))?
        .iter()
        .map(str::to_string)
        .collect();
    let mut index = Vec::with_capacity(names.len());
    for n in names {
        let i = header.iter().position(|h| h == n).ok_or_else(|| {
            IoError::content(
                path,
                format!(
                    "no column `{n}` in the header (columns: {})",
                    header.join(", ")
                ),
            )
        })?;
        index.push(i);
    }
    let mut columns = vec![Vec::new(); names.len()];
    for (row, record) in reader.records().enumerate() {
        let record = record.map_err(|e| IoError::content(path, format!("row {}: {e}", row + 1)))?;
        let line = record.position().map_or(0, |p| p.line());
        for ((name, &i), col) in names.iter().zip(&index).zip(columns.iter_mut()) {
            let cell = record.get(i).ok_or_else(|| {
                IoError::content(
                    path,
                    format!(
                        "row {} (line {line}) has {} cells, so no value in column `{name}`",
                        row + 1,
                        record.len()
                    ),
                )
            })?;
            let v: f64 = cell
                .parse()
                .ok()
                .filter(|v: &f64| v.is_finite())
                .ok_or_else(|| {
                    IoError::content(
                        path,
                        format!(
                        "row {} (line {line}), column `{name}`: `{cell}` is not a finite number",
                        row + 1
                    ),
                    )
                })?;
            if v.abs() > MAX_MAGNITUDE {
                return Err(IoError::content(
                    path,
                    format!(
                        "row {} (line {line}), column `{name}`: `{cell}` is beyond ±1e15; no volume, fraction or rate is that large (a unit or typing error?), and squaring it overflows the statistics",
                        row + 1
                    ),
                ));
            }
            col.push(v);
        }
    }
    Ok(columns)
}
