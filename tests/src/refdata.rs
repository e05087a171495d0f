//! Readers for the committed reference tables under `tests/reference/`.
//!
//! Each table is a CSV written by a script that sits beside it; its first lines are `#`
//! comments naming the script, the library and version, and the formula's source.

use std::path::PathBuf;

/// Path of a file under `tests/reference/`.
pub fn path(rel: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("reference")
        .join(rel)
}

/// A numeric CSV table: header names and rows of `f64`, `#` comment lines skipped.
#[derive(Debug, Clone)]
pub struct Table {
    /// Column names from the header line.
    pub columns: Vec<String>,
    /// Data rows, each as long as `columns`.
    pub rows: Vec<Vec<f64>>,
}

impl Table {
    /// Reads `tests/reference/<rel>`. Errors name the file, line and cell.
    pub fn load(rel: &str) -> Result<Table, String> {
        let p = path(rel);
        let text = std::fs::read_to_string(&p).map_err(|e| format!("{}: {e}", p.display()))?;
        let mut lines = text
            .lines()
            .enumerate()
            .filter(|(_, l)| !l.trim_start().starts_with('#') && !l.trim().is_empty());
        let (_, header) = lines
            .next()
            .ok_or_else(|| format!("{}: no header", p.display()))?;
        let columns: Vec<String> = header.split(',').map(|c| c.trim().to_string()).collect();
        let mut rows = Vec::new();
        for (n, line) in lines {
            let row: Result<Vec<f64>, String> = line
                .split(',')
                .map(|c| {
                    c.trim()
                        .parse::<f64>()
                        .map_err(|e| format!("{}:{}: cell {c:?}: {e}", p.display(), n + 1))
                })
                .collect();
            let row = row?;
            if row.len() != columns.len() {
                return Err(format!(
                    "{}:{}: {} cells, header has {}",
                    p.display(),
                    n + 1,
                    row.len(),
                    columns.len()
                ));
            }
            rows.push(row);
        }
        Ok(Table { columns, rows })
    }

    /// Index of a named column.
    pub fn col(&self, name: &str) -> Result<usize, String> {
        self.columns
            .iter()
            .position(|c| c == name)
            .ok_or_else(|| format!("no column {name:?} in {:?}", self.columns))
    }
}
