//! Benchmark series of the policy (`policy.lines[].benchmark`): a series is an asset of the universe or a
//! price-file column without a metadata row, which the fund cannot buy. The liability proxy
//! (`liabilities.proxy`) is such a column too, and must be one: the fund cannot hold its liabilities. Those non-investable series are
//! read with the same data-quality rules as the assets (the file-wide checks run on every column), but
//! kept apart: they never enter the universe, the models, the scenarios of `scenarios.csv`, the weights
//! or the holdings. A benchmark series is never dropped: a gap the fill policy cannot fill is an error
//! naming the series and the date, as is a series the price file does not have.

use super::meta::AssetMeta;
use super::prices::PriceHistory;
use super::quality::{self, AssetQuality};
use crate::config::Config;
use crate::error::{Error, Result};

/// The policy's benchmark series, each once.
fn named(cfg: &Config) -> Vec<&str> {
    cfg.policy.as_ref().map_or(vec![], |p| p.series())
}

/// The first policy line measured by `series`, for messages.
fn line_of<'a>(cfg: &'a Config, series: &str) -> &'a str {
    cfg.policy
        .iter()
        .flat_map(|p| &p.lines)
        .find(|l| l.benchmark == series)
        .map_or("", |l| l.name.as_str())
}

/// The liability proxy's name, when liabilities are configured.
fn proxy(cfg: &Config) -> Option<&str> {
    cfg.liabilities.as_ref().map(|l| l.proxy.as_str())
}

/// A price-file column the policy names as a benchmark series, or the liability proxy, and the asset
/// metadata does not list.
pub fn is_reference(cfg: &Config, meta: &[AssetMeta], column: &str) -> bool {
    (named(cfg).contains(&column) || proxy(cfg) == Some(column))
        && !meta.iter().any(|m| m.asset == column)
}

/// The liability proxy is a column of the price file without an asset metadata row.
pub fn check_proxy(cfg: &Config, hist: &PriceHistory, meta: &[AssetMeta]) -> Result<()> {
    let Some(p) = proxy(cfg) else {
        return Ok(());
    };
    let why = if let Some(m) = meta.iter().find(|m| m.asset == p) {
        format!(
            "is an asset of the universe ({} of {} lists it); the proxy tracks the liabilities' value and the fund cannot buy it: name a price-file column without an asset metadata row",
            m.place,
            cfg.assets.display()
        )
    } else if !hist.assets.iter().any(|a| a == p) {
        format!(
            "is not a column of the price file {}; name the column of the series whose returns track the liabilities' value",
            cfg.price_file().display()
        )
    } else {
        return Ok(());
    };
    Err(Error::config(
        &cfg.path,
        format!("liabilities.proxy: series `{p}` {why}"),
    ))
}

/// Without a price file (scenarios from a scenario file): the series the policy names and the liability
/// proxy that the asset file does not list, each once, in the config's order; the liability proxy must
/// not be an asset.
pub fn named_without_prices(cfg: &Config, meta: &[AssetMeta]) -> Result<Vec<String>> {
    let is_asset = |s: &str| meta.iter().find(|m| m.asset == s);
    if let Some(p) = proxy(cfg)
        && let Some(m) = is_asset(p)
    {
        return Err(Error::config(
            &cfg.path,
            format!(
                "liabilities.proxy: series `{p}` is an asset of the universe ({} of {} lists it); the proxy tracks the liabilities' value and the fund cannot buy it: name a scenario-file column without an asset metadata row",
                m.place,
                cfg.assets.display()
            ),
        ));
    }
    let mut out: Vec<String> = vec![];
    for s in named(cfg).into_iter().chain(proxy(cfg)) {
        if is_asset(s).is_none() && !out.iter().any(|o| o == s) {
            out.push(s.to_string());
        }
    }
    Ok(out)
}

/// Every benchmark series the policy names is a column of the price file.
pub fn check_named(cfg: &Config, hist: &PriceHistory) -> Result<()> {
    match named(cfg)
        .into_iter()
        .find(|s| !hist.assets.iter().any(|a| a.as_str() == *s))
    {
        None => Ok(()),
        Some(s) => Err(Error::config(
            &cfg.path,
            format!(
                "policy.lines `{}`: benchmark series `{s}` is not in the price file {} (neither an asset nor a series of its own); name a column of the price file",
                line_of(cfg, s),
                cfg.price_file().display()
            ),
        )),
    }
}

/// The prices of benchmark series `a` over the whole history after the fill policy (NaN where missing and
/// not fillable; the scenario window from row `start` on is complete), with its quality counts; an error
/// naming the series and date where the policy cannot fill the window.
pub fn fill_series(
    cfg: &Config,
    hist: &PriceHistory,
    a: usize,
    start: usize,
) -> Result<(Vec<f64>, AssetQuality)> {
    let full = quality::fill_forward(&hist.values[a], cfg.quality.max_fill);
    unfilled(cfg, hist, a, &full, start)?;
    let f = quality::fill_asset(&hist.assets[a], &hist.values[a], start, &cfg.quality);
    Ok((full, f.quality))
}

/// A benchmark series that is an asset of the universe must not have been dropped by the fill policy.
pub fn check_kept(cfg: &Config, hist: &PriceHistory, kept: &[String], start: usize) -> Result<()> {
    for s in named(cfg) {
        if let Some(a) = hist.assets.iter().position(|x| x == s)
            && !kept.iter().any(|k| k == s)
        {
            let full = quality::fill_forward(&hist.values[a], cfg.quality.max_fill);
            unfilled(cfg, hist, a, &full, start)?;
        }
    }
    Ok(())
}

/// The first window row of a filled series that is still missing, as an error.
fn unfilled(cfg: &Config, hist: &PriceHistory, a: usize, full: &[f64], start: usize) -> Result<()> {
    let Some(r) = (start..full.len()).find(|&r| full[r].is_nan()) else {
        return Ok(());
    };
    let series = &hist.assets[a];
    if !named(cfg).contains(&series.as_str()) {
        return Err(proxy_unfilled(cfg, hist, a, r));
    }
    let why = if hist.values[a][..=r].iter().all(Option::is_none) {
        "its history starts later than the scenario window".to_string()
    } else {
        format!(
            "the date lies in a gap of more than quality.max_fill = {} consecutive missing prices",
            cfg.quality.max_fill
        )
    };
    Err(Error::data(
        cfg.price_file(),
        format!(
            "{}: benchmark series `{series}` of policy line `{}` has no price on {} ({why}); a benchmark series is never dropped: supply its prices from the start of the scenario window on, or raise quality.max_fill",
            hist.cell(a, r),
            line_of(cfg, series),
            hist.dates[r],
        ),
    ))
}

/// The liability proxy has no price on window row `r`: like a benchmark series, it is never dropped.
fn proxy_unfilled(cfg: &Config, hist: &PriceHistory, a: usize, r: usize) -> Error {
    Error::data(
        cfg.price_file(),
        format!(
            "{}: liability proxy `{}` (liabilities.proxy) has no price on {}; the proxy is never dropped: supply its prices from the start of the scenario window on (gaps of at most quality.max_fill = {} consecutive prices are filled)",
            hist.cell(a, r),
            hist.assets[a],
            hist.dates[r],
            cfg.quality.max_fill
        ),
    )
}
