//! The stress set: named instantaneous shocks from the stress file, plus the worst non-overlapping
//! horizon windows of the full price history, replayed on every portfolio.
//!
//! A shock's P&L for weights w is Σ_i w_i s_i (an instantaneous revaluation of each position by its shock
//! return); its contribution by class sums the same terms within a class. A `currency:XXX` tag moves a
//! currency: an asset priced in it returns (1 + r_local)(1 + (1 − h)·s) − 1, with r_local its own move
//! (asset or tag, else 0), s the currency's move and h its hedge ratio.

use crate::config::{Liabilities, ShockSpec, StressFile};
use crate::error::{Error, Result};
use crate::ingest::MarketData;
use chrono::NaiveDate;
use serde::Serialize;
use std::path::Path;

/// One scenario of the stress set with its per-asset returns.
#[derive(Debug, Clone, Serialize)]
pub struct Shock {
    pub name: String,
    /// `defined` (from the stress file) or `historical` (a window of the price history).
    pub kind: &'static str,
    pub description: String,
    pub start: Option<NaiveDate>,
    pub end: Option<NaiveDate>,
    /// Return per asset, in `MarketData::assets` order.
    pub returns: Vec<f64>,
    /// Assets the shock does not move (no tag or asset entry; no price in a historical window).
    pub unshocked: Vec<String>,
    /// The liability proxy's return in the shock: a move naming the proxy (`asset: <proxy>`), else the
    /// first move by a tag the proxy carries (`liabilities.tags`), or its return over a historical
    /// window; `None` when the shock leaves the liabilities unchanged.
    pub liabilities: Option<f64>,
}

/// Resolves the file's shocks against the universe: asset moves first, then the first matching tag move.
/// With liabilities, the proxy moves the same way: a move naming it (`asset: <proxy>`), else the first
/// move by one of its tags (`liabilities.tags`).
pub fn defined(
    path: &Path,
    file: &StressFile,
    data: &MarketData,
    liabilities: Option<&Liabilities>,
) -> Result<Vec<Shock>> {
    file.shocks
        .iter()
        .map(|s| resolve(path, s, data, liabilities))
        .collect()
}

fn resolve(
    path: &Path,
    s: &ShockSpec,
    data: &MarketData,
    liabilities: Option<&Liabilities>,
) -> Result<Shock> {
    check_moves(path, s, data, liabilities)?;
    let (returns, unshocked) = shock_returns(s, data);
    Ok(Shock {
        name: s.name.clone(),
        kind: "defined",
        description: s.description.clone(),
        liabilities: liabilities.and_then(|l| proxy_move(s, l)),
        start: None,
        end: None,
        returns,
        unshocked,
    })
}

/// The proxy's return in a defined shock: the move naming it, else the first move by one of its tags.
fn proxy_move(s: &ShockSpec, l: &Liabilities) -> Option<f64> {
    let by_asset = s
        .moves
        .iter()
        .find(|m| m.asset.as_deref() == Some(&l.proxy));
    let by_tag = || {
        s.moves
            .iter()
            .find(|m| m.tag.as_deref().is_some_and(|t| l.has_tag(t)))
    };
    by_asset.or_else(by_tag).map(|m| m.ret)
}

/// Every move of a shock names an asset of the run (or the liability proxy), a currency some asset is
/// priced in, or a tag some asset or the proxy carries.
fn check_moves(
    path: &Path,
    s: &ShockSpec,
    data: &MarketData,
    liabilities: Option<&Liabilities>,
) -> Result<()> {
    let proxy = liabilities.map(|l| l.proxy.as_str());
    let err = |m: String| Error::config(path, format!("shock `{}`: {m}", s.name));
    for m in &s.moves {
        if let Some(a) = &m.asset {
            if !data.assets.contains(a) && proxy != Some(a.as_str()) {
                return Err(err(format!(
                    "unknown asset `{a}` (not in the price data, or dropped by the fill policy)"
                )));
            }
        }
        if let Some(c) = m.tag.as_deref().and_then(currency_tag) {
            if !data.currency.foreign().iter().any(|f| f == c) {
                return Err(err(format!(
                    "tag `{}`: no asset of the run is priced in currency `{c}` (a currency move reaches the unhedged part of the assets priced in a foreign currency)",
                    m.tag.as_deref().unwrap_or_default()
                )));
            }
        } else if let Some(t) = &m.tag {
            let proxy_has = liabilities.is_some_and(|l| l.has_tag(t));
            if !proxy_has && !data.meta.iter().any(|am| am.has_tag(t)) {
                return Err(err(format!(
                    "tag `{t}` matches no asset{}",
                    if liabilities.is_some() {
                        " and no tag of the liability proxy (liabilities.tags)"
                    } else {
                        ""
                    }
                )));
            }
        }
    }
    Ok(())
}

/// Each asset's return under a shock (its own move, else its tag's, with the currency move on the
/// unhedged part), and the assets no move reaches.
fn shock_returns(s: &ShockSpec, data: &MarketData) -> (Vec<f64>, Vec<String>) {
    let mut returns = Vec::with_capacity(data.assets.len());
    let mut unshocked = Vec::new();
    for (i, a) in data.assets.iter().enumerate() {
        let by_asset = s
            .moves
            .iter()
            .find(|m| m.asset.as_deref() == Some(a.as_str()));
        let by_tag = || {
            s.moves.iter().find(|m| {
                m.tag
                    .as_ref()
                    .is_some_and(|t| currency_tag(t).is_none() && data.meta[i].has_tag(t))
            })
        };
        let local = by_asset.or_else(by_tag).map(|m| m.ret);
        let fx = currency_move(s, data, i);
        match (local, fx) {
            (None, None) => {
                returns.push(0.0);
                unshocked.push(a.clone());
            }
            (Some(r), None) => returns.push(r),
            (r, Some(fx)) => returns.push(with_currency(r.unwrap_or(0.0), fx)),
        }
    }
    (returns, unshocked)
}

/// The currency of a `currency:XXX` tag (the column `currency`, any case), which moves a currency rather
/// than selecting assets by a metadata column.
fn currency_tag(tag: &str) -> Option<&str> {
    tag.split_once(':')
        .filter(|(col, _)| col.trim().eq_ignore_ascii_case("currency"))
        .map(|(_, code)| code.trim())
}

/// The move of asset `i`'s currency in shock `s`, scaled to its unhedged part (1 − h): `None` when the
/// shock does not move that currency or the asset is fully hedged.
fn currency_move(s: &ShockSpec, data: &MarketData, i: usize) -> Option<f64> {
    let c = data.currency.of_asset.get(i)?.as_deref()?;
    let unhedged = 1.0 - data.currency.hedge[i];
    s.moves
        .iter()
        .find(|m| m.tag.as_deref().and_then(currency_tag) == Some(c))
        .filter(|_| unhedged > 0.0)
        .map(|m| unhedged * m.ret)
}

/// An asset's return when its local price moves by `local` and the unhedged part of its currency by
/// `fx` (already scaled by 1 − h): (1 + r_local)(1 + (1 − h)·s) − 1, the hedged part earning the local
/// move alone (no time passes, so no forward premium).
pub fn with_currency(local: f64, fx: f64) -> f64 {
    (1.0 + local) * (1.0 + fx) - 1.0
}

/// The `count` worst non-overlapping `h`-observation windows of the full history for the reference
/// weights, as shocks; assets without prices at both ends of a window are left unshocked.
pub fn historical(data: &MarketData, reference: &[f64], h: usize, count: usize) -> Vec<Shock> {
    let rows = data.full_dates.len();
    if rows <= h || count == 0 {
        return vec![];
    }
    let window = |t: usize| -> Vec<f64> {
        data.full_prices
            .iter()
            .map(|p| {
                let r = p[t + h] / p[t] - 1.0;
                if r.is_finite() { r } else { f64::NAN }
            })
            .collect()
    };
    let mut scored: Vec<(usize, f64)> = (0..rows - h)
        .map(|t| {
            (
                t,
                window(t)
                    .iter()
                    .zip(reference)
                    .map(|(r, w)| if r.is_nan() { 0.0 } else { r * w })
                    .sum(),
            )
        })
        .collect();
    scored.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
    let mut picked: Vec<usize> = Vec::new();
    for (t, _) in scored {
        if picked.len() == count {
            break;
        }
        if picked.iter().all(|&q| t.abs_diff(q) >= h) {
            picked.push(t);
        }
    }
    picked.iter().enumerate().map(|(k, &t)| {
        let r = window(t);
        let unshocked = data.assets.iter().zip(&r).filter(|(_, v)| v.is_nan()).map(|(a, _)| a.clone()).collect();
        let (start, end) = (data.full_dates[t], data.full_dates[t + h]);
        Shock {
            name: format!("Worst window #{} ({start} to {end})", k + 1),
            kind: "historical",
            description: format!("the {h}-{} window of the price history with the largest loss for the reference portfolio", data.frequency.period()),
            start: Some(start),
            end: Some(end),
            returns: r.iter().map(|v| if v.is_nan() { 0.0 } else { *v }).collect(),
            unshocked,
            liabilities: None,
        }
    }).collect()
}

/// One portfolio's results over the stress set.
#[derive(Debug, Clone, Serialize)]
pub struct StressResult {
    pub portfolio: String,
    /// P&L (fraction of portfolio value) per shock, in stress-set order.
    pub pnl: Vec<f64>,
    /// Index of the worst shock.
    pub worst: usize,
    /// Contributions by class, per shock.
    pub by_class: Vec<Vec<(String, f64)>>,
    /// Indices of shocks whose loss exceeds the loss limit.
    pub breaches: Vec<usize>,
}

/// Replays every shock on weights `w`.
pub fn replay(
    name: &str,
    w: &[f64],
    shocks: &[Shock],
    classes: &[String],
    loss_limit: Option<f64>,
) -> StressResult {
    let pnl: Vec<f64> = shocks
        .iter()
        .map(|s| s.returns.iter().zip(w).map(|(r, x)| r * x).sum())
        .collect();
    let worst = (0..pnl.len())
        .min_by(|&a, &b| pnl[a].total_cmp(&pnl[b]))
        .unwrap_or(0);
    let by_class = shocks
        .iter()
        .map(|s| {
            let terms: Vec<f64> = s.returns.iter().zip(w).map(|(r, x)| r * x).collect();
            crate::risk::by_group(&terms, classes)
        })
        .collect();
    let breaches = match loss_limit {
        Some(l) => (0..pnl.len()).filter(|&k| -pnl[k] > l).collect(),
        None => vec![],
    };
    StressResult {
        portfolio: name.to_string(),
        pnl,
        worst,
        by_class,
        breaches,
    }
}
