//! CSV tables of numbers: reading with file-and-line errors, writing in shortest round-trip form.
//!
//! The files causeway reads (lens lists, source points, paths, times) are small numeric CSVs with
//! a header row. Columns are found by name, extra columns are ignored, blank lines and lines
//! starting with `#` are skipped.

use crate::error::{shown, Error, Result};
use std::path::Path;

/// A numeric table read from CSV: the named columns, row by row, with the line each came from.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// Column names, as asked for.
    pub columns: Vec<String>,
    /// One entry per data row: the values of the asked-for columns in order.
    pub rows: Vec<Vec<f64>>,
    /// The 1-based line number of each row in its file.
    pub lines: Vec<usize>,
}

impl Table {
    /// Parses CSV text; `origin` names the source in error messages.
    ///
    /// `required` columns must be present; `optional` ones are read when present (their values
    /// follow the required ones in each row, NaN-free; a missing optional column is simply left
    /// out of [`Table::columns`]).
    ///
    /// ```
    /// use causeway::table::Table;
    /// let t = Table::parse("x,y\n0.5,-1\n2,3e-2\n", "points.csv", &["x", "y"], &[]).unwrap();
    /// assert_eq!(t.rows, vec![vec![0.5, -1.0], vec![2.0, 0.03]]);
    /// assert!(Table::parse("x,y\n1,oops\n", "p.csv", &["x", "y"], &[]).unwrap_err()
    ///     .to_string().contains("p.csv:2"));
    /// ```
    pub fn parse(text: &str, origin: &str, required: &[&str], optional: &[&str]) -> Result<Table> {
        // A byte-order mark (as some spreadsheets write) is not part of the first column's name.
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let mut lines = text
            .lines()
            .enumerate()
            .map(|(i, l)| (i + 1, l.trim()))
            .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
        let (header_line, header) = lines
            .next()
            .ok_or_else(|| Error::input(format!("{origin}: empty file, expected a header row")))?;
        let names: Vec<&str> = header.split(',').map(|h| h.trim()).collect();
        let find = |name: &str| names.iter().position(|h| h.eq_ignore_ascii_case(name));
        let mut picks = Vec::new();
        let mut columns = Vec::new();
        for name in required {
            let idx = find(name).ok_or_else(|| {
                Error::input(format!(
                    "{origin}:{header_line}: header has no column '{name}' (expected {})",
                    required.join(",")
                ))
            })?;
            picks.push(idx);
            columns.push(name.to_string());
        }
        for name in optional {
            if let Some(idx) = find(name) {
                picks.push(idx);
                columns.push(name.to_string());
            }
        }
        let mut rows = Vec::new();
        let mut line_numbers = Vec::new();
        for (no, line) in lines {
            let fields: Vec<&str> = line.split(',').map(|f| f.trim()).collect();
            if fields.len() != names.len() {
                return Err(Error::input(format!(
                    "{origin}:{no}: expected {} fields, found {}",
                    names.len(),
                    fields.len()
                )));
            }
            let mut row = Vec::with_capacity(picks.len());
            for (&idx, col) in picks.iter().zip(&columns) {
                let v: f64 = fields[idx].parse().map_err(|_| {
                    Error::input(format!(
                        "{origin}:{no}: column '{col}' is not a number: '{}'",
                        shown(fields[idx])
                    ))
                })?;
                if !v.is_finite() {
                    return Err(Error::input(format!(
                        "{origin}:{no}: column '{col}' is not finite: '{}'",
                        shown(fields[idx])
                    )));
                }
                row.push(v);
            }
            rows.push(row);
            line_numbers.push(no);
        }
        Ok(Table {
            columns,
            rows,
            lines: line_numbers,
        })
    }

    /// Reads and parses a CSV file (see [`Table::parse`]).
    pub fn read(path: &Path, required: &[&str], optional: &[&str]) -> Result<Table> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Table::parse(&text, &path.display().to_string(), required, optional)
    }

    /// Index of a column in each row, if it was read.
    pub fn column(&self, name: &str) -> Option<usize> {
        self.columns.iter().position(|c| c == name)
    }
}

/// Formats a double in the shortest form that reads back to the same value.
///
/// ```
/// use causeway::table::fmt_f64;
/// assert_eq!(fmt_f64(0.1), "0.1");
/// assert_eq!(fmt_f64(1e-12).parse::<f64>().unwrap(), 1e-12);
/// ```
pub fn fmt_f64(v: f64) -> String {
    // `Debug` for f64 is Rust's shortest round-trip representation, with an exponent for very
    // large or small magnitudes.
    let s = format!("{v:?}");
    s.strip_suffix(".0").map(str::to_string).unwrap_or(s)
}
