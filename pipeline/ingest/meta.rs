//! Asset metadata (class and other tags, per-asset weight bounds) and current holdings.

use super::table::{TextTable, read_table};
use crate::config::Frequency;
use crate::error::{Error, Result};
use std::collections::BTreeMap;
use std::path::Path;

/// Holdings must sum to 1 within this tolerance (stated in README); they are then rescaled to sum exactly 1.
pub const HOLDINGS_TOLERANCE: f64 = 1e-4;

/// One row of the asset metadata file.
#[derive(Debug, Clone, serde::Serialize)]
pub struct AssetMeta {
    pub asset: String,
    pub name: String,
    pub class: String,
    /// Every other text column, by lower-case column name (e.g. `region`).
    pub tags: BTreeMap<String, String>,
    pub min_weight: Option<f64>,
    pub max_weight: Option<f64>,
    /// How often the asset is valued (column `valuation`; blank: daily).
    pub valuation: Frequency,
    /// Whether its returns are unsmoothed (column `smoothing`: `geltner`; blank or `none`: not).
    pub geltner: bool,
    /// The `currency` column: the ISO 4217 code the asset is priced in; `None` (blank or no column) is
    /// the fund's base currency.
    pub currency: Option<String>,
    /// Modified duration in years (optional `duration` column): the asset's sensitivity to interest rates,
    /// for the liabilities' hedge ratio; blank for an asset without one.
    pub duration: Option<f64>,
    /// Where the row is in the metadata file ("row 2 (line 3)"), for messages.
    #[serde(skip)]
    pub place: String,
}

impl AssetMeta {
    /// The value of a tag column (`class` and `name` included).
    pub fn tag(&self, column: &str) -> Option<&str> {
        match column {
            "class" => Some(&self.class),
            "name" => Some(&self.name),
            "asset" => Some(&self.asset),
            other => self.tags.get(other).map(String::as_str),
        }
    }

    /// Whether a `column:value` tag holds for this asset ([`crate::config::tag_holds`]).
    pub fn has_tag(&self, tag: &str) -> bool {
        crate::config::tag_holds(tag, |c| self.tag(c))
    }
}

/// Reads the asset metadata file: columns `asset`, `class` required; `name`, `min_weight`, `max_weight` and
/// any tag columns optional.
pub fn read_assets(path: &Path) -> Result<Vec<AssetMeta>> {
    let t = read_table(path)?;
    let col = |n: &str| t.find(n);
    let header = t.header_place();
    let asset = col("asset")
        .ok_or_else(|| Error::data(path, format!("{header}: needs an `asset` column")))?;
    let class = col("class").ok_or_else(|| {
        Error::data(
            path,
            format!("{header}: needs a `class` column (e.g. equity, government, credit, cash)"),
        )
    })?;
    let mut out: Vec<AssetMeta> = Vec::with_capacity(t.rows());
    for row in 0..t.rows() {
        let m = meta_row(path, &t, row, asset, class)?;
        if out.iter().any(|o| o.asset == m.asset) {
            return Err(Error::data(
                path,
                format!("{}: asset `{}` is listed twice", t.place(row), m.asset),
            ));
        }
        out.push(m);
    }
    if out.is_empty() {
        return Err(Error::data(
            path,
            format!("{header}: no asset rows follow the header"),
        ));
    }
    Ok(out)
}

/// Metadata columns with a meaning of their own; every other column is a tag (`region`, `style`, …).
const RESERVED: [&str; 9] = [
    "asset",
    "class",
    "name",
    "min_weight",
    "max_weight",
    "valuation",
    "smoothing",
    "currency",
    "duration",
];

/// The trimmed text of one cell, empty when the cell is blank.
fn cell(t: &TextTable, c: usize, row: usize) -> String {
    t.columns[c][row]
        .as_deref()
        .map(str::trim)
        .unwrap_or("")
        .to_string()
}

fn meta_row(
    path: &Path,
    t: &TextTable,
    row: usize,
    asset: usize,
    class: usize,
) -> Result<AssetMeta> {
    let place = t.place(row);
    check_lengths(path, t, row)?;
    let code = cell(t, asset, row);
    if code.is_empty() {
        return Err(Error::data(
            path,
            format!("{place}, column `asset`: blank asset code"),
        ));
    }
    if cell(t, class, row).is_empty() {
        return Err(Error::data(
            path,
            format!(
                "{place}, column `class`: blank asset class for `{code}`; every asset needs a class (e.g. equity, government, credit, cash)"
            ),
        ));
    }
    let (min_weight, max_weight) = weight_bounds(path, t, row, &code)?;
    let (valuation, geltner) = valuation_columns(path, t, row)?;
    let currency = currency(path, t, row)?;
    let tags = t
        .names
        .iter()
        .enumerate()
        .filter(|(_, n)| !RESERVED.contains(&n.trim().to_ascii_lowercase().as_str()))
        .map(|(c, n)| (n.trim().to_ascii_lowercase(), cell(t, c, row)))
        .collect();
    let name = t
        .find("name")
        .map(|c| cell(t, c, row))
        .filter(|n| !n.is_empty())
        .unwrap_or_else(|| code.clone());
    Ok(AssetMeta {
        asset: code,
        name,
        class: cell(t, class, row).to_ascii_lowercase(),
        tags,
        min_weight,
        max_weight,
        valuation,
        geltner,
        currency,
        duration: duration(path, t, row)?,
        place,
    })
}

/// The row's optional `valuation` (`daily`, `monthly` or `quarterly`; blank: daily) and `smoothing`
/// (`geltner` or `none`; blank: none) columns.
fn valuation_columns(path: &Path, t: &TextTable, row: usize) -> Result<(Frequency, bool)> {
    let text = |name: &str| t.find(name).map(|c| cell(t, c, row)).unwrap_or_default();
    let bad = |name: &str, v: &str, want: &str| {
        Error::data(
            path,
            format!(
                "{}, column `{name}`: `{}` is not {want}",
                t.place(row),
                super::truncate(v, 40)
            ),
        )
    };
    let v = text("valuation");
    let valuation = match v.as_str() {
        "" => Frequency::Daily,
        v => Frequency::parse(v)
            .ok_or_else(|| bad("valuation", v, "`daily`, `monthly` or `quarterly`"))?,
    };
    let s = text("smoothing");
    let geltner = match s.to_ascii_lowercase().as_str() {
        "" | "none" => false,
        "geltner" => true,
        _ => return Err(bad("smoothing", &s, "`geltner` or `none` (blank: none)")),
    };
    Ok((valuation, geltner))
}

/// The row's optional `currency`: blank (the base currency) or an ISO 4217 code in form, three upper-case
/// letters (the code is not looked up: whether rates exist for it is checked against `data.fx`).
fn currency(path: &Path, t: &TextTable, row: usize) -> Result<Option<String>> {
    let Some(c) = t.find("currency") else {
        return Ok(None);
    };
    let v = cell(t, c, row);
    if v.is_empty() {
        return Ok(None);
    }
    if !crate::config::checks::is_currency_code(&v) {
        return Err(Error::data(
            path,
            format!(
                "{}, column `currency`: `{}` is not an ISO 4217 code of three upper-case letters (e.g. CHF); leave it blank for the fund's base currency",
                t.place(row),
                super::truncate(&v, 40)
            ),
        ));
    }
    Ok(Some(v))
}

/// The row's optional `min_weight` and `max_weight`: each blank or a weight in [0, 1], the minimum not
/// above the maximum.
fn weight_bounds(
    path: &Path,
    t: &TextTable,
    row: usize,
    code: &str,
) -> Result<(Option<f64>, Option<f64>)> {
    let place = t.place(row);
    let weight = |name: &str| -> Result<Option<f64>> {
        let Some(c) = t.find(name) else {
            return Ok(None);
        };
        let v = cell(t, c, row);
        if v.is_empty() {
            return Ok(None);
        }
        match v.parse::<f64>() {
            Ok(w) if w.is_finite() && (0.0..=1.0).contains(&w) => Ok(Some(w)),
            _ => Err(Error::data(
                path,
                format!("{place}, column `{name}`: `{v}` must be a weight between 0 and 1"),
            )),
        }
    };
    let (min_weight, max_weight) = (weight("min_weight")?, weight("max_weight")?);
    if let (Some(lo), Some(hi)) = (min_weight, max_weight) {
        if lo > hi {
            return Err(Error::data(
                path,
                format!("{place}: min_weight {lo} is above max_weight {hi} for `{code}`"),
            ));
        }
    }
    Ok((min_weight, max_weight))
}

/// Every text cell of a metadata row (codes, names, classes, tags: they reach the pack) within the bound
/// of a name in the config, [`crate::config::MAX_NAME_CHARS`].
fn check_lengths(path: &Path, t: &TextTable, row: usize) -> Result<()> {
    let max = crate::config::MAX_NAME_CHARS;
    for (c, name) in t.names.iter().enumerate() {
        let n = t.columns[c][row]
            .as_deref()
            .map_or(0, |v| v.trim().chars().count());
        if n > max {
            return Err(Error::data(
                path,
                format!(
                    "{}, column `{}`: a text of {n} characters; a code, name, class or tag may have at most {max} characters",
                    t.place(row),
                    super::truncate(name.trim(), 40)
                ),
            ));
        }
    }
    Ok(())
}

/// Reads current holdings (`asset,weight`), checks them against the asset list and returns weights in
/// `assets` order (absent assets get 0).
pub fn read_holdings(path: &Path, assets: &[String]) -> Result<Vec<f64>> {
    let t = read_table(path)?;
    let need = || {
        Error::data(
            path,
            format!("{}: needs columns `asset,weight`", t.header_place()),
        )
    };
    let (a, w) = (
        t.find("asset").ok_or_else(need)?,
        t.find("weight").ok_or_else(need)?,
    );
    let mut weights = vec![0.0; assets.len()];
    let mut seen = vec![false; assets.len()];
    for row in 0..t.rows() {
        let place = t.place(row);
        let code = t.columns[a][row].as_deref().unwrap_or("").trim();
        if code.is_empty() {
            return Err(Error::data(
                path,
                format!("{place}, column `asset`: blank asset code"),
            ));
        }
        let text = t.columns[w][row].as_deref().unwrap_or("").trim();
        let value: f64 = text.parse().ok().filter(|v: &f64| v.is_finite() && *v >= 0.0)
            .ok_or_else(|| Error::data(path, format!("{place}, column `weight`: `{}` must be a non-negative number (long-only holdings)", super::truncate(text, 40))))?;
        let i = assets.iter().position(|x| x == code)
            .ok_or_else(|| Error::data(path, format!("{place}: asset `{}` is not in the price data (or was dropped by the fill policy)", super::truncate(code, 40))))?;
        if std::mem::replace(&mut seen[i], true) {
            return Err(Error::data(
                path,
                format!("{place}: asset `{code}` is listed twice"),
            ));
        }
        weights[i] = value;
    }
    let total: f64 = weights.iter().sum();
    if (total - 1.0).abs() > HOLDINGS_TOLERANCE {
        let rows = if t.rows() == 0 {
            "no rows".to_string()
        } else {
            format!("{} to {}", t.place(0), t.place(t.rows() - 1))
        };
        return Err(Error::data(
            path,
            format!(
                "column `weight` ({rows}): the weights sum to {total:.6}, not 1 (tolerance {HOLDINGS_TOLERANCE}); fix the file so the holdings are a full portfolio"
            ),
        ));
    }
    Ok(weights.iter().map(|x| x / total).collect())
}

/// The row's optional `duration`: blank, or years between 0 and
/// [`crate::config::liabilities::MAX_DURATION_YEARS`].
fn duration(path: &Path, t: &TextTable, row: usize) -> Result<Option<f64>> {
    let Some(c) = t.find("duration") else {
        return Ok(None);
    };
    let v = cell(t, c, row);
    if v.is_empty() {
        return Ok(None);
    }
    let max = crate::config::liabilities::MAX_DURATION_YEARS;
    match v.parse::<f64>() {
        Ok(d) if d.is_finite() && (0.0..=max).contains(&d) => Ok(Some(d)),
        _ => Err(Error::data(
            path,
            format!(
                "{}, column `duration`: `{v}` must be a modified duration in years between 0 and {max}",
                t.place(row)
            ),
        )),
    }
}
