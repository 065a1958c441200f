//! A whole table in memory (time in UTC milliseconds, numeric or text
//! columns), and the error type of every table reader. Reading lives in
//! [`crate::stream`] (`read_table`), which builds on these types.

use std::fmt;
use std::path::{Path, PathBuf};

/// A bad table: names the file, the column and the first offending row.
#[derive(Debug, Clone)]
pub struct TableError {
    /// The table's file.
    pub file: PathBuf,
    /// The column at fault, if one is.
    pub column: Option<String>,
    /// 0-based data row (header excluded).
    pub row: Option<usize>,
    /// What is wrong.
    pub message: String,
    /// How to fix it.
    pub help: String,
}

impl fmt::Display for TableError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "error: {}", self.message)?;
        write!(f, "  --> {}", self.file.display())?;
        if let Some(c) = &self.column {
            write!(f, ", column `{c}`")?;
        }
        if let Some(r) = self.row {
            write!(f, ", row {r} (counting data rows from 0)")?;
        }
        write!(f, "\n  = help: {}", self.help)
    }
}

impl std::error::Error for TableError {}

/// A [`TableError`] from borrowed parts.
pub fn table_err(
    file: &Path,
    column: Option<&str>,
    row: Option<usize>,
    message: impl Into<String>,
    help: impl Into<String>,
) -> TableError {
    TableError {
        file: file.to_path_buf(),
        column: column.map(str::to_string),
        row,
        message: message.into(),
        help: help.into(),
    }
}

/// A column as read: numbers, or text (state names, appliance ids).
#[derive(Clone, Debug)]
pub enum Column {
    /// Numbers (null as NaN).
    Num(Vec<f64>),
    /// Text.
    Text(Vec<String>),
}

/// A table with its `time` column in ms since 1970 UTC.
#[derive(Clone, Debug)]
pub struct Table {
    /// The file it was read from.
    pub file: PathBuf,
    /// Each row's time, ms since 1970-01-01 UTC.
    pub time_ms: Vec<i64>,
    /// The time zone in the Parquet time type, if any.
    pub time_zone: Option<String>,
    /// Every column but `time`, by name, in the file's order.
    pub columns: Vec<(String, Column)>,
}

impl Table {
    /// The numeric column `name`, if there is one.
    pub fn num(&self, name: &str) -> Option<&[f64]> {
        self.columns
            .iter()
            .find(|(n, _)| n == name)
            .and_then(|(_, c)| match c {
                Column::Num(v) => Some(v.as_slice()),
                _ => None,
            })
    }
    /// The text column `name`, if there is one.
    pub fn text(&self, name: &str) -> Option<&[String]> {
        self.columns
            .iter()
            .find(|(n, _)| n == name)
            .and_then(|(_, c)| match c {
                Column::Text(v) => Some(v.as_slice()),
                _ => None,
            })
    }
    /// Whether there is a column `name` of either kind.
    pub fn has(&self, name: &str) -> bool {
        self.columns.iter().any(|(n, _)| n == name)
    }
}

impl From<TableError> for crate::diagnostic::Error {
    /// A bad table: its file, and the column and row as the place.
    fn from(e: TableError) -> crate::diagnostic::Error {
        let mut place = Vec::new();
        if let Some(c) = &e.column {
            place.push(format!("column `{c}`"));
        }
        if let Some(r) = e.row {
            place.push(format!("row {r} (counting data rows from 0)"));
        }
        let mut d = crate::diagnostic::Error::file(&e.file, e.message, e.help);
        d.path = place.join(", ");
        d
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_table_error_keeps_its_file_column_row_and_help() {
        let t = table_err(
            Path::new("estimate.csv"),
            Some("fridge_p_w"),
            Some(4),
            "a negative power",
            "write zero or more",
        );
        let e = crate::diagnostic::Error::from(t);
        assert_eq!(e.status.code(), 2);
        assert_eq!(e.failed().status, crate::diagnostic::Status::Failed);
        let shown = crate::diagnostic::Error::from(table_err(
            Path::new("estimate.csv"),
            Some("fridge_p_w"),
            Some(4),
            "a negative power",
            "write zero or more",
        ))
        .to_string();
        assert!(
            shown.starts_with(
                "error: a negative power\n  --> estimate.csv (at column `fridge_p_w`, row 4"
            ),
            "{shown}"
        );
        assert!(shown.ends_with("  = help: write zero or more"), "{shown}");
    }
}
