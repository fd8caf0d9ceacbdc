//! Assets valued monthly or quarterly: the scenario frequency's sampling of the price history, the rule
//! that no asset is valued less often than scenarios are built, Geltner unsmoothing of the assets whose
//! metadata asks for it, and the flags of appraisal-like series that are not marked.
//!
//! Sampling (`scenarios.frequency: monthly` or `quarterly`) keeps the last row of each calendar month (or
//! quarter) up to as-of and gives each series its last observation within that period, never a later
//! one. Unsmoothing works on an asset's filled price index and rebuilds the index from the unsmoothed
//! returns, so every later stage (scenarios, backtest, stress windows, bands) sees one index per asset
//! and works unchanged. This module touches only the [`PriceHistory`] it samples and the prices of the
//! [`MarketData`] it unsmooths.

use super::MarketData;
use super::meta::AssetMeta;
use super::prices::PriceHistory;
use crate::config::{Config, Frequency, MAX_GELTNER_RHO};
use crate::diag::Check;
use crate::error::{Error, Result};
use chrono::{Datelike, NaiveDate};
use serde::Serialize;

/// One kept asset's valuation facts: how often it is valued, the first-order autocorrelation of its
/// observed returns over the scenario window and, when it is unsmoothed, the ρ used and both volatilities.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct AssetValuation {
    /// Asset code.
    pub asset: String,
    /// The metadata's `valuation` column.
    pub valuation: Frequency,
    /// The first-order sample autocorrelation of the observed returns in the scenario window (`None`
    /// when the returns do not vary).
    pub autocorrelation: Option<f64>,
    /// Its standard error √((1 − r₁²)/n) (Bartlett 1946, for a first-order autoregression).
    pub standard_error: Option<f64>,
    /// Returns in the scenario window, n.
    pub returns: usize,
    /// The unsmoothing applied, when the metadata asks for it (`smoothing: geltner`).
    pub unsmoothed: Option<Unsmoothed>,
}

/// Geltner unsmoothing of one asset.
#[derive(Debug, Clone, Serialize, schemars::JsonSchema)]
pub struct Unsmoothed {
    /// The ρ used.
    pub rho: f64,
    /// `given` (scenarios.geltner_rho) or `estimated` (the autocorrelation over the scenario window, or 0
    /// when that is negative).
    pub rho_source: &'static str,
    /// Standard deviation (n − 1) of the observed returns in the scenario window, per observation.
    pub observed_volatility: f64,
    /// The same of the unsmoothed returns.
    pub unsmoothed_volatility: f64,
}

/// No asset may be valued less often than scenarios are built (a monthly asset in a daily scenario set
/// would carry one value through a month of scenario dates), and every `scenarios.geltner_rho` entry must
/// name an asset whose metadata asks for unsmoothing.
pub fn check_meta(cfg: &Config, meta: &[AssetMeta]) -> Result<()> {
    let freq = cfg.scenarios.frequency;
    if let Some(m) = meta.iter().find(|m| m.valuation > freq) {
        return Err(Error::data(
            &cfg.assets,
            format!(
                "{}, column `valuation`: asset `{}` is valued {}, but scenarios are built {} (scenarios.frequency: {} in {}), so its value would be carried unchanged through scenario dates between valuations; set scenarios.frequency: {} (or less frequent), or remove the asset",
                m.place,
                m.asset,
                m.valuation.word(),
                freq.word(),
                freq.word(),
                cfg.path.display(),
                m.valuation.word()
            ),
        ));
    }
    for asset in cfg.scenarios.geltner_rho.keys() {
        match meta.iter().find(|m| &m.asset == asset) {
            None => {
                return Err(Error::config(
                    &cfg.path,
                    format!(
                        "scenarios.geltner_rho.{}: unknown asset (not in {})",
                        super::truncate(asset, 40),
                        cfg.assets.display()
                    ),
                ));
            }
            Some(m) if !m.geltner => {
                return Err(Error::config(
                    &cfg.path,
                    format!(
                        "scenarios.geltner_rho.{asset}: asset `{asset}` is not unsmoothed ({}, column `smoothing` of {} is not `geltner`); set the column or remove the entry",
                        m.place,
                        cfg.assets.display()
                    ),
                ));
            }
            Some(_) => {}
        }
    }
    Ok(())
}

/// The period a date falls in at `freq`: (year, month) for monthly, (year, quarter) for quarterly.
fn period(freq: Frequency, d: NaiveDate) -> (i32, u32) {
    match freq {
        Frequency::Daily => (d.year(), d.ordinal()),
        Frequency::Monthly => (d.year(), d.month()),
        Frequency::Quarterly => (d.year(), (d.month() - 1) / 3),
    }
}

/// The last row of each period of `dates` (ascending).
pub fn period_ends(freq: Frequency, dates: &[NaiveDate]) -> Vec<usize> {
    (0..dates.len())
        .filter(|&i| i + 1 == dates.len() || period(freq, dates[i + 1]) != period(freq, dates[i]))
        .collect()
}

/// Samples the history at `freq`: one row per calendar period (its last row), each series taking its
/// last observation within the period (blank when the period has none). Daily keeps every row.
pub fn sample(freq: Frequency, h: &mut PriceHistory) {
    if freq == Frequency::Daily || h.dates.is_empty() {
        return;
    }
    let ends = period_ends(freq, &h.dates);
    let mut first = 0;
    for &end in &ends {
        for a in 0..h.values.len() {
            if let Some(r) = (first..=end).rev().find(|&r| h.values[a][r].is_some()) {
                h.values[a][end] = h.values[a][r];
                if let Some(cells) = h.cells.as_mut() {
                    cells[a][end] = cells[a][r];
                }
            }
        }
        first = end + 1;
    }
    h.keep_rows(&ends);
}

/// Simple returns of consecutive prices.
fn returns(prices: &[f64]) -> Vec<f64> {
    prices.windows(2).map(|w| w[1] / w[0] - 1.0).collect()
}

/// The first-order sample autocorrelation r₁ = Σ_{t≥2} (x_t − x̄)(x_{t−1} − x̄) / Σ_t (x_t − x̄)² (Box,
/// Jenkins & Reinsel, Time Series Analysis, eq. 2.1.12); `None` for fewer than three values or a constant
/// series.
pub fn autocorrelation(x: &[f64]) -> Option<f64> {
    if x.len() < 3 {
        return None;
    }
    let mean = x.iter().sum::<f64>() / x.len() as f64;
    let den: f64 = x.iter().map(|v| (v - mean).powi(2)).sum();
    if den <= 0.0 || !den.is_finite() {
        return None;
    }
    let num: f64 = x.windows(2).map(|w| (w[1] - mean) * (w[0] - mean)).sum();
    Some(num / den)
}

/// The large-sample standard error of r₁ when the series is a first-order autoregression with
/// coefficient r₁: √((1 − r₁²)/n) (Bartlett 1946; Box, Jenkins & Reinsel, §2.1.6).
pub fn standard_error(r1: f64, n: usize) -> f64 {
    ((1.0 - r1 * r1).max(0.0) / n as f64).sqrt()
}

/// Geltner's unsmoothing of observed (appraisal) returns: R_t = (R*_t − ρ R*_{t−1}) / (1 − ρ) (Geltner,
/// "Estimating market values from appraised values without assuming an efficient market", Journal of
/// Real Estate Research 8(3), 1993). The first return has no predecessor and is kept as observed (taking
/// R*_0 = R*_1, which gives R_1 = R*_1).
pub fn geltner(observed: &[f64], rho: f64) -> Vec<f64> {
    observed
        .iter()
        .enumerate()
        .map(|(t, r)| match t {
            0 => *r,
            _ => (r - rho * observed[t - 1]) / (1.0 - rho),
        })
        .collect()
}

/// The sample standard deviation (n − 1).
pub fn volatility(x: &[f64]) -> f64 {
    if x.len() < 2 {
        return 0.0;
    }
    let mean = x.iter().sum::<f64>() / x.len() as f64;
    (x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (x.len() - 1) as f64).sqrt()
}

/// A price index rebuilt from `first` and the returns: P_t = P_{t−1}(1 + R_t).
pub fn rebuild(first: f64, returns: &[f64]) -> Vec<f64> {
    let mut out = Vec::with_capacity(returns.len() + 1);
    out.push(first);
    for r in returns {
        out.push(out.last().expect("non-empty") * (1.0 + r));
    }
    out
}

/// Computes every kept asset's valuation facts and unsmooths the assets whose metadata asks for it,
/// replacing their window and full-history prices by the rebuilt index. Returns the findings: a `fail`
/// when an estimated ρ is above [`MAX_GELTNER_RHO`] or an unsmoothed return is −100% or below, a `warn`
/// for each appraisal-like series that is not unsmoothed.
pub fn unsmooth(cfg: &Config, data: &mut MarketData) -> Vec<Check> {
    let start = data.full_dates.len() - data.dates.len();
    let mut findings = Vec::new();
    let mut facts = Vec::with_capacity(data.assets.len());
    for j in 0..data.assets.len() {
        let observed = returns(&data.prices[j]);
        let r1 = autocorrelation(&observed);
        let mut fact = AssetValuation {
            asset: data.assets[j].clone(),
            valuation: data.meta[j].valuation,
            autocorrelation: r1,
            standard_error: r1.map(|r| standard_error(r, observed.len())),
            returns: observed.len(),
            unsmoothed: None,
        };
        if data.meta[j].geltner {
            match treat(cfg, data, j, start, &observed, &fact) {
                Ok(u) => fact.unsmoothed = Some(u),
                Err(fail) => findings.push(fail),
            }
        }
        facts.push(fact);
    }
    findings.extend(autocorrelation_flag(cfg, &facts));
    findings.extend(treated_note(cfg, &facts));
    data.valuation = facts;
    findings
}

/// A `pass` finding naming each unsmoothed asset with its ρ, so the checks say what was done to the data
/// (none when no asset is unsmoothed).
fn treated_note(cfg: &Config, facts: &[AssetValuation]) -> Option<Check> {
    let treated: Vec<String> = facts
        .iter()
        .filter_map(|f| {
            let u = f.unsmoothed.as_ref()?;
            Some(format!(
                "`{}` with {} ρ = {:.2}",
                f.asset, u.rho_source, u.rho
            ))
        })
        .collect();
    (!treated.is_empty()).then(|| {
        Check::pass(
            "quality.unsmoothed",
            format!(
                "Geltner unsmoothing of appraisal-valued {} returns: {}; observed and unsmoothed volatilities in the data appendix",
                cfg.scenarios.frequency.word(),
                treated.join(", ")
            ),
        )
    })
}

/// Unsmooths asset `j` with its given or estimated ρ; a `fail` finding when that cannot be done.
fn treat(
    cfg: &Config,
    data: &mut MarketData,
    j: usize,
    start: usize,
    observed: &[f64],
    fact: &AssetValuation,
) -> std::result::Result<Unsmoothed, Check> {
    let asset = &data.assets[j];
    let (rho, rho_source) = match cfg.scenarios.geltner_rho.get(asset) {
        Some(rho) => (*rho, "given"),
        None => (estimated_rho(cfg, fact)?, "estimated"),
    };
    let full = unsmooth_series(&data.full_prices[j], rho).map_err(|t| {
        Check::fail(
            "quality.unsmoothing",
            format!(
                "{}: unsmoothing `{asset}` with ρ = {rho:.3} gives a return of −100% or below on {} (Geltner: R = (R* − ρ·R*₋₁)/(1 − ρ)), so no price index can be rebuilt; give a smaller ρ in scenarios.geltner_rho",
                cfg.price_file().display(),
                data.full_dates[t]
            ),
        )
    })?;
    data.prices[j] = full[start..].to_vec();
    data.full_prices[j] = full;
    Ok(Unsmoothed {
        rho,
        rho_source,
        observed_volatility: volatility(observed),
        unsmoothed_volatility: volatility(&returns(&data.prices[j])),
    })
}

/// The estimated ρ: r₁ over the scenario window, 0 when r₁ is negative or undefined (nothing to
/// unsmooth); a `fail` finding above [`MAX_GELTNER_RHO`].
fn estimated_rho(cfg: &Config, fact: &AssetValuation) -> std::result::Result<f64, Check> {
    let r1 = fact.autocorrelation.unwrap_or(0.0);
    if r1 > MAX_GELTNER_RHO {
        return Err(Check::fail(
            "quality.unsmoothing",
            format!(
                "{}: the estimated Geltner ρ of `{}` is {r1:.3} (standard error {:.3}, {} {} returns), above the {MAX_GELTNER_RHO} tailpack unsmooths with; give ρ in scenarios.geltner_rho.{} or check the series",
                cfg.price_file().display(),
                fact.asset,
                fact.standard_error.unwrap_or(0.0),
                fact.returns,
                cfg.scenarios.frequency.word(),
                fact.asset
            ),
        ));
    }
    Ok(r1.max(0.0))
}

/// Unsmooths a full price series (NaN where missing and not filled): each run of prices is rebuilt from
/// its first price and its unsmoothed returns. `Err(row)` names the first row whose unsmoothed return is
/// −100% or below (or not finite).
pub fn unsmooth_series(prices: &[f64], rho: f64) -> std::result::Result<Vec<f64>, usize> {
    let mut out = prices.to_vec();
    let mut i = 0;
    while i < prices.len() {
        if !prices[i].is_finite() {
            i += 1;
            continue;
        }
        let end = (i..prices.len())
            .find(|&k| !prices[k].is_finite())
            .unwrap_or(prices.len());
        let r = geltner(&returns(&prices[i..end]), rho);
        if let Some(t) = r.iter().position(|x| !(x.is_finite() && *x > -1.0)) {
            return Err(i + t + 1);
        }
        out[i..end].copy_from_slice(&rebuild(prices[i], &r));
        i = end;
    }
    Ok(out)
}

/// Assets not unsmoothed whose returns look appraisal-smoothed: first-order autocorrelation at or above
/// `quality.autocorrelation_flag` and more than two standard errors of a white-noise series (2/√n, Box,
/// Jenkins & Reinsel §2.1.6) above zero. No finding when none does, so a clean run's checks are unchanged.
fn autocorrelation_flag(cfg: &Config, facts: &[AssetValuation]) -> Option<Check> {
    let flagged: Vec<String> = facts
        .iter()
        .filter(|f| f.unsmoothed.is_none())
        .filter_map(|f| {
            let r1 = f.autocorrelation?;
            let noise = 2.0 / (f.returns as f64).sqrt();
            (r1 >= cfg.quality.autocorrelation_flag && r1 > noise).then(|| {
                format!(
                    "`{}` (r₁ = {r1:.2}, standard error {:.2}, {} returns)",
                    f.asset,
                    f.standard_error.unwrap_or(0.0),
                    f.returns
                )
            })
        })
        .collect();
    (!flagged.is_empty()).then(|| {
        Check::warn(
            "quality.appraisal_autocorrelation",
            format!(
                "appraisal-like returns (first-order autocorrelation at or above quality.autocorrelation_flag = {}, as smoothed valuations show; risk is understated): {}; mark the asset `smoothing: geltner` in {} or check the feed",
                cfg.quality.autocorrelation_flag,
                flagged.join(", "),
                cfg.assets.display()
            ),
        )
    })
}

/// Fewest price changes before a calendar pattern is judged.
const CALENDAR_MIN_CHANGES: usize = 4;
/// Share of the changes that must fall on a period's last observation.
const CALENDAR_SHARE: f64 = 0.9;

/// Series (assets not marked as valued less often than daily, and the policy's benchmark series) whose
/// price changes only on the last observation of a calendar month (of a quarter at a monthly scenario
/// frequency): at least [`CALENDAR_MIN_CHANGES`] changes, at least [`CALENDAR_SHARE`] of them on a period's
/// last row, and the price unchanged or blank on most rows. Judged on the history up to as-of before
/// filling; a rule of thumb of our own (a valuation calendar shows as stale runs between period ends).
pub fn calendar_flag(cfg: &Config, h: &PriceHistory, meta: &[AssetMeta]) -> Option<Check> {
    let coarser = match cfg.scenarios.frequency {
        Frequency::Daily => Frequency::Monthly,
        Frequency::Monthly => Frequency::Quarterly,
        Frequency::Quarterly => return None,
    };
    let ends = period_ends(coarser, &h.dates);
    let mut is_end = vec![false; h.dates.len()];
    ends.iter().for_each(|&r| is_end[r] = true);
    let flagged: Vec<String> = h
        .assets
        .iter()
        .zip(&h.values)
        .filter(|(a, _)| {
            meta.iter()
                .find(|m| &m.asset == *a)
                .is_none_or(|m| m.valuation == Frequency::Daily)
        })
        .filter_map(|(a, series)| calendar_evidence(a, series, &is_end, coarser))
        .collect();
    (!flagged.is_empty()).then(|| {
        Check::warn(
            "quality.appraisal_calendar",
            format!(
                "appraisal-like series (the price changes only on a period's last observation, stale or blank in between): {}; mark the asset's `valuation` in {} and build scenarios at that frequency (scenarios.frequency), or check the feed",
                flagged.join(", "),
                cfg.assets.display()
            ),
        )
    })
}

/// "`X` (58 of its 60 price changes on the last observation of a month)", when the series follows the
/// calendar.
fn calendar_evidence(
    asset: &str,
    series: &[Option<f64>],
    is_end: &[bool],
    coarser: Frequency,
) -> Option<String> {
    let mut last: Option<f64> = None;
    let (mut changes, mut on_end) = (0usize, 0usize);
    for (r, v) in series.iter().enumerate() {
        let Some(p) = v else { continue };
        if last.is_some_and(|l| l != *p) {
            changes += 1;
            on_end += usize::from(is_end[r]);
        }
        last = Some(*p);
    }
    let regular = changes >= CALENDAR_MIN_CHANGES
        && 2 * changes <= series.len()
        && on_end as f64 >= CALENDAR_SHARE * changes as f64;
    regular.then(|| {
        format!(
            "`{asset}` ({on_end} of its {changes} price changes on the last observation of a {})",
            match coarser {
                Frequency::Quarterly => "quarter",
                _ => "month",
            }
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn geltner_on_a_worked_series() {
        // Geltner (1993): R_t = (R*_t − ρ R*_{t−1}) / (1 − ρ). With ρ = 0.5 and observed returns 2%, 1%,
        // −1%, 3%, worked by hand: (0.01 − 0.5·0.02)/0.5 = 0, (−0.01 − 0.005)/0.5 = −0.03,
        // (0.03 + 0.005)/0.5 = 0.07; the first is kept as observed.
        let r = geltner(&[0.02, 0.01, -0.01, 0.03], 0.5);
        let want = [0.02, 0.0, -0.03, 0.07];
        for (got, want) in r.iter().zip(want) {
            assert!((got - want).abs() < 1e-15, "{r:?}");
        }
        // ρ = 0 leaves the returns as observed.
        assert_eq!(geltner(&[0.02, -0.01], 0.0), vec![0.02, -0.01]);
    }

    #[test]
    fn sampling_takes_each_months_last_observation_never_a_later_one() {
        let d = |m, day| NaiveDate::from_ymd_opt(2024, m, day).unwrap();
        let mut h = PriceHistory {
            dates: vec![d(1, 30), d(1, 31), d(2, 1), d(2, 28), d(2, 29), d(3, 4)],
            assets: vec!["A".into(), "B".into()],
            values: vec![
                vec![
                    Some(1.0),
                    Some(2.0),
                    Some(3.0),
                    Some(4.0),
                    Some(5.0),
                    Some(6.0),
                ],
                // B: no price on February's last row; its last February price is on the 28th.
                vec![Some(10.0), None, Some(30.0), Some(40.0), None, None],
            ],
            places: (0..6).map(|i| format!("row {i}")).collect(),
            cells: None,
            first_line: None,
            layout: crate::config::Layout::Wide,
        };
        sample(Frequency::Monthly, &mut h);
        assert_eq!(h.dates, vec![d(1, 31), d(2, 29), d(3, 4)]);
        assert_eq!(h.values[0], vec![Some(2.0), Some(5.0), Some(6.0)]);
        // January's last B price is the 30th's (10), never February's; March has none.
        assert_eq!(h.values[1], vec![Some(10.0), Some(40.0), None]);
        assert_eq!(h.places, vec!["row 1", "row 4", "row 5"]);
    }

    #[test]
    fn quarterly_sampling_keeps_each_quarters_last_row() {
        let d = |m, day| NaiveDate::from_ymd_opt(2024, m, day).unwrap();
        let dates = vec![d(1, 31), d(2, 29), d(3, 28), d(4, 30), d(6, 28), d(7, 1)];
        // Calendar quarters: January–March, April–June, July–September.
        assert_eq!(period_ends(Frequency::Quarterly, &dates), vec![2, 4, 5]);
        assert_eq!(
            period_ends(Frequency::Monthly, &dates),
            vec![0, 1, 2, 3, 4, 5]
        );
    }

    #[test]
    fn unsmoothing_stops_at_a_return_of_minus_100_percent() {
        // Observed −30% after +20% at ρ = 0.6: (−0.3 − 0.12)/0.4 = −1.05, no price can follow.
        assert_eq!(unsmooth_series(&[100.0, 120.0, 84.0], 0.6), Err(2));
        // NaN gaps split the series; each run is rebuilt from its own first price.
        let out = unsmooth_series(&[f64::NAN, 100.0, 102.0, f64::NAN, 50.0, 51.0], 0.5).unwrap();
        assert!(out[0].is_nan() && out[3].is_nan());
        assert_eq!((out[1], out[4]), (100.0, 50.0));
        assert!((out[2] - 102.0).abs() < 1e-12 && (out[5] - 51.0).abs() < 1e-12);
    }
}
