//! Reading a CSV or Parquet file into a plain text table with polars.
//!
//! Every cell becomes an optional string so that one parser downstream checks values and reports the exact
//! row and column of a bad one. Leading `#` lines of a CSV are comments (the demo files say there that their
//! data is synthetic); the line numbers in messages count them.

use crate::error::{Error, Result};
use polars::prelude::*;
use std::path::Path;

/// A file read as text: column names and, per column, one optional cell per data row.
#[derive(Debug, Clone)]
pub struct TextTable {
    pub names: Vec<String>,
    pub columns: Vec<Vec<Option<String>>>,
    /// File line number of data row 0 (1-based), so messages can name lines.
    pub first_line: usize,
    /// Whether the file is a CSV (line numbers meaningful) or Parquet (row numbers only).
    pub is_csv: bool,
}

impl TextTable {
    /// Number of data rows.
    pub fn rows(&self) -> usize {
        self.columns.first().map_or(0, Vec::len)
    }

    /// "row 3 (line 5)" for CSV, "row 3" for Parquet; rows count from 1 after the header.
    pub fn place(&self, row: usize) -> String {
        if self.is_csv {
            format!("row {} (line {})", row + 1, row + self.first_line)
        } else {
            format!("row {}", row + 1)
        }
    }

    /// Index of a column by case-insensitive name.
    pub fn find(&self, name: &str) -> Option<usize> {
        self.names.iter().position(|n| n.trim().eq_ignore_ascii_case(name))
    }
}

/// Reads `path` as CSV or Parquet (chosen by extension: `.parquet`/`.pq` is Parquet, anything else CSV).
pub fn read_table(path: &Path) -> Result<TextTable> {
    let ext = path.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase();
    if ext == "parquet" || ext == "pq" {
        read_parquet(path)
    } else {
        read_csv(path)
    }
}

fn read_csv(path: &Path) -> Result<TextTable> {
    let bytes = crate::error::fs::read(path)?;
    let text = std::str::from_utf8(&bytes)
        .map_err(|e| Error::data(path, format!("is not UTF-8 text (byte {}); save it as UTF-8 CSV", e.valid_up_to())))?;
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let comments = text.lines().take_while(|l| l.trim_start().starts_with('#')).count();
    let header = text.lines().nth(comments).unwrap_or("");
    if header.trim().is_empty() {
        return Err(Error::data(path, "is empty: expected a header line such as `date,ASSET1,ASSET2` or `date,asset,price`"));
    }
    check_delimiter(path, header)?;
    let body: String = text.lines().skip(comments).flat_map(|l| [l, "\n"]).collect();
    let cursor = std::io::Cursor::new(body.into_bytes());
    let df = CsvReadOptions::default()
        .with_has_header(true)
        .with_infer_schema_length(Some(0))
        .with_raise_if_empty(false)
        .map_parse_options(|o| o.with_missing_is_null(true))
        .into_reader_with_file_handle(cursor)
        .finish()
        .map_err(|e| Error::data(path, format!("cannot be read as CSV: {e}")))?;
    let mut table = frame_to_text(path, &df)?;
    table.first_line = comments + 2;
    table.is_csv = true;
    check_names(path, &table, header)?;
    Ok(table)
}

fn check_delimiter(path: &Path, header: &str) -> Result<()> {
    if header.contains(',') {
        return Ok(());
    }
    for (sep, name) in [(';', "semicolons"), ('\t', "tabs"), ('|', "pipes")] {
        if header.contains(sep) {
            return Err(Error::data(path, format!("line 1 (header) is separated by {name}; tailpack reads comma-separated files: convert the delimiter to `,`")));
        }
    }
    Err(Error::data(path, format!("header `{}` has a single column; expected `date` followed by asset columns, or `date,asset,price`", truncate(header, 60))))
}

fn check_names(path: &Path, t: &TextTable, header: &str) -> Result<()> {
    let mut seen = std::collections::HashSet::new();
    for raw in header.split(',') {
        let name = raw.trim().trim_matches('"');
        if name.is_empty() {
            return Err(Error::data(path, "header has an empty column name; every column needs a name"));
        }
        if !seen.insert(name.to_string()) {
            return Err(Error::data(path, format!("header names column `{name}` twice; each asset may appear once")));
        }
    }
    debug_assert!(t.names.len() == seen.len());
    Ok(())
}

fn read_parquet(path: &Path) -> Result<TextTable> {
    let file = std::fs::File::open(path)
        .map_err(|source| Error::Io { action: "cannot open", path: path.to_path_buf(), source })?;
    let df = ParquetReader::new(file)
        .finish()
        .map_err(|e| Error::data(path, format!("cannot be read as Parquet (truncated or not a Parquet file?): {e}")))?;
    frame_to_text(path, &df)
}

/// Turns every column into optional strings (numbers with round-trip precision, dates as ISO text).
fn frame_to_text(path: &Path, df: &DataFrame) -> Result<TextTable> {
    let mut names = Vec::with_capacity(df.width());
    let mut columns = Vec::with_capacity(df.width());
    for col in df.columns() {
        names.push(col.name().to_string());
        columns.push(column_to_text(path, col)?);
    }
    Ok(TextTable { names, columns, first_line: 2, is_csv: false })
}

fn column_to_text(path: &Path, col: &Column) -> Result<Vec<Option<String>>> {
    let dtype = col.dtype().clone();
    if dtype.is_float() || dtype.is_integer() {
        let f = col.cast(&DataType::Float64).map_err(|e| Error::data(path, format!("column `{}`: {e}", col.name())))?;
        let ca = f.f64().map_err(|e| Error::data(path, e.to_string()))?;
        return Ok(ca.iter().map(|v| v.map(|x| format!("{x:?}"))).collect());
    }
    let s = match dtype {
        DataType::String | DataType::Date => col.cast(&DataType::String),
        other => return Err(Error::data(path, format!("column `{}` has type {other}; expected text, a date or a number", col.name()))),
    }
    .map_err(|e| Error::data(path, format!("column `{}`: {e}", col.name())))?;
    let ca = s.str().map_err(|e| Error::data(path, e.to_string()))?;
    Ok(ca.iter().map(|v| v.map(str::to_string)).collect())
}

/// First `n` characters of `s`, with an ellipsis when cut (keeps messages short for huge lines).
pub fn truncate(s: &str, n: usize) -> String {
    if s.chars().count() <= n {
        s.to_string()
    } else {
        format!("{}…", s.chars().take(n).collect::<String>())
    }
}
