//! Numeric CSV tables a scenario points to (obstacles, pores), read with
//! errors that name the file, line and column.

use crate::base::error::{EngineError, Result};
use std::path::Path;

/// One data row of a numeric CSV file.
#[derive(Debug, Clone)]
pub struct CsvRow<const N: usize> {
    /// Line number in the file (1-based).
    pub line: usize,
    /// The row as written (trimmed).
    pub text: String,
    /// Its numbers, one per column.
    pub values: [f64; N],
}

impl<const N: usize> CsvRow<N> {
    /// An error naming `file`, this row's line and text, and what is allowed.
    pub fn error(&self, file: &Path, allowed: String) -> EngineError {
        EngineError::InvalidValue {
            file: file.to_path_buf(),
            key: format!("line {}", self.line),
            value: format!("{:?}", self.text.chars().take(80).collect::<String>()),
            allowed,
        }
    }
}

/// Reads a CSV file of `N` numeric columns named `names` (rows of `what`,
/// for messages), given as `key` of `scenario_file`: blank lines and lines starting with `#` are skipped, the
/// first other line may be a header naming the columns, every number must
/// be finite, and the last column (a radius) greater than 0.
///
/// # Errors
/// [`EngineError::InvalidValue`] naming `key` when the file cannot be read
/// or holds no rows, or naming the CSV file and line of a malformed row.
pub fn read_numeric_csv<const N: usize>(
    path: &Path,
    scenario_file: &Path,
    key: &str,
    what: &str,
    names: [&str; N],
) -> Result<Vec<CsvRow<N>>> {
    let columns = names.join(",");
    let about = |allowed: String| EngineError::InvalidValue {
        file: scenario_file.to_path_buf(),
        key: key.into(),
        value: format!("{:?}", path.display().to_string()),
        allowed,
    };
    let text = std::fs::read_to_string(path).map_err(|e| {
        about(format!("the file cannot be read ({e}); give a readable CSV of {columns} (relative paths start at the scenario's folder)"))
    })?;
    let mut rows = Vec::new();
    let mut seen_data = false;
    for (idx, raw) in text.lines().enumerate() {
        let text = raw.trim();
        if text.is_empty() || text.starts_with('#') {
            continue;
        }
        let mut row = CsvRow {
            line: idx + 1,
            text: text.to_string(),
            values: [0.0; N],
        };
        let fields: Vec<&str> = text.split(',').map(str::trim).collect();
        let first_is_number = fields.first().is_some_and(|f| f.parse::<f64>().is_ok());
        if !seen_data && !first_is_number {
            // A header: it must name the columns.
            seen_data = true;
            let lower: Vec<String> = fields.iter().map(|f| f.to_ascii_lowercase()).collect();
            if lower != names {
                return Err(row.error(path, format!("a header must read `{columns}`")));
            }
            continue;
        }
        seen_data = true;
        if fields.len() != N {
            return Err(row.error(
                path,
                format!(
                    "each row needs {N} comma-separated numbers ({}), found {}",
                    names.join(", "),
                    fields.len()
                ),
            ));
        }
        for (c, f) in fields.iter().enumerate() {
            row.values[c] = match f.parse::<f64>() {
                Ok(x) if x.is_finite() => x,
                _ => {
                    return Err(row.error(
                        path,
                        format!(
                            "column {} ({}) must be a finite number, not {f:?}",
                            c + 1,
                            names[c]
                        ),
                    ))
                }
            };
        }
        let r = row.values[N - 1];
        if r <= 0.0 {
            return Err(row.error(
                path,
                format!("{} must be greater than 0, not {r}", names[N - 1]),
            ));
        }
        rows.push(row);
    }
    if rows.is_empty() {
        return Err(about(format!(
            "the file holds no {what} rows; each row is {columns}"
        )));
    }
    Ok(rows)
}
