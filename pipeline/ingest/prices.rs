//! Turning a text table into a dated price history, long or wide.
//!
//! Dates must be ISO (`YYYY-MM-DD`); a price is a finite decimal number, a blank, `NA` or `NaN` cell is a
//! missing value (handled later by the fill policy). Errors name the file, the row and the column.

use super::table::{truncate, TextTable};
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
    /// The layout that was used (after detection).
    pub layout: Layout,
}

/// Parses an ISO date, naming the place on failure.
pub fn parse_date(path: &Path, place: &str, column: &str, text: &str) -> Result<NaiveDate> {
    let t = text.trim();
    NaiveDate::parse_from_str(t, "%Y-%m-%d").map_err(|_| {
        let hint = if NaiveDate::parse_from_str(t, "%d/%m/%Y").is_ok() || NaiveDate::parse_from_str(t, "%m/%d/%Y").is_ok() {
            "; dates must be ISO YYYY-MM-DD (this looks like a day/month format)"
        } else {
            "; dates must be real calendar dates written YYYY-MM-DD"
        };
        Error::data(path, format!("{place}, column `{column}`: `{}` is not a valid date{hint}", truncate(t, 40)))
    })
}

/// Parses a price cell: `None` for a missing value, an error for text or a non-finite number.
pub fn parse_price(path: &Path, place: &str, column: &str, cell: Option<&str>) -> Result<Option<f64>> {
    let Some(raw) = cell else { return Ok(None) };
    let t = raw.trim();
    if t.is_empty() || t.eq_ignore_ascii_case("na") || t.eq_ignore_ascii_case("nan") {
        return Ok(None);
    }
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(Some(v)),
        Ok(_) => Err(Error::data(path, format!("{place}, column `{column}`: price `{t}` is infinite; use a finite number or leave the cell blank"))),
        Err(_) => Err(Error::data(path, format!("{place}, column `{column}`: price `{}` is not a number (use a plain decimal like 101.25, no thousands separators or currency signs)", truncate(t, 40)))),
    }
}

/// Builds the price history, detecting the layout when asked to.
pub fn from_table(path: &Path, t: &TextTable, layout: Layout) -> Result<PriceHistory> {
    if t.rows() == 0 {
        return Err(Error::data(path, "has a header but no data rows"));
    }
    let date_col = t.find("date").ok_or_else(|| Error::data(path, format!("has no `date` column (columns: {})", truncate(&t.names.join(", "), 80))))?;
    let is_long = t.find("asset").is_some() && t.find("price").is_some() && t.names.len() == 3;
    match (layout, is_long) {
        (Layout::Long, _) | (Layout::Auto, true) => long(path, t, date_col),
        (Layout::Wide, _) | (Layout::Auto, false) => wide(path, t, date_col),
    }
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
        let col: Result<Vec<_>> =
            (0..t.rows()).map(|r| parse_price(path, &places[r], name, t.columns[c][r].as_deref())).collect();
        assets.push(name.trim().to_string());
        values.push(col?);
    }
    if assets.is_empty() {
        return Err(Error::data(path, "has a `date` column but no asset columns"));
    }
    Ok(PriceHistory { dates, assets, values, places, layout: Layout::Wide })
}

fn long(path: &Path, t: &TextTable, date_col: usize) -> Result<PriceHistory> {
    let need = |n: &str| t.find(n).ok_or_else(|| Error::data(path, format!("long layout needs a `{n}` column")));
    let (asset_col, price_col) = (need("asset")?, need("price")?);
    let mut by_date: BTreeMap<NaiveDate, (String, BTreeMap<String, Option<f64>>)> = BTreeMap::new();
    let mut assets: Vec<String> = Vec::new();
    for row in 0..t.rows() {
        let place = t.place(row);
        let date = parse_date(path, &place, "date", t.columns[date_col][row].as_deref().unwrap_or(""))?;
        let asset = t.columns[asset_col][row].as_deref().unwrap_or("").trim().to_string();
        if asset.is_empty() {
            return Err(Error::data(path, format!("{place}, column `asset`: the asset code is blank")));
        }
        let price = parse_price(path, &place, "price", t.columns[price_col][row].as_deref())?;
        let entry = by_date.entry(date).or_insert_with(|| (place.clone(), BTreeMap::new()));
        if entry.1.insert(asset.clone(), price).is_some() {
            return Err(Error::data(path, format!("{place}: asset `{asset}` has a second price for {date}; keep one row per date and asset")));
        }
        if !assets.contains(&asset) {
            assets.push(asset);
        }
    }
    let dates: Vec<NaiveDate> = by_date.keys().copied().collect();
    let places = by_date.values().map(|(p, _)| p.clone()).collect();
    let values = assets.iter().map(|a| by_date.values().map(|(_, m)| m.get(a).copied().flatten()).collect()).collect();
    Ok(PriceHistory { dates, assets, values, places, layout: Layout::Long })
}
