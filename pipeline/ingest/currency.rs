//! Stage 1, ingest: several currencies. Reads the exchange-rate file (`data.fx`), aligns its rates to the
//! prices' calendar and turns each asset's local-currency price index into a base-currency index, the
//! hedge included, so every later stage (scenarios, backtest, stress windows, bands) sees one
//! base-currency index per asset and works unchanged.
//!
//! A rate is the value of one unit of a currency in the base currency. The rate used for a price date is
//! the latest one dated on or before it, and not older than the price observation `quality.max_fill` rows
//! earlier (the first price date for the first rows): never a later rate. Rates after as-of are cut
//! before any check. The policy's benchmark series are taken as quoted in the base currency.
//!
//! The hedge is reset at every observation: over one observation the base-currency return is
//! h·(r_local + f) + (1 − h)·((1 + r_local)(1 + r_fx) − 1), with h the hedge ratio and f the forward
//! premium over the observation's length by covered interest parity (Solnik & McLeavey, International
//! Investments, ch. "Foreign exchange parity relations"): f = (1 + p)^(days/365) − 1 with p the configured
//! annual premium (1 + i_base)/(1 + i_currency) − 1 (`currency.rate_differential`). The index compounds
//! these returns; h = 0 gives (1 + R_local)(1 + R_fx) − 1 over any horizon, h = 1 with p = 0 the local
//! return. This module reads files only through [`super::table`].

use super::MarketData;
use super::meta::AssetMeta;
use super::prices::{self, PriceHistory};
use crate::config::{Config, Layout};
use crate::error::{Error, Result};
use chrono::NaiveDate;
use std::collections::BTreeMap;
use std::path::Path;

/// Each asset's currency and hedge ratio, and what the report needs to split risk by currency.
#[derive(Debug, Clone, Default)]
pub struct Currencies {
    /// `fund.base_currency`, when configured.
    pub base: Option<String>,
    /// Per kept asset (aligned with `MarketData::assets`): its currency, `None` for the base currency.
    pub of_asset: Vec<Option<String>>,
    /// Per kept asset: its hedge ratio in [0, 1] (0 for an asset in the base currency).
    pub hedge: Vec<f64>,
    /// Per kept asset: its local-currency prices on the window's dates, before conversion.
    pub local_prices: Vec<Vec<f64>>,
}

impl Currencies {
    /// The foreign currencies of the kept assets, each once, sorted.
    pub fn foreign(&self) -> Vec<String> {
        let mut out: Vec<String> = self.of_asset.iter().flatten().cloned().collect();
        out.sort();
        out.dedup();
        out
    }

    /// Whether any kept asset is priced in a currency other than the base.
    pub fn any_foreign(&self) -> bool {
        self.of_asset.iter().any(Option::is_some)
    }
}

/// Converts the window and full-history prices of every asset priced in a foreign currency to the base
/// currency, in place, and records each asset's currency and hedge ratio in `data.currency`.
pub fn convert(cfg: &Config, data: &mut MarketData) -> Result<()> {
    let of_asset = asset_currencies(cfg, &data.meta)?;
    let hedge = hedge_ratios(cfg, &data.assets, &data.meta, &of_asset)?;
    data.currency = Currencies {
        base: cfg.currency.base.clone(),
        local_prices: data.prices.clone(),
        of_asset: of_asset.clone(),
        hedge: hedge.clone(),
    };
    let Some(path) = cfg.fx.as_deref() else {
        return without_rates(cfg, data, &of_asset);
    };
    let rates = read_rates(path, data.as_of)?;
    let start = data.full_dates.len() - data.dates.len();
    let mut by_currency: BTreeMap<&str, Vec<Option<(NaiveDate, f64)>>> = BTreeMap::new();
    for (i, c) in of_asset.iter().enumerate() {
        let Some(c) = c else { continue };
        if !by_currency.contains_key(c.as_str()) {
            let aligned = align(cfg, path, &rates, c, &data.full_dates, &data.assets[i])?;
            by_currency.insert(c, aligned);
        }
        let aligned = &by_currency[c.as_str()];
        check_window(cfg, path, aligned, c, data, i)?;
        let premium = cfg
            .currency
            .rate_differential
            .get(c)
            .copied()
            .unwrap_or(0.0);
        let rate: Vec<f64> = aligned
            .iter()
            .map(|r| r.map_or(f64::NAN, |r| r.1))
            .collect();
        to_base_in_place(data, i, &rate, hedge[i], premium);
    }
    for (c, aligned) in &by_currency {
        let findings = rate_findings(cfg, c, &aligned[start..], &data.dates);
        data.quality.findings.extend(findings);
    }
    Ok(())
}

/// Without a rate file every asset must be in the base currency: the first foreign one is an error.
/// Each asset's currency and hedge ratio without prices (a scenario file's run): what currency stress moves
/// and exposures use; the file's returns are already in the base currency, so nothing is converted.
pub fn without_prices(cfg: &Config, assets: &[String], meta: &[AssetMeta]) -> Result<Currencies> {
    let of_asset = asset_currencies(cfg, meta)?;
    let hedge = hedge_ratios(cfg, assets, meta, &of_asset)?;
    Ok(Currencies {
        base: cfg.currency.base.clone(),
        of_asset,
        hedge,
        local_prices: vec![],
    })
}

fn without_rates(cfg: &Config, data: &MarketData, of_asset: &[Option<String>]) -> Result<()> {
    match first_foreign(data, of_asset) {
        Some((a, c)) => Err(Error::config(
            &cfg.path,
            format!(
                "data.fx: is needed: asset `{}` is priced in `{c}` ({}, {}, column `currency`), and without an exchange-rate file its prices cannot be converted to the base currency",
                a.asset,
                cfg.assets.display(),
                a.place
            ),
        )),
        None => Ok(()),
    }
}

/// Asset `i`'s full-history and window prices converted to the base currency at `rate` (per full-history
/// date), with its hedge ratio and the currency's rate differential.
fn to_base_in_place(data: &mut MarketData, i: usize, rate: &[f64], hedge: f64, premium: f64) {
    let start = data.full_dates.len() - data.dates.len();
    data.full_prices[i] = to_base(&data.full_prices[i], rate, &data.full_dates, hedge, premium);
    data.prices[i] = to_base(&data.prices[i], &rate[start..], &data.dates, hedge, premium);
}

/// Data-quality findings on one currency's rates over the scenario window: how many price dates took an
/// earlier rate (the calendars differ), and a warning for a move beyond `quality.extreme_move` from one
/// observation to the next or a run of `quality.stale_run` identical rates, as for prices. The file is
/// named by its key, `data.fx`: a re-run reads the archived copy, at another path, and must say the same.
fn rate_findings(
    cfg: &Config,
    c: &str,
    window: &[Option<(NaiveDate, f64)>],
    dates: &[NaiveDate],
) -> Vec<crate::diag::Check> {
    use crate::diag::Check;
    let file = "data.fx";
    let earlier = window
        .iter()
        .zip(dates)
        .filter(|(r, d)| r.is_some_and(|r| r.0 < **d))
        .count();
    let mut out = vec![Check::pass(
        format!("quality.fx.{c}"),
        format!(
            "{file}: currency `{c}` has a rate for every one of the {} window dates ({earlier} of them the latest earlier rate, at most {} observations old)",
            dates.len(),
            cfg.quality.max_fill
        ),
    )];
    let x: Vec<f64> = window.iter().map(|r| r.map_or(f64::NAN, |r| r.1)).collect();
    if let Some(k) =
        (1..x.len()).find(|&k| (x[k] / x[k - 1] - 1.0).abs() > cfg.quality.extreme_move)
    {
        out.push(Check::warn(
            format!("quality.fx_extreme.{c}"),
            format!(
                "{file}: currency `{c}`: the rate moves by {:.1}% from {} to {}, beyond quality.extreme_move = {}; check the feed",
                (x[k] / x[k - 1] - 1.0) * 100.0,
                dates[k - 1],
                dates[k],
                cfg.quality.extreme_move
            ),
        ));
    }
    let quotes: Vec<f64> = {
        let mut q: Vec<(NaiveDate, f64)> = window.iter().flatten().copied().collect();
        q.dedup_by_key(|r| r.0);
        q.into_iter().map(|r| r.1).collect()
    };
    let longest = quotes
        .chunk_by(|a, b| a == b)
        .map(<[f64]>::len)
        .max()
        .unwrap_or(0);
    if longest >= cfg.quality.stale_run {
        out.push(Check::warn(
            format!("quality.fx_stale.{c}"),
            format!(
                "{file}: currency `{c}`: {longest} identical quoted rates in a row in the scenario window (quality.stale_run = {}); a rate feed that stopped updating hides currency risk",
                cfg.quality.stale_run
            ),
        ));
    }
    out
}

/// The first kept asset in a foreign currency (its metadata row), with its currency.
fn first_foreign<'a>(
    data: &'a MarketData,
    of: &'a [Option<String>],
) -> Option<(&'a AssetMeta, &'a str)> {
    data.meta
        .iter()
        .zip(of)
        .find_map(|(m, c)| c.as_deref().map(|c| (m, c)))
}

/// Each asset's currency, `None` when it is the base currency; a foreign currency needs
/// `fund.base_currency`.
fn asset_currencies(cfg: &Config, meta: &[AssetMeta]) -> Result<Vec<Option<String>>> {
    let base = cfg.currency.base.as_deref();
    meta.iter()
        .map(|m| match (m.currency.as_deref(), base) {
            (None, _) => Ok(None),
            (Some(c), Some(b)) if c == b => Ok(None),
            (Some(c), Some(_)) => Ok(Some(c.to_string())),
            (Some(c), None) => Err(Error::config(
                &cfg.path,
                format!(
                    "fund.base_currency: is needed: asset `{}` is priced in `{c}` ({}, {}, column `currency`); give the fund's base currency so its prices can be converted",
                    m.asset,
                    cfg.assets.display(),
                    m.place
                ),
            )),
        })
        .collect()
}

/// The hedge ratio of every asset: its own (`currency.hedge.asset`), else the one of a tag it carries
/// (`currency.hedge.tag`; two matching tags must agree), else its class's, else 0. An asset in the base
/// currency has nothing to hedge (0). A name that matches no asset is an error naming the key.
pub fn hedge_ratios(
    cfg: &Config,
    assets: &[String],
    meta: &[AssetMeta],
    of_asset: &[Option<String>],
) -> Result<Vec<f64>> {
    let cur = &cfg.currency;
    let bad = |key: String, why: String| Error::config(&cfg.path, format!("{key}: {why}"));
    if let Some(a) = cur.hedge_asset.keys().find(|a| !assets.contains(a)) {
        return Err(bad(
            format!("currency.hedge.asset.{a}"),
            "names no asset of the run (not in the asset metadata, or dropped by the fill policy)"
                .into(),
        ));
    }
    if let Some(c) = cur
        .hedge_class
        .keys()
        .find(|c| !meta.iter().any(|m| &m.class == *c))
    {
        return Err(bad(
            format!("currency.hedge.class.{c}"),
            "names no asset class of the asset metadata".into(),
        ));
    }
    if let Some(t) = cur
        .hedge_tag
        .keys()
        .find(|t| !meta.iter().any(|m| m.has_tag(t)))
    {
        return Err(bad(
            format!("currency.hedge.tag.{t}"),
            "matches no asset".into(),
        ));
    }
    meta.iter()
        .zip(of_asset)
        .map(|(m, c)| match c {
            None => Ok(0.0),
            Some(_) => one_ratio(cfg, m),
        })
        .collect()
}

fn one_ratio(cfg: &Config, m: &AssetMeta) -> Result<f64> {
    let cur = &cfg.currency;
    if let Some(h) = cur.hedge_asset.get(&m.asset) {
        return Ok(*h);
    }
    let tags: Vec<(&String, &f64)> = cur.hedge_tag.iter().filter(|(t, _)| m.has_tag(t)).collect();
    if let Some((t1, h1)) = tags.first() {
        if let Some((t2, h2)) = tags.iter().find(|(_, h)| h != h1) {
            return Err(Error::config(
                &cfg.path,
                format!(
                    "currency.hedge.tag: asset `{}` carries both `{t1}` (hedge ratio {h1}) and `{t2}` (hedge ratio {h2}); give it a ratio of its own under currency.hedge.asset",
                    m.asset
                ),
            ));
        }
        return Ok(**h1);
    }
    Ok(cur.hedge_class.get(&m.class).copied().unwrap_or(0.0))
}

/// The exchange-rate file, read by the price file's reader (wide: `date` then one column per currency;
/// long: `date, currency, rate`), rows sorted by date and cut at as-of, every rate positive.
pub fn read_rates(path: &Path, as_of: NaiveDate) -> Result<PriceHistory> {
    let mut table = super::table::read_table(path)?;
    let long = ["date", "currency", "rate"]
        .iter()
        .all(|n| table.find(n).is_some())
        && table.names.len() == 3;
    if long {
        for n in &mut table.names {
            match n.trim().to_ascii_lowercase().as_str() {
                "currency" => *n = "asset".into(),
                "rate" => *n = "price".into(),
                _ => {}
            }
        }
    }
    let layout = if long { Layout::Long } else { Layout::Wide };
    let mut hist = prices::from_table(path, &table, layout).map_err(in_rate_terms)?;
    if let Some(c) = hist
        .assets
        .iter()
        .find(|c| !crate::config::checks::is_currency_code(c))
    {
        return Err(Error::data(
            path,
            format!(
                "{}: `{}` is not an ISO 4217 code of three upper-case letters (e.g. CHF); name each currency by its code",
                if long {
                    "column `currency`".to_string()
                } else {
                    format!("{}, header", table.header_place())
                },
                super::truncate(c, 40)
            ),
        ));
    }
    sort_and_cut(path, &mut hist, as_of)?;
    check_positive(path, &hist)?;
    Ok(hist)
}

/// The price reader's words made the rate file's: its long layout reads `currency` and `rate` columns.
fn in_rate_terms(e: Error) -> Error {
    match e {
        Error::Data { path, message } => Error::Data {
            path,
            message: message
                .replace("column `asset`", "column `currency`")
                .replace("column `price`", "column `rate`")
                .replace("asset code", "currency code")
                .replace("price `", "rate `")
                .replace("asset `", "currency `")
                .replace("a second price", "a second rate")
                .replace("has a price", "has a rate")
                .replace("no price in", "no rate in")
                .replace("no asset columns", "no currency columns")
                .replace("dated row of prices", "dated row of rates"),
        },
        other => other,
    }
}

/// Rows in date order (a date twice is an error), without the rows after as-of.
fn sort_and_cut(path: &Path, hist: &mut PriceHistory, as_of: NaiveDate) -> Result<()> {
    let mut order: Vec<usize> = (0..hist.dates.len()).collect();
    order.sort_by_key(|&i| hist.dates[i]);
    if let Some(w) = order
        .windows(2)
        .find(|w| hist.dates[w[0]] == hist.dates[w[1]])
    {
        return Err(Error::data(
            path,
            format!(
                "{} and {}: the date {} is given twice; keep one row per date",
                hist.places[w[0]], hist.places[w[1]], hist.dates[w[0]]
            ),
        ));
    }
    let keep: Vec<usize> = order
        .into_iter()
        .filter(|&i| hist.dates[i] <= as_of)
        .collect();
    hist.keep_rows(&keep);
    Ok(())
}

/// Every rate up to as-of is positive: a rate of zero or below is a broken feed, not a price of money.
fn check_positive(path: &Path, hist: &PriceHistory) -> Result<()> {
    for (c, col) in hist.values.iter().enumerate() {
        if let Some((r, v)) = col
            .iter()
            .enumerate()
            .find_map(|(r, v)| v.filter(|v| *v <= 0.0).map(|v| (r, v)))
        {
            let at = match hist.cells {
                Some(_) => format!(
                    "{}, column `rate` (currency `{}`)",
                    hist.places_of(c, r),
                    hist.assets[c]
                ),
                None => format!("{}, column `{}`", hist.places[r], hist.assets[c]),
            };
            return Err(Error::data(
                path,
                format!(
                    "{at}: rate {v} on {} is not positive; a rate is the value of one unit of the currency in the base currency and must be > 0 (correct the feed or leave the cell blank)",
                    hist.dates[r]
                ),
            ));
        }
    }
    Ok(())
}

/// The rate of currency `c` for each of `dates` with the date it was quoted on (the latest on or before
/// the date, not older than the date `max_fill` rows earlier), `None` where there is none.
fn align(
    cfg: &Config,
    path: &Path,
    rates: &PriceHistory,
    c: &str,
    dates: &[NaiveDate],
    asset: &str,
) -> Result<Vec<Option<(NaiveDate, f64)>>> {
    let Some(k) = rates.assets.iter().position(|x| x == c) else {
        return Err(Error::data(
            path,
            format!(
                "has no rates for currency `{c}`, in which asset `{asset}` is priced ({}, column `currency`); add a column (or rows) of `{c}` rates, or correct the asset's currency",
                cfg.assets.display()
            ),
        ));
    };
    Ok(align_series(
        &rates.dates,
        &rates.values[k],
        dates,
        cfg.quality.max_fill,
    ))
}

/// [`align`] on plain data: for each target date, the latest quoted rate dated on or before it, if it is
/// dated on or after the target `max_age` rows earlier (the first target for the first rows).
pub fn align_series(
    quoted: &[NaiveDate],
    values: &[Option<f64>],
    dates: &[NaiveDate],
    max_age: usize,
) -> Vec<Option<(NaiveDate, f64)>> {
    let mut out = Vec::with_capacity(dates.len());
    let mut k = 0;
    let mut last: Option<(NaiveDate, f64)> = None;
    for (i, d) in dates.iter().enumerate() {
        while k < quoted.len() && quoted[k] <= *d {
            if let Some(v) = values[k] {
                last = Some((quoted[k], v));
            }
            k += 1;
        }
        let oldest = dates[i.saturating_sub(max_age)];
        out.push(last.filter(|(q, _)| *q >= oldest));
    }
    out
}

/// Every window date of asset `i` has a rate: a missing one stops the run, naming the date, the currency
/// and the asset.
fn check_window(
    cfg: &Config,
    path: &Path,
    aligned: &[Option<(NaiveDate, f64)>],
    c: &str,
    data: &MarketData,
    i: usize,
) -> Result<()> {
    let start = data.full_dates.len() - data.dates.len();
    let Some(r) = (start..aligned.len()).rev().find(|&r| aligned[r].is_none()) else {
        return Ok(());
    };
    let date = data.full_dates[r];
    let when = if date == *data.dates.last().expect("a window") {
        format!("{date} (the last observation up to as-of {})", data.as_of)
    } else {
        format!("{date} (in the scenario window)")
    };
    Err(Error::data(
        path,
        format!(
            "currency `{c}`: no rate for {when}, needed by asset `{}`; a rate may be at most {} price observations (quality.max_fill) older than the price it converts, and never later: add the missing rate",
            data.assets[i], cfg.quality.max_fill
        ),
    ))
}

/// A base-currency index from local prices and rates on `dates` (NaN where either is unknown), with the
/// hedge reset at every observation (module doc): the first known point is price × rate, each next one
/// compounds h·(r_local + f) + (1 − h)·((1 + r_local)(1 + r_fx) − 1) over the time since the last known
/// point, f = (1 + premium)^(days/365) − 1.
pub fn to_base(
    local: &[f64],
    rate: &[f64],
    dates: &[NaiveDate],
    hedge: f64,
    premium: f64,
) -> Vec<f64> {
    let mut out = vec![f64::NAN; local.len()];
    let mut last: Option<usize> = None;
    for i in 0..local.len() {
        if !(local[i].is_finite() && rate[i].is_finite()) {
            continue;
        }
        out[i] = match last {
            None => local[i] * rate[i],
            Some(j) => {
                let r_local = local[i] / local[j] - 1.0;
                let r_fx = rate[i] / rate[j] - 1.0;
                let years = (dates[i] - dates[j]).num_days() as f64 / 365.0;
                let f = (1.0 + premium).powf(years) - 1.0;
                out[j] * (1.0 + one_step(r_local, r_fx, hedge, f))
            }
        };
        last = Some(i);
    }
    out
}

/// The base-currency return over one observation: the hedged part earns the local return plus the
/// forward premium, the unhedged part (1 + r_local)(1 + r_fx) − 1 (covered interest parity; Solnik &
/// McLeavey, International Investments).
pub fn one_step(r_local: f64, r_fx: f64, hedge: f64, forward: f64) -> f64 {
    hedge * (r_local + forward) + (1.0 - hedge) * ((1.0 + r_local) * (1.0 + r_fx) - 1.0)
}

/// Which assets a move of currency `c` reaches, and by how much of it: the unhedged part, 1 − h, of each
/// asset priced in `c`, 0 for the others.
pub fn unhedged_in(cur: &Currencies, c: &str) -> Vec<f64> {
    cur.of_asset
        .iter()
        .zip(&cur.hedge)
        .map(|(of, h)| {
            if of.as_deref() == Some(c) {
                1.0 - h
            } else {
                0.0
            }
        })
        .collect()
}

/// The exposure of weights `w` to each foreign currency, before and after hedging: Σ w_i over the assets
/// priced in it, and Σ w_i (1 − h_i).
pub fn exposure(cur: &Currencies, w: &[f64]) -> BTreeMap<String, (f64, f64)> {
    cur.foreign()
        .into_iter()
        .map(|c| {
            let (mut gross, mut net) = (0.0, 0.0);
            for ((of, h), x) in cur.of_asset.iter().zip(&cur.hedge).zip(w) {
                if of.as_deref() == Some(c.as_str()) {
                    gross += x;
                    net += x * (1.0 - h);
                }
            }
            (c, (gross, net))
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::random::Rng;

    fn days(n: usize, step: i64) -> Vec<NaiveDate> {
        let d0 = NaiveDate::from_ymd_opt(2024, 1, 1).unwrap();
        (0..n)
            .map(|i| d0 + chrono::Duration::days(step * i as i64))
            .collect()
    }

    /// Hand example: a local gain of 10% while the currency loses 5% against the base gives
    /// 1.10 × 0.95 − 1 = 4.5% unhedged (the product of growth factors, Solnik & McLeavey,
    /// International Investments), and the local 10% fully hedged at a zero rate differential.
    #[test]
    fn a_hand_example_unhedged_and_fully_hedged() {
        let (p, x, d) = ([100.0, 110.0], [1.20, 1.14], days(2, 1));
        let open = to_base(&p, &x, &d, 0.0, 0.0);
        assert!((open[0] - 120.0).abs() < 1e-12);
        assert!((open[1] / open[0] - 1.0 - 0.045).abs() < 1e-12);
        let hedged = to_base(&p, &x, &d, 1.0, 0.0);
        assert!((hedged[1] / hedged[0] - 1.0 - 0.10).abs() < 1e-12);
        let half = to_base(&p, &x, &d, 0.5, 0.0);
        assert!((half[1] / half[0] - 1.0 - (0.5 * 0.10 + 0.5 * 0.045)).abs() < 1e-12);
    }

    /// On random paths, over every horizon: unhedged base returns are (1 + R_local)(1 + R_fx) − 1 of the
    /// horizon's local and rate returns; fully hedged at zero differential they are R_local.
    #[test]
    fn random_paths_compound_as_the_parity_formulas_say() {
        let mut rng = Rng::from_seed(18);
        let n = 300;
        let mut p = vec![50.0];
        let mut x = vec![0.8];
        for _ in 1..n {
            p.push(p.last().unwrap() * (1.0 + 0.02 * rng.normal()));
            x.push(x.last().unwrap() * (1.0 + 0.01 * rng.normal()));
        }
        let d = days(n, 1);
        let open = to_base(&p, &x, &d, 0.0, 0.0);
        let shut = to_base(&p, &x, &d, 1.0, 0.0);
        for h in [1, 5, 21, 63] {
            for t in (0..n - h).step_by(7) {
                let (rl, rx) = (p[t + h] / p[t] - 1.0, x[t + h] / x[t] - 1.0);
                let want = (1.0 + rl) * (1.0 + rx) - 1.0;
                assert!(
                    (open[t + h] / open[t] - 1.0 - want).abs() < 1e-10,
                    "h {h} t {t}"
                );
                assert!(
                    (shut[t + h] / shut[t] - 1.0 - rl).abs() < 1e-10,
                    "h {h} t {t}"
                );
            }
        }
    }

    /// A fully hedged position in a flat local asset earns the forward premium: over 365 days the
    /// configured annual premium exactly, whatever the spot rate did (covered interest parity).
    #[test]
    fn the_hedged_part_earns_the_forward_premium() {
        let d = days(13, 365 / 12 + 1);
        let span = (d[12] - d[0]).num_days() as f64 / 365.0;
        let p = vec![10.0; 13];
        let x: Vec<f64> = (0..13).map(|i| 1.0 + 0.03 * (i as f64).sin()).collect();
        let idx = to_base(&p, &x, &d, 1.0, 0.02);
        assert!((idx[12] / idx[0] - 1.02f64.powf(span)).abs() < 1e-12);
    }

    /// A gap (NaN) is bridged by the return from the last known point to the next.
    #[test]
    fn a_gap_is_bridged_from_the_last_known_point() {
        let p = [100.0, f64::NAN, 121.0];
        let x = [2.0, 2.5, 1.0];
        let idx = to_base(&p, &x, &days(3, 1), 0.0, 0.0);
        assert!(idx[1].is_nan());
        assert!((idx[2] - 121.0).abs() < 1e-12);
    }

    /// The rate of a date is the latest on or before it, never a later one, and not older than the date
    /// `max_age` rows before.
    #[test]
    fn rates_align_backwards_only_and_age_out() {
        let q = days(6, 2); // quoted every other day: 0, 2, 4, 6, 8, 10
        let v = [Some(1.0), Some(2.0), None, Some(4.0), None, None];
        let dates = days(11, 1);
        let a = align_series(&q, &v, &dates, 2);
        let got: Vec<Option<f64>> = a.iter().map(|r| r.map(|r| r.1)).collect();
        let want = [
            Some(1.0),
            Some(1.0),
            Some(2.0),
            Some(2.0),
            Some(2.0), // quoted day 2, the date two rows before day 4
            None,      // day 2 is three rows before day 5
            Some(4.0),
            Some(4.0),
            Some(4.0),
            None,
            None,
        ];
        assert_eq!(got, want);
    }
}
