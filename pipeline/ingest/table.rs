//! Reading a CSV or Parquet file into a plain text table with polars.
//!
//! Every cell becomes an optional string so that one parser downstream checks values and reports the exact
//! row and column of a bad one. Leading `#` lines of a CSV are comments (the demo files say there that their
//! data is synthetic); the line numbers in messages count them. Before polars sees a CSV, its lines are
//! checked here (encoding, line ends, header names, one field per header column on every row), so that a
//! malformed file is reported at its line rather than misread or reported without a place.

use super::truncate;
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
        row_place(row, self.is_csv.then_some(self.first_line))
    }

    /// Where the header is, for messages: "line 2 (header)" for CSV, "the column list" for Parquet.
    pub fn header_place(&self) -> String {
        if self.is_csv {
            format!("line {} (header)", self.first_line - 1)
        } else {
            "the column list".to_string()
        }
    }

    /// Index of a column by case-insensitive name.
    pub fn find(&self, name: &str) -> Option<usize> {
        self.names
            .iter()
            .position(|n| n.trim().eq_ignore_ascii_case(name))
    }
}

/// "row 3 (line 5)" for data row index 2 of a CSV whose data start at `first_line` 3, "row 3" without
/// line numbers (Parquet).
pub fn row_place(row: usize, first_line: Option<usize>) -> String {
    match first_line {
        Some(first) => format!("row {} (line {})", row + 1, row + first),
        None => format!("row {}", row + 1),
    }
}

/// Reads `path` as CSV or Parquet (chosen by extension: `.parquet`/`.pq` is Parquet, anything else CSV).
pub fn read_table(path: &Path) -> Result<TextTable> {
    parse_table(path, &crate::error::fs::read(path)?)
}

/// Parses the contents of a file as CSV or Parquet, chosen by the extension of `path`, which otherwise only
/// names the file in messages. Any bytes give a table or an error, never a panic (the fuzz targets in
/// `fuzz/` hold this function to that).
pub fn parse_table(path: &Path, bytes: &[u8]) -> Result<TextTable> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .unwrap_or("")
        .to_ascii_lowercase();
    if ext == "parquet" || ext == "pq" {
        parse_parquet(path, bytes)
    } else {
        parse_csv(path, bytes)
    }
}

/// A CSV file's text split into its parts: leading comment lines, the header line and the data lines.
struct CsvText<'a> {
    comments: usize,
    header: &'a str,
    /// Data lines after the header, trailing blank lines removed.
    body: Vec<&'a str>,
}

impl CsvText<'_> {
    /// 1-based file line number of the header.
    fn header_line(&self) -> usize {
        self.comments + 1
    }
}

fn parse_csv(path: &Path, bytes: &[u8]) -> Result<TextTable> {
    let text = csv_text(path, bytes)?;
    let csv = split_lines(path, text)?;
    check_delimiter(path, &csv)?;
    let names = check_names(path, &csv)?;
    check_rows(path, &csv, names.len())?;
    let mut body = String::with_capacity(text.len());
    for l in std::iter::once(csv.header).chain(csv.body.iter().copied()) {
        body.push_str(l);
        body.push('\n');
    }
    let df = CsvReadOptions::default()
        .with_has_header(true)
        .with_infer_schema_length(Some(0))
        .with_raise_if_empty(false)
        .map_parse_options(|o| o.with_missing_is_null(true))
        .into_reader_with_file_handle(std::io::Cursor::new(body.into_bytes()))
        .finish()
        .map_err(|e| Error::data(path, format!("cannot be read as CSV: {e}")))?;
    let mut table = frame_to_text(path, &df)?;
    table.first_line = csv.header_line() + 1;
    table.is_csv = true;
    if table.names.len() != names.len() || table.rows() != csv.body.len() {
        // The line checks above should make this impossible; if the CSV reader still disagrees with them,
        // say so rather than report rows at the wrong lines.
        return Err(Error::data(
            path,
            format!(
                "the CSV reader found {} columns and {} rows where the lines give {} and {}; check the file for quotes that span lines",
                table.names.len(),
                table.rows(),
                names.len(),
                csv.body.len()
            ),
        ));
    }
    table.names = names;
    Ok(table)
}

/// The file as UTF-8 text without a byte-order mark. A UTF-8 byte-order mark is accepted and dropped
/// (spreadsheet programs write one); UTF-16 and other encodings are errors naming the line and byte.
fn csv_text<'a>(path: &Path, bytes: &'a [u8]) -> Result<&'a str> {
    if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) {
        return Err(Error::data(
            path,
            "line 1, byte 0: the file is UTF-16 text (it starts with a UTF-16 byte-order mark); save it as UTF-8 CSV",
        ));
    }
    let text = std::str::from_utf8(bytes).map_err(|e| {
        let at = e.valid_up_to();
        let line = bytes[..at].iter().filter(|b| **b == b'\n').count() + 1;
        Error::data(
            path,
            format!("line {line}, byte {at}: not UTF-8 text; save the file as UTF-8 CSV"),
        )
    })?;
    Ok(text.strip_prefix('\u{feff}').unwrap_or(text))
}

/// Splits the text into comment lines, header and data lines; an empty file, a file of comments only and
/// a file whose lines end in a bare carriage return are errors.
fn split_lines<'a>(path: &Path, text: &'a str) -> Result<CsvText<'a>> {
    if text.contains('\r') && !text.contains('\n') {
        return Err(Error::data(
            path,
            "line 1: the lines end in a bare carriage return (`\\r`, an old Mac format); save the file with LF or CRLF line ends",
        ));
    }
    if text.trim().is_empty() {
        return Err(Error::data(
            path,
            "line 1: the file is empty; expected a header line such as `date,AS01,AS02` or `date,asset,price`",
        ));
    }
    let mut lines = text.lines();
    let comments = text
        .lines()
        .take_while(|l| l.trim_start().starts_with('#'))
        .count();
    let header = lines.nth(comments).unwrap_or("");
    if header.trim().is_empty() {
        return Err(Error::data(
            path,
            format!(
                "line {}: expected a header line such as `date,AS01,AS02` or `date,asset,price` after {comments} comment line(s), found {}",
                comments + 1,
                if comments == text.lines().count() {
                    "the end of the file"
                } else {
                    "a blank line"
                }
            ),
        ));
    }
    let mut body: Vec<&str> = lines.collect();
    while body.last().is_some_and(|l| l.trim().is_empty()) {
        body.pop();
    }
    Ok(CsvText {
        comments,
        header,
        body,
    })
}

fn check_delimiter(path: &Path, csv: &CsvText) -> Result<()> {
    let (line, header) = (csv.header_line(), csv.header);
    if header.contains(',') {
        return Ok(());
    }
    for (sep, name) in [(';', "semicolons"), ('\t', "tabs"), ('|', "pipes")] {
        if header.contains(sep) {
            return Err(Error::data(
                path,
                format!(
                    "line {line} (header) is separated by {name}; tailpack reads comma-separated files: convert the delimiter to `,`"
                ),
            ));
        }
    }
    Err(Error::data(
        path,
        format!(
            "line {line} (header) `{}` has a single column; expected `date` followed by asset columns, or `date,asset,price`",
            truncate(header, 60)
        ),
    ))
}

/// The header's column names, each non-empty and distinct.
fn check_names(path: &Path, csv: &CsvText) -> Result<Vec<String>> {
    let line = csv.header_line();
    let (cells, open) = split_fields(csv.header);
    if open {
        return Err(Error::data(
            path,
            format!("line {line} (header): a quoted name is not closed on its line"),
        ));
    }
    let names: Vec<String> = cells.iter().map(|c| unquote(c)).collect();
    // A map, not a scan of the names before each one: a header line of megabytes stays linear.
    let mut seen = std::collections::HashMap::with_capacity(names.len());
    for (i, name) in names.iter().enumerate() {
        if name.is_empty() {
            return Err(Error::data(
                path,
                format!(
                    "line {line} (header), column {}: the column name is empty; every column needs a name",
                    i + 1
                ),
            ));
        }
        if let Some(j) = seen.insert(name.as_str(), i) {
            return Err(Error::data(
                path,
                format!(
                    "line {line} (header), columns {} and {}: both are named `{}`; each column (each asset) may appear once",
                    j + 1,
                    i + 1,
                    truncate(name, 40)
                ),
            ));
        }
    }
    Ok(names)
}

/// Every data line must be non-blank, close its quotes and have as many fields as the header; otherwise the
/// CSV reader would silently fill short rows with missing values or report an error without a line.
fn check_rows(path: &Path, csv: &CsvText, width: usize) -> Result<()> {
    for (r, l) in csv.body.iter().enumerate() {
        let place = format!("row {} (line {})", r + 1, csv.header_line() + 1 + r);
        if l.trim().is_empty() {
            return Err(Error::data(
                path,
                format!("{place} is blank; remove blank lines inside the table"),
            ));
        }
        let (cells, open) = split_fields(l);
        if open {
            return Err(Error::data(
                path,
                format!("{place}: a quoted value is not closed on its line"),
            ));
        }
        if cells.len() != width {
            let hint = if cells.len() > width {
                "a decimal comma (write 20.5, not 20,5), a thousands separator or a comma inside an unquoted value?"
            } else {
                "a missing separator or a cut-off line? leave a missing price as an empty cell between commas"
            };
            return Err(Error::data(
                path,
                format!(
                    "{place} has {} fields but the header (line {}) has {width}: {hint}",
                    cells.len(),
                    csv.header_line()
                ),
            ));
        }
    }
    Ok(())
}

/// A header field as RFC 4180 (section 2, rules 5 and 7) reads it: enclosing double quotes removed and a
/// doubled quote inside read as one (`"AS""02"` is `AS"02`); white space around the name is dropped, as
/// for every name. The CSV reader keeps a doubled quote in a column name as two, so the table's names are
/// these.
fn unquote(cell: &str) -> String {
    let t = cell.trim();
    match t.strip_prefix('"').and_then(|rest| rest.strip_suffix('"')) {
        Some(inner) => inner.replace("\"\"", "\"").trim().to_string(),
        None => t.to_string(),
    }
}

/// Splits one line at commas outside double quotes; the flag says whether a quote was left open.
fn split_fields(line: &str) -> (Vec<&str>, bool) {
    let (mut cells, mut start, mut quoted) = (Vec::new(), 0, false);
    for (i, ch) in line.char_indices() {
        match ch {
            '"' => quoted = !quoted,
            ',' if !quoted => {
                cells.push(&line[start..i]);
                start = i + 1;
            }
            _ => {}
        }
    }
    cells.push(&line[start..]);
    (cells, quoted)
}

fn parse_parquet(path: &Path, bytes: &[u8]) -> Result<TextTable> {
    frame_to_text(path, &parquet_frame(path, bytes)?)
}

/// A Parquet file's contents as polars reads them, after [`super::parquet_guard::check`]; a damaged file
/// is a data error naming it, never a panic.
pub fn parquet_frame(path: &Path, bytes: &[u8]) -> Result<DataFrame> {
    let n = bytes.len();
    super::parquet_guard::check(path, bytes)?;
    let read = quiet_catch(|| ParquetReader::new(std::io::Cursor::new(bytes)).finish());
    let df = match read {
        Ok(r) => r.map_err(|e| {
            Error::data(
                path,
                format!("cannot be read as Parquet ({n} bytes; damaged or not written by a Parquet writer?): {e}"),
            )
        })?,
        Err(what) => {
            return Err(Error::data(
                path,
                format!(
                    "cannot be read as Parquet ({n} bytes): its data pages are damaged (the Parquet decoder stopped: {}); write the file again from its source",
                    truncate(&what, 120)
                ),
            ));
        }
    };
    Ok(df)
}

/// Readers inside [`quiet_catch`] now; while any are, a panic prints nothing.
static QUIET_READERS: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);

/// Runs `f`, turning a panic inside it into `Err` with the panic's message on one line.
///
/// The Parquet decoder panics on some damaged pages instead of returning an error; such a file is bad data
/// and gets a data error like any other, so the panic must neither end the run nor print the decoder's
/// own report. The panic hook installed here (once, wrapping whatever hook was there) stays silent while
/// a reader runs in `quiet_catch` and defers to the previous hook otherwise, so panics anywhere else are
/// reported as before. Silence covers all threads, as the decoder may panic on a worker thread of its own.
fn quiet_catch<T>(f: impl FnOnce() -> T) -> std::result::Result<T, String> {
    use std::sync::atomic::Ordering;
    static HOOK: std::sync::Once = std::sync::Once::new();
    HOOK.call_once(|| {
        let previous = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            if QUIET_READERS.load(Ordering::SeqCst) == 0 {
                previous(info);
            }
        }));
    });
    QUIET_READERS.fetch_add(1, Ordering::SeqCst);
    let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(f));
    QUIET_READERS.fetch_sub(1, Ordering::SeqCst);
    r.map_err(|payload| {
        let text = if let Some(s) = payload.downcast_ref::<&str>() {
            (*s).to_string()
        } else if let Some(s) = payload.downcast_ref::<String>() {
            s.clone()
        } else {
            "no message".to_string()
        };
        text.split_whitespace().collect::<Vec<_>>().join(" ")
    })
}

/// Turns every column into optional strings (numbers with round-trip precision, dates as ISO text).
fn frame_to_text(path: &Path, df: &DataFrame) -> Result<TextTable> {
    let mut names = Vec::with_capacity(df.width());
    let mut columns = Vec::with_capacity(df.width());
    for col in df.columns() {
        names.push(col.name().to_string());
        columns.push(column_to_text(path, col)?);
    }
    Ok(TextTable {
        names,
        columns,
        first_line: 2,
        is_csv: false,
    })
}

fn column_to_text(path: &Path, col: &Column) -> Result<Vec<Option<String>>> {
    let dtype = col.dtype().clone();
    if dtype.is_float() || dtype.is_integer() {
        let f = col
            .cast(&DataType::Float64)
            .map_err(|e| Error::data(path, format!("column `{}`: {e}", col.name())))?;
        let ca = f.f64().map_err(|e| Error::data(path, e.to_string()))?;
        return Ok(ca.iter().map(|v| v.map(|x| format!("{x:?}"))).collect());
    }
    if dtype == DataType::Date {
        return date_column_to_text(path, col);
    }
    let s = match dtype {
        DataType::String => col.cast(&DataType::String),
        other => {
            return Err(Error::data(
                path,
                format!(
                    "column `{}` has type {other}; expected text, a date or a number",
                    col.name()
                ),
            ));
        }
    }
    .map_err(|e| Error::data(path, format!("column `{}`: {e}", col.name())))?;
    let ca = s.str().map_err(|e| Error::data(path, e.to_string()))?;
    Ok(ca.iter().map(|v| v.map(str::to_string)).collect())
}

/// A Parquet date column (days since 1970-01-01, Parquet format specification, logical type DATE) as ISO text.
///
/// Done here rather than by polars' cast to text, which panics on a day count outside the calendar it
/// supports (found by fuzzing); such a value is bad data and is reported with its row.
fn date_column_to_text(path: &Path, col: &Column) -> Result<Vec<Option<String>>> {
    let days = col
        .date()
        .map_err(|e| Error::data(path, format!("column `{}`: {e}", col.name())))?
        .physical();
    let epoch = chrono::NaiveDate::from_ymd_opt(1970, 1, 1).expect("1970-01-01 is a date");
    days.iter()
        .enumerate()
        .map(|(row, d)| {
            let Some(d) = d else { return Ok(None) };
            epoch
                .checked_add_signed(chrono::TimeDelta::days(i64::from(d)))
                .map(|date| Some(date.format("%Y-%m-%d").to_string()))
                .ok_or_else(|| {
                    Error::data(
                        path,
                        format!(
                            "row {}, column `{}`: the date is {d} days from 1970-01-01, outside any calendar; write the file again from its source",
                            row + 1,
                            col.name()
                        ),
                    )
                })
        })
        .collect()
}
