//! Turning a text table into a dated price history, long or wide.
//!
//! Dates must be ISO (`YYYY-MM-DD`); a price is a finite decimal number, a blank, `NA` or `NaN` cell is a
//! missing value (handled later by the fill policy), but a column without a single price is an error. An
//! asset code may hold any printable text (commas and quotes included: every CSV written quotes them), but
//! no control character such as a line break, tab or NUL. Errors name the file, the row and the column.

use super::table::TextTable;
use super::truncate;
use crate::config::Layout;
use crate::error::{Error, Result};
use chrono::NaiveDate;
use std::collections::BTreeMap;
use std::path::Path;

/// Prices by date (rows) and asset (columns), in file order; `None` is a missing value.
#[derive(Debug, Clone)]
pub struct PriceHistory {
    pub dates: Vec<NaiveDate>,
    pub assets: Vec<String>,
    /// `values[asset][row]`.
    pub values: Vec<Vec<Option<f64>>>,
    /// Where each row came from in the file, for messages ("row 3 (line 5)").
    pub places: Vec<String>,
    /// Long layout only: the file's data row of each price, `cells[asset][row]` (`u32::MAX` where the
    /// file has no row for that date and asset), since one date spans several file rows there.
    pub cells: Option<Vec<Vec<u32>>>,
    /// File line of data row 0 for a CSV (`None` for Parquet), to name a long-layout row.
    pub first_line: Option<usize>,
    /// The layout that was used (after detection).
    pub layout: Layout,
}

impl PriceHistory {
    /// Removes the named columns with everything kept per column (`assets`, `values`, `cells`).
    pub fn remove_columns(&mut self, names: &[String]) {
        let keep: Vec<bool> = self.assets.iter().map(|a| !names.contains(a)).collect();
        let mut kept = keep.iter();
        self.assets
            .retain(|_| *kept.next().expect("one flag per column"));
        let mut kept = keep.iter();
        self.values
            .retain(|_| *kept.next().expect("one flag per column"));
        if let Some(cells) = self.cells.as_mut() {
            let mut kept = keep.iter();
            cells.retain(|_| *kept.next().expect("one flag per column"));
        }
    }

    /// Where the price of asset `a` on row `r` is, for messages: "row 3 (line 5), column `AS01`" in the
    /// wide layout, "row 7 (line 9), column `price` (asset `AS01`)" in the long one.
    pub fn cell(&self, a: usize, r: usize) -> String {
        let asset = &self.assets[a];
        let place = self.places_of(a, r);
        match self.cells {
            Some(_) => format!("{place}, column `price` (asset `{asset}`)"),
            None => format!("{place}, column `{asset}`"),
        }
    }

    /// The file row of asset `a`'s price on row `r` ("row 7 (line 9)"): its own row in the long layout.
    pub fn places_of(&self, a: usize, r: usize) -> String {
        match self.cells.as_ref().map(|c| c[a][r]) {
            Some(row) if row != u32::MAX => super::table::row_place(row as usize, self.first_line),
            _ => self.places[r].clone(),
        }
    }

    /// Keeps the rows `order` names, in that order (sorting, cutting at as-of).
    pub fn keep_rows(&mut self, order: &[usize]) {
        self.dates = order.iter().map(|&i| self.dates[i]).collect();
        self.places = order.iter().map(|&i| self.places[i].clone()).collect();
        for col in &mut self.values {
            *col = order.iter().map(|&i| col[i]).collect();
        }
        for col in self.cells.iter_mut().flatten() {
            *col = order.iter().map(|&i| col[i]).collect();
        }
    }
}

/// Parses an ISO date, naming the place on failure.
pub fn parse_date(path: &Path, place: &str, column: &str, text: &str) -> Result<NaiveDate> {
    let t = text.trim();
    iso_date(t).ok_or_else(|| {
        let hint = if NaiveDate::parse_from_str(t, "%d/%m/%Y").is_ok()
            || NaiveDate::parse_from_str(t, "%m/%d/%Y").is_ok()
        {
            "; dates must be ISO YYYY-MM-DD (this looks like a day/month format)"
        } else {
            "; dates must be real calendar dates written YYYY-MM-DD"
        };
        Error::data(
            path,
            format!(
                "{place}, column `{column}`: `{}` is not a valid date{hint}",
                truncate(t, 40)
            ),
        )
    })
}

/// A date written exactly `YYYY-MM-DD` (four-digit year, two-digit month and day) that exists. chrono alone
/// would also take `2024-1-5` or a six-digit year at the end of its calendar, where the month-end logic
/// has no next day.
fn iso_date(t: &str) -> Option<NaiveDate> {
    let b = t.as_bytes();
    let shape = b.len() == 10
        && b[4] == b'-'
        && b[7] == b'-'
        && b.iter()
            .enumerate()
            .all(|(i, c)| i == 4 || i == 7 || c.is_ascii_digit());
    shape
        .then(|| NaiveDate::parse_from_str(t, "%Y-%m-%d").ok())
        .flatten()
}

/// An asset code with a control character (line break, tab, NUL…) cannot be printed in the PDF or read
/// back from a spreadsheet as one code: refused, naming the place and the character.
pub fn check_code(path: &Path, place: &str, code: &str) -> Result<()> {
    let Some(c) = code.chars().find(|c| c.is_control()) else {
        return Ok(());
    };
    Err(Error::data(
        path,
        format!(
            "{place}: the asset code `{}` contains the control character U+{:04X}; asset codes must be printable text (letters, digits, punctuation and spaces)",
            truncate(&code.escape_debug().to_string(), 60),
            c as u32
        ),
    ))
}

/// Parses a price cell: `None` for a missing value, an error for text or a non-finite number.
pub fn parse_price(
    path: &Path,
    place: &str,
    column: &str,
    cell: Option<&str>,
) -> Result<Option<f64>> {
    let Some(raw) = cell else { return Ok(None) };
    let t = raw.trim();
    if t.is_empty() || t.eq_ignore_ascii_case("na") || t.eq_ignore_ascii_case("nan") {
        return Ok(None);
    }
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(Some(v)),
        Ok(_) => Err(Error::data(
            path,
            format!(
                "{place}, column `{column}`: price `{t}` is infinite; use a finite number or leave the cell blank"
            ),
        )),
        Err(_) => Err(Error::data(
            path,
            format!(
                "{place}, column `{column}`: price `{}` is not a number (use a plain decimal like 101.25, no thousands separators or currency signs)",
                truncate(t, 40)
            ),
        )),
    }
}

/// Parses the contents of a price file (CSV or Parquet by the extension of `path`, which also names the
/// file in messages) into a price history: the whole reader from bytes, for callers and fuzz targets that
/// hold the file in memory.
pub fn parse_prices(path: &Path, bytes: &[u8], layout: Layout) -> Result<PriceHistory> {
    from_table(path, &super::table::parse_table(path, bytes)?, layout)
}

/// Builds the price history, detecting the layout when asked to.
pub fn from_table(path: &Path, t: &TextTable, layout: Layout) -> Result<PriceHistory> {
    if t.rows() == 0 {
        return Err(Error::data(
            path,
            format!(
                "{}: no data rows follow the header; the file needs at least one dated row of prices",
                t.header_place()
            ),
        ));
    }
    let date_col = t.find("date").ok_or_else(|| no_date_column(path, t))?;
    let is_long = t.find("asset").is_some() && t.find("price").is_some() && t.names.len() == 3;
    let hist = match (layout, is_long) {
        (Layout::Long, _) | (Layout::Auto, true) => long(path, t, date_col),
        (Layout::Wide, _) | (Layout::Auto, false) => wide(path, t, date_col),
    }?;
    check_some_price(path, t, &hist)?;
    Ok(hist)
}

/// A missing `date` column, with a hint when the header itself looks like a row of data.
fn no_date_column(path: &Path, t: &TextTable) -> Error {
    let looks_like_data = t
        .names
        .first()
        .is_some_and(|n| iso_date(n.trim()).is_some());
    let hint = if looks_like_data {
        "; the first line looks like data: add a header line such as `date,AS01,AS02`"
    } else {
        ""
    };
    Error::data(
        path,
        format!(
            "{}: has no `date` column (columns: {}){hint}",
            t.header_place(),
            truncate(&t.names.join(", "), 80)
        ),
    )
}

/// An asset without a single price is a broken feed, not a history that starts late: it stops the run
/// rather than being dropped quietly by the fill policy.
fn check_some_price(path: &Path, t: &TextTable, h: &PriceHistory) -> Result<()> {
    let Some((a, _)) = h
        .assets
        .iter()
        .zip(&h.values)
        .find(|(_, v)| v.iter().all(Option::is_none))
    else {
        return Ok(());
    };
    let what = match h.layout {
        Layout::Long => format!("asset `{a}` (column `asset`): none of its rows has a price"),
        _ => format!(
            "column `{a}`: no price in any of its {} rows ({} to {})",
            t.rows(),
            t.place(0),
            t.place(t.rows() - 1)
        ),
    };
    Err(Error::data(
        path,
        format!(
            "{what}; every cell is blank, NA or NaN: supply its prices or remove the asset from this file and from the asset metadata"
        ),
    ))
}

fn wide(path: &Path, t: &TextTable, date_col: usize) -> Result<PriceHistory> {
    let mut dates = Vec::with_capacity(t.rows());
    let mut places = Vec::with_capacity(t.rows());
    for row in 0..t.rows() {
        let place = t.place(row);
        let cell = t.columns[date_col][row].as_deref().unwrap_or("");
        dates.push(parse_date(path, &place, "date", cell)?);
        places.push(place);
    }
    let mut assets = Vec::new();
    let mut values = Vec::new();
    for (c, name) in t.names.iter().enumerate().filter(|(c, _)| *c != date_col) {
        check_code(
            path,
            &format!("{}, column {}", t.header_place(), c + 1),
            name.trim(),
        )?;
        let col: Result<Vec<_>> = (0..t.rows())
            .map(|r| parse_price(path, &places[r], name, t.columns[c][r].as_deref()))
            .collect();
        assets.push(name.trim().to_string());
        values.push(col?);
    }
    if assets.is_empty() {
        return Err(Error::data(
            path,
            "has a `date` column but no asset columns",
        ));
    }
    Ok(PriceHistory {
        dates,
        assets,
        values,
        places,
        cells: None,
        first_line: None,
        layout: Layout::Wide,
    })
}

/// A long-layout price and the table row it came from.
type LongCell = (Option<f64>, u32);
/// The long layout's rows grouped by date (with the place of the date's first row), then by asset.
type ByDate = BTreeMap<NaiveDate, (String, BTreeMap<String, LongCell>)>;

fn long(path: &Path, t: &TextTable, date_col: usize) -> Result<PriceHistory> {
    let need = |n: &str| {
        t.find(n).ok_or_else(|| {
            Error::data(
                path,
                format!("{}: the long layout needs a `{n}` column", t.header_place()),
            )
        })
    };
    let cols = [date_col, need("asset")?, need("price")?];
    let mut by_date = ByDate::new();
    let mut assets: Vec<String> = Vec::new();
    for row in 0..t.rows() {
        let (date, asset, price) = long_row(path, t, row, cols)?;
        let place = t.place(row);
        let entry = by_date
            .entry(date)
            .or_insert_with(|| (place.clone(), BTreeMap::new()));
        let row32 = u32::try_from(row).unwrap_or(u32::MAX - 1);
        if entry.1.insert(asset.clone(), (price, row32)).is_some() {
            return Err(Error::data(
                path,
                format!(
                    "{place}: asset `{asset}` has a second price for {date}; keep one row per date and asset"
                ),
            ));
        }
        if !assets.contains(&asset) {
            assets.push(asset);
        }
    }
    let dates: Vec<NaiveDate> = by_date.keys().copied().collect();
    let places = by_date.values().map(|(p, _)| p.clone()).collect();
    let (values, cells) = pivot(&by_date, &assets);
    Ok(PriceHistory {
        dates,
        assets,
        values,
        places,
        cells: Some(cells),
        first_line: t.is_csv.then_some(t.first_line),
        layout: Layout::Long,
    })
}

/// One long-layout row: its date, asset code (checked) and price (blank is `None`). `cols` are the
/// date, asset and price columns.
fn long_row(
    path: &Path,
    t: &TextTable,
    row: usize,
    cols: [usize; 3],
) -> Result<(NaiveDate, String, Option<f64>)> {
    let [date_col, asset_col, price_col] = cols;
    let place = t.place(row);
    let date = parse_date(
        path,
        &place,
        "date",
        t.columns[date_col][row].as_deref().unwrap_or(""),
    )?;
    let asset = t.columns[asset_col][row]
        .as_deref()
        .unwrap_or("")
        .trim()
        .to_string();
    if asset.is_empty() {
        return Err(Error::data(
            path,
            format!("{place}, column `asset`: the asset code is blank"),
        ));
    }
    check_code(path, &format!("{place}, column `asset`"), &asset)?;
    let price = parse_price(path, &place, "price", t.columns[price_col][row].as_deref())?;
    Ok((date, asset, price))
}

/// The wide form of long rows: per asset, its price on each date (`None` where it has no row) and the
/// table row of each (`u32::MAX` where none).
fn pivot(by_date: &ByDate, assets: &[String]) -> (Vec<Vec<Option<f64>>>, Vec<Vec<u32>>) {
    let (mut values, mut cells) = (Vec::new(), Vec::new());
    for a in assets {
        let column: Vec<Option<&LongCell>> = by_date.values().map(|(_, m)| m.get(a)).collect();
        values.push(column.iter().map(|c| c.and_then(|c| c.0)).collect());
        cells.push(column.iter().map(|c| c.map_or(u32::MAX, |c| c.1)).collect());
    }
    (values, cells)
}
