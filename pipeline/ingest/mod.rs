//! Stage 1, ingest: price history, asset metadata and holdings in; a clean, as-of-cut market data set and
//! its data-quality report out.
//!
//! Rows dated after as-of are removed before any check or computation, so nothing after as-of can reach a
//! result. This module reads files only through [`table`]; later stages see only [`MarketData`].

pub mod currency;
pub mod meta;
pub mod parquet_guard;
pub mod prices;
pub mod quality;
pub mod reference;
pub mod scenario_file;
pub mod table;
pub mod valuation;

use crate::config::Config;
use crate::diag::{Check, Level};
use crate::error::{Error, Result};
use chrono::{Datelike, Months, NaiveDate, Weekday};
use meta::AssetMeta;
use prices::PriceHistory;
use quality::QualityReport;

/// Fewest scenarios a run accepts: below this a tail quantile is meaningless.
pub const MIN_SCENARIOS: usize = 20;

/// The market data every later stage works on.
#[derive(Debug, Clone)]
pub struct MarketData {
    pub as_of: NaiveDate,
    /// First and last observation in the file up to as-of.
    pub history: (NaiveDate, NaiveDate),
    /// Dates of the scenario window, ascending, ending at the last observation ≤ as-of.
    pub dates: Vec<NaiveDate>,
    /// Assets kept for the run, in price-file order.
    pub assets: Vec<String>,
    /// Non-investable benchmark series named by the policy (price-file columns without a metadata row), in
    /// price-file order: kept apart from `assets`, never in the models, weights or holdings.
    pub reference: Vec<String>,
    /// Filled window prices of the `reference` series, `reference_prices[series][row]` on `dates`.
    pub reference_prices: Vec<Vec<f64>>,
    /// Prices of the `reference` series over `full_dates` after the same fill policy (NaN where missing
    /// and not fillable), for the backtest's realised benchmark returns.
    pub reference_full_prices: Vec<Vec<f64>>,
    /// Filled prices of the window, `prices[asset][row]`.
    pub prices: Vec<Vec<f64>>,
    /// Every observation date up to as-of (for the backtest and historical stress windows).
    pub full_dates: Vec<NaiveDate>,
    /// Prices of the kept assets over `full_dates` after the same fill policy; NaN where a price is
    /// missing and cannot be filled (before an asset's first price, or inside a long gap).
    pub full_prices: Vec<Vec<f64>>,
    /// Metadata aligned with `assets`.
    pub meta: Vec<AssetMeta>,
    /// Assets of the asset file the fill policy dropped (a scenario file's columns for them are passed
    /// over).
    pub dropped_assets: Vec<String>,
    /// Current holdings aligned with `assets`, if configured.
    pub holdings: Option<Vec<f64>>,
    pub quality: QualityReport,
    pub layout: crate::config::Layout,
    /// Observations the scenarios are built on (`scenarios.frequency`): `dates` and `full_dates` are
    /// month-ends (quarter-ends) at a monthly (quarterly) frequency.
    pub frequency: crate::config::Frequency,
    /// Valuation facts of the kept assets, aligned with `assets`: autocorrelation, and the Geltner
    /// unsmoothing already applied to `prices` and `full_prices` where the metadata asks for it.
    pub valuation: Vec<valuation::AssetValuation>,
    /// Each asset's currency and hedge ratio, and its local-currency window prices
    /// ([`currency::convert`]): `prices` and `full_prices` above are in the base currency.
    pub currency: currency::Currencies,
}

/// Reads, cuts at as-of, checks and fills. Blocking quality problems are returned as [`Error::Quality`].
/// The as-of date is the config's (`--as-of`), else the latest month-end in the data.
pub fn load(cfg: &Config) -> Result<MarketData> {
    if cfg.prices.is_none() {
        return without_prices(cfg);
    }
    let table = table::read_table(cfg.price_file())?;
    let mut hist = prices::from_table(cfg.price_file(), &table, cfg.layout)?;
    let meta = meta::read_assets(&cfg.assets)?;
    skip_columns(cfg, &mut hist, &meta)?;
    reference::check_proxy(cfg, &hist, &meta)?;
    check_universe(cfg, &hist, &meta)?;
    valuation::check_meta(cfg, &meta)?;
    reference::check_named(cfg, &hist)?;
    let mut findings: Vec<Check> = quality::sort_dates(&mut hist).into_iter().collect();
    let as_of = resolve_as_of(cfg, &hist, cfg.as_of)?;
    cut_after(&mut hist, as_of);
    let file = cfg.price_file().display().to_string();
    findings.extend(quality::duplicate_dates(&file, &hist));
    findings.extend(quality::non_positive(&file, &hist));
    findings.extend(quality::overflowing_range(&file, &hist));
    if quality::worst(&findings) == Level::Fail {
        return Err(Error::Quality {
            problems: fails(&findings),
        });
    }
    // The file's own integrity rules above see every row; the scenario frequency's sampling comes next.
    let first = hist.dates[0];
    valuation::sample(cfg.scenarios.frequency, &mut hist);
    findings.extend(valuation::calendar_flag(cfg, &hist, &meta));
    let mut data = build(cfg, hist, meta, as_of, findings)?;
    data.history.0 = first;
    let unsmoothing = valuation::unsmooth(cfg, &mut data);
    data.quality.findings.extend(unsmoothing);
    let problems = data.quality.failures();
    if !problems.is_empty() {
        return Err(Error::Quality { problems });
    }
    currency::convert(cfg, &mut data)?;
    check_bounds(cfg, &data)?;
    Ok(data)
}

/// The market data of a run whose scenarios come from a scenario file and that has no price file: the
/// asset file's assets in its order, the holdings, no dates and no prices. The as-of date is the command
/// line's (`--as-of`): without prices nothing else dates the run. The non-investable series (policy
/// benchmarks, liability proxy) are the names the config gives that the asset file does not list; their
/// returns come from the scenario file too. The file's returns are taken as base-currency returns (no
/// exchange rates are applied to them).
fn without_prices(cfg: &Config) -> Result<MarketData> {
    let meta = meta::read_assets(&cfg.assets)?;
    valuation::check_meta(cfg, &meta)?;
    let as_of = cfg.as_of.ok_or_else(|| {
        Error::config(
            &cfg.path,
            "data.scenarios without data.prices: give the as-of date with --as-of (there are no price dates to take it from)",
        )
    })?;
    let assets: Vec<String> = meta.iter().map(|m| m.asset.clone()).collect();
    if let Some(x) = cfg.exclude.iter().find(|x| !assets.contains(x)) {
        return Err(Error::config(
            &cfg.path,
            format!("limits.exclude: unknown asset `{x}`"),
        ));
    }
    let reference = reference::named_without_prices(cfg, &meta)?;
    let holdings = match &cfg.holdings {
        Some(p) => Some(meta::read_holdings(p, &assets)?),
        None => None,
    };
    let n = assets.len();
    let data = MarketData {
        as_of,
        history: (as_of, as_of),
        dates: vec![],
        reference_prices: vec![vec![]; reference.len()],
        reference_full_prices: vec![vec![]; reference.len()],
        reference,
        prices: vec![vec![]; n],
        full_dates: vec![],
        full_prices: vec![vec![]; n],
        dropped_assets: vec![],
        holdings,
        quality: QualityReport {
            fill_policy: "no price file: the scenarios come from the scenario file".to_string(),
            window_start: as_of,
            window_end: as_of,
            observations: 0,
            assets: vec![],
            reference_series: vec![],
            findings: vec![],
        },
        layout: cfg.layout,
        frequency: cfg.scenarios.frequency,
        valuation: vec![],
        currency: currency::without_prices(cfg, &assets, &meta)?,
        meta,
        assets,
    };
    check_bounds(cfg, &data)?;
    Ok(data)
}

fn fails(findings: &[Check]) -> Vec<String> {
    findings
        .iter()
        .filter(|f| f.level == Level::Fail)
        .map(|f| f.message.clone())
        .collect()
}

/// Removes the price-file columns the fund leaves out (`data.skip_columns`), before any check sees them.
/// Each must be a column of the file, and neither an asset of the metadata nor a series the config uses
/// (a policy benchmark series, the liability proxy): leaving out what the run needs is a contradiction.
fn skip_columns(cfg: &Config, hist: &mut PriceHistory, meta: &[AssetMeta]) -> Result<()> {
    for (j, c) in cfg.skip_columns.iter().enumerate() {
        let why = if !hist.assets.contains(c) {
            format!(
                "is not a column of the price file {}",
                cfg.price_file().display()
            )
        } else if let Some(m) = meta.iter().find(|m| &m.asset == c) {
            format!(
                "is an asset of the universe ({} of {} lists it): remove its row there, or exclude it from the models with limits.exclude",
                m.place,
                cfg.assets.display()
            )
        } else if reference::is_reference(cfg, meta, c) {
            "is a series the config uses (a policy benchmark series or the liability proxy)".into()
        } else {
            continue;
        };
        return Err(Error::config(
            &cfg.path,
            format!("data.skip_columns[{j}]: `{}` {why}", truncate(c, 40)),
        ));
    }
    hist.remove_columns(&cfg.skip_columns);
    Ok(())
}

fn check_universe(cfg: &Config, hist: &PriceHistory, meta: &[AssetMeta]) -> Result<()> {
    if let Some(a) = hist
        .assets
        .iter()
        .find(|a| !meta.iter().any(|m| &m.asset == *a) && !reference::is_reference(cfg, meta, a))
    {
        return Err(Error::data(
            &cfg.assets,
            format!(
                "column `asset`: has no row for asset `{}`, which is in the price file {}; every priced asset needs a row with at least its class (a benchmark series the policy names and the liability proxy need none; a column the fund does not use is left out with data.skip_columns)",
                truncate(a, 40),
                cfg.price_file().display()
            ),
        ));
    }
    if let Some(m) = meta.iter().find(|m| !hist.assets.contains(&m.asset)) {
        return Err(Error::data(
            &cfg.assets,
            format!(
                "{}: lists asset `{}`, which has no prices in the price file {}; remove the row or add its prices",
                m.place,
                m.asset,
                cfg.price_file().display()
            ),
        ));
    }
    if let Some(x) = cfg
        .exclude
        .iter()
        .find(|x| !hist.assets.contains(x) || reference::is_reference(cfg, meta, x))
    {
        return Err(Error::config(
            &cfg.path,
            format!("limits.exclude: unknown asset `{x}`"),
        ));
    }
    Ok(())
}

/// The per-asset weight bounds of the kept assets must leave room for the budget Σx = 1: minimums summing
/// above 1 or maximums summing below 1 make every model infeasible, so the run stops here naming the keys
/// and columns the bounds come from (group limits and turnover, which interact, are diagnosed per model).
fn check_bounds(cfg: &Config, data: &MarketData) -> Result<()> {
    let excluded = |a: &String| cfg.exclude.contains(a);
    let bound = |m: &AssetMeta, a: &String, lower: bool| match (excluded(a), lower) {
        (true, _) => 0.0,
        (false, true) => m.min_weight.unwrap_or(cfg.default_min),
        (false, false) => m.max_weight.unwrap_or(cfg.default_max),
    };
    let sum = |lower: bool| -> f64 {
        data.meta
            .iter()
            .zip(&data.assets)
            .map(|(m, a)| bound(m, a, lower))
            .sum()
    };
    let (lo, hi) = (sum(true), sum(false));
    let n = data.assets.len();
    let own = |f: fn(&AssetMeta) -> Option<f64>| {
        data.meta
            .iter()
            .zip(&data.assets)
            .filter(|(m, a)| f(m).is_some() && !excluded(a))
            .count()
    };
    let assets = cfg.assets.display();
    let exclude = if cfg.exclude.is_empty() {
        String::new()
    } else {
        format!(", {} excluded by limits.exclude", cfg.exclude.len())
    };
    if lo > 1.0 + BOUND_SLACK {
        return Err(Error::config(
            &cfg.path,
            format!(
                "limits.default_min = {}, column `min_weight` of {assets}: the minimum weights of the {n} assets sum to {lo:.4} > 1 ({} of them from their own min_weight, the rest from limits.default_min{exclude}), so no portfolio meets the budget Σx = 1: lower limits.default_min or the min_weight values",
                cfg.default_min,
                own(|m| m.min_weight)
            ),
        ));
    }
    if hi < 1.0 - BOUND_SLACK {
        return Err(Error::config(
            &cfg.path,
            format!(
                "limits.default_max = {}, column `max_weight` of {assets}: the maximum weights of the {n} assets sum to {hi:.4} < 1 ({} of them from their own max_weight, the rest from limits.default_max{exclude}), so no portfolio meets the budget Σx = 1: raise limits.default_max or the max_weight values",
                cfg.default_max,
                own(|m| m.max_weight)
            ),
        ));
    }
    Ok(())
}

/// Rounding slack of the bound sums (weights are written with a few decimals).
const BOUND_SLACK: f64 = 1e-12;

/// As given (must lie within the data), or the latest month-end in the data.
fn resolve_as_of(cfg: &Config, hist: &PriceHistory, given: Option<NaiveDate>) -> Result<NaiveDate> {
    let (first, last) = (hist.dates[0], *hist.dates.last().expect("non-empty"));
    match given {
        Some(d) if d < first || d > last => Err(Error::config(
            &cfg.path,
            format!(
                "--as-of {d} is outside the price data, which runs from {first} to {last} ({}); give a date in that range or leave --as-of out for the latest month-end",
                cfg.price_file().display()
            ),
        )),
        Some(d) => Ok(d),
        None => Ok(default_as_of(&hist.dates)),
    }
}

/// The last observation of the latest complete calendar month: the last date itself when no business day
/// of its month follows it, otherwise the last observation of the month before.
pub fn default_as_of(dates: &[NaiveDate]) -> NaiveDate {
    let last = *dates.last().expect("non-empty");
    if is_last_business_day(last) {
        return last;
    }
    let month_start = last.with_day(1).expect("day 1 exists");
    dates
        .iter()
        .rev()
        .find(|d| **d < month_start)
        .copied()
        .unwrap_or(last)
}

fn is_last_business_day(d: NaiveDate) -> bool {
    let mut next = d.succ_opt().expect("date in range");
    while matches!(next.weekday(), Weekday::Sat | Weekday::Sun) {
        next = next.succ_opt().expect("date in range");
    }
    next.month() != d.month()
}

fn cut_after(h: &mut PriceHistory, as_of: NaiveDate) {
    let keep = h.dates.partition_point(|d| *d <= as_of);
    h.keep_rows(&(0..keep).collect::<Vec<_>>());
}

/// The kept assets of the scenario window, their filled prices and metadata, and every asset's quality.
struct Kept {
    assets: Vec<String>,
    prices: Vec<Vec<f64>>,
    full: Vec<Vec<f64>>,
    metas: Vec<AssetMeta>,
    per_asset: Vec<quality::AssetQuality>,
    reference: Vec<String>,
    reference_prices: Vec<Vec<f64>>,
    reference_full: Vec<Vec<f64>>,
    reference_quality: Vec<quality::AssetQuality>,
}

fn build(
    cfg: &Config,
    hist: PriceHistory,
    meta: Vec<AssetMeta>,
    as_of: NaiveDate,
    mut findings: Vec<Check>,
) -> Result<MarketData> {
    let start = window_start(cfg, &hist, as_of, &mut findings);
    let filled = fill(cfg, &hist, &meta, start, &mut findings)?;
    reference::check_kept(cfg, &hist, &filled.assets, start)?;
    let dates = hist.dates[start..].to_vec();
    findings.extend(window_findings(cfg, &filled, dates.len()));
    let holdings = match &cfg.holdings {
        Some(p) if !filled.assets.is_empty() => Some(meta::read_holdings(p, &filled.assets)?),
        _ => None,
    };
    let quality = QualityReport {
        fill_policy: format!(
            "forward-fill up to {} consecutive missing observations, else drop the asset",
            cfg.quality.max_fill
        ),
        window_start: dates.first().copied().unwrap_or(as_of),
        window_end: dates.last().copied().unwrap_or(as_of),
        observations: dates.len(),
        assets: filled.per_asset,
        reference_series: filled.reference_quality,
        findings,
    };
    let history = (hist.dates[0], *hist.dates.last().expect("non-empty"));
    let dropped_assets = dropped(&quality.assets);
    Ok(MarketData {
        as_of,
        history,
        dates,
        assets: filled.assets,
        reference: filled.reference,
        reference_prices: filled.reference_prices,
        reference_full_prices: filled.reference_full,
        prices: filled.prices,
        full_dates: hist.dates,
        full_prices: filled.full,
        meta: filled.metas,
        dropped_assets,
        holdings,
        quality,
        layout: hist.layout,
        frequency: cfg.scenarios.frequency,
        valuation: vec![],
        currency: currency::Currencies::default(),
    })
}

/// The assets the fill policy dropped, in price-file order.
fn dropped(assets: &[quality::AssetQuality]) -> Vec<String> {
    assets
        .iter()
        .filter(|q| q.dropped)
        .map(|q| q.asset.clone())
        .collect()
}

/// The first row of the scenario window (`scenarios.lookback_years` before as-of), with a warning when
/// the history starts later.
fn window_start(
    cfg: &Config,
    hist: &PriceHistory,
    as_of: NaiveDate,
    findings: &mut Vec<Check>,
) -> usize {
    let window_start = as_of
        .checked_sub_months(Months::new(12 * cfg.scenarios.lookback_years))
        .unwrap_or(hist.dates[0]);
    let start = hist.dates.partition_point(|d| *d < window_start);
    if start == 0 && hist.dates[0] > window_start {
        findings.push(Check::warn("quality.lookback", format!(
            "the price history starts on {}, after the lookback start {window_start} ({} years before as-of); all of it is used",
            hist.dates[0], cfg.scenarios.lookback_years)));
    }
    start
}

/// Applies the fill policy to every asset from row `start` on; an asset the policy drops is left out. The
/// policy's non-investable benchmark series are filled apart ([`reference::fill_series`]).
fn fill(
    cfg: &Config,
    hist: &PriceHistory,
    meta: &[AssetMeta],
    start: usize,
    findings: &mut Vec<Check>,
) -> Result<Kept> {
    let mut out = Kept {
        assets: vec![],
        prices: vec![],
        full: vec![],
        metas: vec![],
        per_asset: vec![],
        reference: vec![],
        reference_prices: vec![],
        reference_full: vec![],
        reference_quality: vec![],
    };
    for (j, (a, series)) in hist.assets.iter().zip(&hist.values).enumerate() {
        if reference::is_reference(cfg, meta, a) {
            let (full, q) = reference::fill_series(cfg, hist, j, start)?;
            out.reference.push(a.clone());
            out.reference_prices.push(full[start..].to_vec());
            out.reference_full.push(full);
            out.reference_quality.push(q);
            continue;
        }
        let f = quality::fill_asset(a, series, start, &cfg.quality);
        findings.extend(f.note);
        if !f.quality.dropped {
            out.assets.push(a.clone());
            out.prices.push(f.values);
            out.full
                .push(quality::fill_forward(series, cfg.quality.max_fill));
            out.metas.push(
                meta.iter()
                    .find(|m| &m.asset == a)
                    .expect("checked")
                    .clone(),
            );
        }
        out.per_asset.push(f.quality);
    }
    Ok(out)
}

/// The findings on the window as a whole: per-series rules, the scenario count, and the history length.
fn window_findings(cfg: &Config, filled: &Kept, rows: usize) -> Vec<Check> {
    let every: Vec<quality::AssetQuality> = filled
        .per_asset
        .iter()
        .chain(&filled.reference_quality)
        .cloned()
        .collect();
    let mut findings = quality::series_findings(&every, &cfg.quality);
    if cfg.scenario_file.is_some() {
        // The scenarios come from the scenario file: the window's length decides nothing.
        if filled.assets.is_empty() {
            findings.push(Check::fail(
                "quality.no_assets",
                "every asset was dropped by the fill policy; nothing to optimise",
            ));
        }
        return findings;
    }
    findings.push(window_check(
        &cfg.price_file().display().to_string(),
        rows,
        cfg.scenarios.horizon,
        cfg.scenarios.step,
    ));
    if filled.assets.is_empty() {
        findings.push(Check::fail(
            "quality.no_assets",
            "every asset was dropped by the fill policy; nothing to optimise",
        ));
    } else {
        findings.push(quality::history_length(
            rows,
            filled.assets.len(),
            cfg.scenarios.horizon,
            cfg.scenarios.frequency,
            &cfg.quality,
        ));
    }
    findings
}

fn window_check(file: &str, rows: usize, horizon: usize, step: usize) -> Check {
    let scenarios = if rows > horizon {
        (rows - horizon - 1) / step + 1
    } else {
        0
    };
    if scenarios < MIN_SCENARIOS {
        Check::fail(
            "quality.too_few_scenarios",
            format!(
                "{file}: the scenario window has {rows} observations, giving {scenarios} scenarios of horizon {horizon} (step {step}); at least {MIN_SCENARIOS} are needed: lengthen scenarios.lookback_years, shorten scenarios.horizon or supply more history"
            ),
        )
    } else {
        Check::pass(
            "quality.scenario_count",
            format!(
                "{scenarios} scenarios from {rows} observations (horizon {horizon}, step {step})"
            ),
        )
    }
}

/// First `n` characters of `s`, with an ellipsis when cut (keeps messages short for huge lines).
pub fn truncate(s: &str, n: usize) -> String {
    if s.chars().count() <= n {
        s.to_string()
    } else {
        format!("{}…", s.chars().take(n).collect::<String>())
    }
}
