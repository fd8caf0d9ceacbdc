//! The `liabilities` section and `risk.basis`, raw → resolved: the liabilities' present value (which needs
//! `fund.value`, the assets' value, for the funded ratio), the proxy series' name, the optional duration
//! and convexity, and the surplus basis (which needs liabilities). Nothing here reads the price file:
//! ingest checks the proxy against it.

use super::checks::KeyError;
use super::raw::{Basis, RawConfig, RawLiabilities};
use serde::Serialize;
use std::collections::BTreeMap;

/// Longest liability duration accepted, in years: a larger figure is a unit mistake (months, days).
pub const MAX_DURATION_YEARS: f64 = 100.0;

/// The resolved liabilities.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Liabilities {
    /// Present value at the as-of date, in the base currency.
    pub value: f64,
    /// The non-investable price-file series whose returns track the liabilities' value.
    pub proxy: String,
    /// Modified duration, in years.
    pub duration: Option<f64>,
    /// Convexity, in years squared.
    pub convexity: Option<f64>,
    /// The proxy's tags (`liabilities.tags`), column (lower case) → value: a stress move by one of these
    /// tags moves the liabilities.
    pub tags: BTreeMap<String, String>,
}

impl Liabilities {
    /// Whether a stress move's `column:value` tag names one of the proxy's tags (any case).
    #[must_use]
    pub fn has_tag(&self, tag: &str) -> bool {
        super::tag_holds(tag, |c| self.tags.get(c).map(String::as_str))
    }
}

/// The liabilities and the basis of the models' CVaR, checked against each other and `fund.value`.
pub(super) fn resolve(raw: &RawConfig) -> Result<(Option<Liabilities>, Basis), KeyError> {
    let liabilities = raw
        .liabilities
        .as_ref()
        .map(|l| resolve_section(l, raw.fund.value.is_some()))
        .transpose()?;
    if raw.risk.basis == Basis::Surplus && liabilities.is_none() {
        return Err((
            "risk.basis",
            "`surplus` needs a liabilities section (liabilities.value and liabilities.proxy): the surplus is the assets less the liabilities".into(),
        ));
    }
    Ok((liabilities, raw.risk.basis))
}

fn resolve_section(l: &RawLiabilities, fund_value: bool) -> Result<Liabilities, KeyError> {
    let value = match l.value {
        None => return Err(("liabilities.value", "is required (the present value of the liabilities at the as-of date, in the base currency)".into())),
        Some(v) if !(v.is_finite() && v > 0.0) => {
            return Err(("liabilities.value", format!("must be a positive amount in the base currency, got {v}")));
        }
        Some(v) => v,
    };
    if !fund_value {
        return Err((
            "fund.value",
            "is required with a liabilities section: the funded ratio is fund.value / liabilities.value".into(),
        ));
    }
    let proxy = match l.proxy.as_deref().map(str::trim) {
        Some(p) if !p.is_empty() => p.to_string(),
        _ => return Err(("liabilities.proxy", "is required (the price-file column, without an asset metadata row, whose returns track the liabilities' value)".into())),
    };
    Ok(Liabilities {
        value,
        proxy,
        duration: years("liabilities.duration", l.duration, MAX_DURATION_YEARS)?,
        convexity: years(
            "liabilities.convexity",
            l.convexity,
            MAX_DURATION_YEARS.powi(2),
        )?,
        tags: tags(&l.tags)?,
    })
}

/// The proxy's tags: a column name and a value each, not the currency column (a `currency:XXX` stress
/// move moves a currency, not a tag).
fn tags(raw: &BTreeMap<String, String>) -> Result<BTreeMap<String, String>, KeyError> {
    let mut out = BTreeMap::new();
    for (col, val) in raw {
        let key = col.trim().to_ascii_lowercase();
        let why = if key.is_empty() || val.trim().is_empty() {
            format!("`{col}: {val}`: give a column name and a value, e.g. `class: liabilities`")
        } else if key == "currency" {
            "`currency` cannot be a tag of the proxy: a `currency:XXX` stress move moves a currency; the proxy is in the base currency".into()
        } else if let std::collections::btree_map::Entry::Vacant(slot) = out.entry(key.clone()) {
            slot.insert(val.trim().to_string());
            continue;
        } else {
            format!("column `{key}` is given twice (column names are compared in lower case)")
        };
        return Err(("liabilities.tags", why));
    }
    Ok(out)
}

/// An optional figure in [0, max].
fn years(key: &'static str, v: Option<f64>, max: f64) -> Result<Option<f64>, KeyError> {
    match v {
        Some(d) if !(d.is_finite() && (0.0..=max).contains(&d)) => {
            Err((key, format!("must be between 0 and {max} (years), got {d}")))
        }
        other => Ok(other),
    }
}
